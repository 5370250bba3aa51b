//! `by = "probe_id"` (SPEC §15): one export holding many channels becomes one dataset per
//! distinct value of the `by` column. A channel with a bad cell is invalid on its own; the
//! others are unaffected.

use super::{Dataset, natural_cmp};
use crate::error::Error;

/// One channel of a dataset read with `by`.
#[derive(Debug, Clone)]
pub struct Channel {
    /// The `by` value: text as written (trimmed), a number in its shortest form.
    pub value: String,
    /// The channel's rows, or the error of its first bad row (in file order), with a note
    /// counting the others.
    pub data: Result<Dataset, Error>,
}

/// Split a dataset by its [`Dataset::channels`] labels, channels in natural order of their
/// values (`CH2` before `CH10`). A channel any of whose rows was set aside
/// ([`Dataset::rejected`], lenient reading) gets that error instead of a dataset, also when
/// all its rows were bad. Without channel labels the whole dataset is one channel named "".
pub fn split_by(ds: &Dataset) -> Vec<Channel> {
    let Some(labels) = &ds.channels else {
        return vec![Channel {
            value: String::new(),
            data: Ok(ds.clone()),
        }];
    };
    let mut values: Vec<&str> = labels
        .iter()
        .map(String::as_str)
        .chain(ds.rejected.iter().filter_map(|r| r.channel.as_deref()))
        .collect();
    values.sort_by(|a, b| natural_cmp(a, b).then_with(|| a.cmp(b)));
    values.dedup();
    values
        .into_iter()
        .map(|value| {
            let mut bad: Vec<_> = ds
                .rejected
                .iter()
                .filter(|r| r.channel.as_deref() == Some(value))
                .collect();
            bad.sort_by_key(|r| (r.file, r.line));
            let data = match bad.first() {
                Some(first) => {
                    let mut err = first.error.clone();
                    if bad.len() > 1 {
                        err = err.note(format!(
                            "{} more row{} of this channel {} bad cells",
                            bad.len() - 1,
                            if bad.len() == 2 { "" } else { "s" },
                            if bad.len() == 2 { "has" } else { "have" }
                        ));
                    }
                    Err(err)
                }
                None => {
                    let rows: Vec<usize> = labels
                        .iter()
                        .enumerate()
                        .filter(|(_, l)| l.as_str() == value)
                        .map(|(i, _)| i)
                        .collect();
                    let mut sub = ds.select(&rows);
                    sub.skipped
                        .retain(|s| s.channel.as_deref().is_none_or(|c| c == value));
                    sub.rejected.clear();
                    Ok(sub)
                }
            };
            Channel {
                value: value.to_string(),
                data,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;
    use std::path::PathBuf;

    use super::*;
    use crate::data::{LoadedFile, RejectedRow, RowOrigin};

    fn dataset() -> Dataset {
        let channels = ["CH10", "CH2", "CH10", "CH2", "CH1"];
        Dataset {
            variables: vec!["T".into(), "R".into()],
            headers: vec!["setpoint_c".into(), "reading_ohm".into()],
            columns: vec![
                vec![0.0, 0.0, 50.0, 50.0, 0.0],
                vec![100.0, 101.0, 119.4, 120.4, 99.0],
            ],
            origins: (0..5)
                .map(|i| RowOrigin {
                    file: 0,
                    line: i + 2,
                })
                .collect(),
            files: vec![LoadedFile {
                path: PathBuf::from("bench.xlsx"),
                sha256: String::new(),
                rows: 5,
                sheet: Some("Export".into()),
            }],
            skipped: Vec::new(),
            file_units: BTreeMap::new(),
            channels: Some(channels.iter().map(|c| c.to_string()).collect()),
            groups: None,
            rejected: vec![RejectedRow {
                file: 0,
                line: 9,
                channel: Some("CH7".into()),
                error: Error::input("text `OVL` in column `reading_ohm` is not a number"),
            }],
        }
    }

    #[test]
    fn channels_come_in_natural_order_with_their_rows() {
        let split = split_by(&dataset());
        let names: Vec<&str> = split.iter().map(|c| c.value.as_str()).collect();
        assert_eq!(names, ["CH1", "CH2", "CH7", "CH10"]);
        let ch10 = split[3].data.as_ref().expect("CH10 has only good rows");
        assert_eq!(ch10.column("R"), Some(&[100.0, 119.4][..]));
        assert_eq!(
            ch10.origins.iter().map(|o| o.line).collect::<Vec<_>>(),
            [2, 4]
        );
        assert_eq!(ch10.files[0].rows, 2);
        assert_eq!(
            ch10.channels.as_deref(),
            Some(&["CH10".to_string(), "CH10".to_string()][..])
        );
    }

    #[test]
    fn a_bad_channel_does_not_touch_the_others() {
        let split = split_by(&dataset());
        let ch7 = &split[2];
        let err = ch7.data.as_ref().err().map(|e| e.message.clone());
        assert_eq!(
            err.as_deref(),
            Some("text `OVL` in column `reading_ohm` is not a number")
        );
        assert!(
            split
                .iter()
                .filter(|c| c.value != "CH7")
                .all(|c| c.data.is_ok())
        );
    }

    #[test]
    fn without_by_the_dataset_is_one_channel() {
        let mut ds = dataset();
        ds.channels = None;
        let split = split_by(&ds);
        assert_eq!(split.len(), 1);
        assert_eq!(split[0].data.as_ref().map(Dataset::len).ok(), Some(5));
    }
}

//! What `predict` must say before reading a value off a stored calibration (SPEC §14): the
//! calibration did not meet its criteria, it has been superseded, or the reading lies outside
//! the calibrated range. Pure: the caller reads the result and its history.

use crate::acceptance::fmt_num;
use crate::history::HistoryLine;
use crate::result::ResultDoc;

/// What is being read off.
#[derive(Debug, Clone, PartialEq)]
pub enum Reading<'a> {
    /// The curve at a setting of the predictors (`--at T=25`).
    At(&'a [(String, f64)]),
    /// The predictor from a reading of the response (`--inverse R=9500`).
    Inverse(f64),
}

/// The report id of a result (see [`super::report_id`]).
fn report_id_of(doc: &ResultDoc) -> String {
    doc.metrology
        .as_ref()
        .map(|m| m.report_id.clone())
        .unwrap_or_else(|| super::report_id(&doc.recipe.name, &doc.run_id))
}

/// The warnings, one sentence each, in the order: verdict, superseded, range. `history` is the
/// recipe's `history.jsonl` (lines of other channels are ignored); only lines after the
/// result's own run count as later.
pub fn predict_warnings(
    doc: &ResultDoc,
    history: &[HistoryLine],
    reading: &Reading<'_>,
) -> Vec<String> {
    let mut out = Vec::new();
    match doc.verdict.as_str() {
        "accepted" => {}
        "not-judged" => out.push(
            "this calibration was not judged (its recipe has no acceptance criteria): values read off it come from an unjudged curve".to_string(),
        ),
        code => out.push(format!(
            "this calibration did not meet its acceptance criteria (result code `{code}`): values read off it are not from a calibration whose criteria were met"
        )),
    }
    let id = report_id_of(doc);
    let later: Vec<&HistoryLine> = match history.iter().position(|h| h.run_id == doc.run_id) {
        Some(i) => history.iter().skip(i + 1).collect(),
        None => history
            .iter()
            .filter(|h| h.time > doc.generated_at)
            .collect(),
    };
    let later: Vec<&HistoryLine> = later
        .into_iter()
        .filter(|h| h.channel == doc.channel)
        .collect();
    if let Some(h) = later
        .iter()
        .find(|h| h.supersedes.as_deref() == Some(id.as_str()))
    {
        out.push(format!(
            "report {id} is superseded by the amended report {} (run {})",
            super::report_id(&doc.recipe.name, &h.run_id),
            h.run_id
        ));
    } else if let Some(h) = later.iter().rev().find(|h| h.verdict == "accepted") {
        out.push(format!(
            "a newer calibration of this recipe met its criteria: run {} of {} supersedes this one",
            h.run_id, h.time
        ));
    }
    let range_of = |var: &str| doc.data.ranges.get(var).copied();
    match reading {
        Reading::At(settings) => {
            for (var, v) in settings.iter() {
                if let Some([lo, hi]) = range_of(var)
                    && !(lo..=hi).contains(v)
                {
                    out.push(format!(
                        "{var} = {} lies outside the calibrated range [{}, {}]: an extrapolation",
                        fmt_num(*v),
                        fmt_num(lo),
                        fmt_num(hi)
                    ));
                }
            }
        }
        Reading::Inverse(y) => {
            let var = &doc.model.response;
            if let Some([lo, hi]) = range_of(var)
                && !(lo..=hi).contains(y)
            {
                out.push(format!(
                    "{var} = {} lies outside the range of the calibration readings [{}, {}]: the value read off it is an extrapolation",
                    fmt_num(*y),
                    fmt_num(lo),
                    fmt_num(hi)
                ));
            }
        }
    }
    out
}

//! The stages of one recipe, in order: load and check the recipe, load its data, and (in
//! later stages) analyse, fit, judge and report.

use std::path::Path;

use crate::error::{Error, Result};
use crate::model::Prepared;
use crate::recipe;

/// What `check` found for a valid recipe.
#[derive(Debug)]
pub struct Checked {
    /// One line: name, rows and files (channels for a `by` recipe).
    pub summary: String,
    /// For a recipe with `[data] by`: each channel in natural order, with its own summary or
    /// error. Empty otherwise.
    pub channels: Vec<(String, Result<String>)>,
}

impl Checked {
    /// The channels that are invalid.
    pub fn invalid_channels(&self) -> impl Iterator<Item = (&str, &Error)> {
        self.channels
            .iter()
            .filter_map(|(c, r)| r.as_ref().err().map(|e| (c.as_str(), e)))
    }
}

/// Validate a recipe and its data; a one-line summary on success (and one per channel for a
/// recipe with `by`, where a channel with bad data is invalid on its own).
pub fn check(path: &Path) -> Result<Checked> {
    let recipe = recipe::load(path)?;
    if recipe.data.by.is_some() {
        let set = crate::model::prepare_channels(&recipe)?;
        let files = set.files.len();
        let channels = set.channels;
        let invalid = channels.iter().filter(|(_, p)| p.is_err()).count();
        let summary = format!(
            "{}: {} channel{} from {files} file{}{}",
            recipe.name.value,
            channels.len(),
            if channels.len() == 1 { "" } else { "s" },
            if files == 1 { "" } else { "s" },
            if invalid > 0 {
                format!(", {invalid} invalid")
            } else {
                String::new()
            }
        );
        let channels = channels
            .into_iter()
            .map(|(c, p)| (c, p.map(|p| rows_summary(&p))))
            .collect();
        return Ok(Checked { summary, channels });
    }
    let prep = crate::model::prepare(&recipe)?;
    Ok(Checked {
        summary: format!("{}: {}", recipe.name.value, rows_summary(&prep)),
        channels: Vec::new(),
    })
}

/// "19 rows from 2 files, 3 filtered out".
fn rows_summary(prep: &Prepared) -> String {
    let ds = &prep.data;
    let filtered = if prep.rows_filtered > 0 {
        format!(", {} filtered out", prep.rows_filtered)
    } else {
        String::new()
    };
    format!(
        "{} rows from {} file{}{filtered}",
        ds.len(),
        ds.files.len(),
        if ds.files.len() == 1 { "" } else { "s" }
    )
}

//! The stages of one recipe, in order: load and check the recipe, load its data, and (in
//! later stages) analyse, fit, judge and report.

use std::path::Path;

use crate::error::Result;
use crate::recipe;

/// Validate a recipe and its data; a one-line summary on success.
pub fn check(path: &Path) -> Result<String> {
    let recipe = recipe::load(path)?;
    let prep = crate::model::prepare(&recipe)?;
    let ds = &prep.data;
    let filtered = if prep.rows_filtered > 0 {
        format!(", {} filtered out", prep.rows_filtered)
    } else {
        String::new()
    };
    Ok(format!(
        "{}: {} rows from {} file{}{filtered}",
        recipe.name.value,
        ds.len(),
        ds.files.len(),
        if ds.files.len() == 1 { "" } else { "s" }
    ))
}

//! The stages of one recipe, in order: load and check the recipe, load its data, and (in
//! later stages) analyse, fit, judge and report.

use std::path::Path;

use crate::data;
use crate::error::Result;
use crate::recipe;

/// Validate a recipe and its data; a one-line summary on success.
pub fn check(path: &Path) -> Result<String> {
    let recipe = recipe::load(path)?;
    let wanted = data::mapped_columns(&recipe);
    let ds = data::load(&recipe, &wanted)?;
    Ok(format!(
        "{}: {} rows from {} file{}",
        recipe.name.value,
        ds.len(),
        ds.files.len(),
        if ds.files.len() == 1 { "" } else { "s" }
    ))
}

//! Fuzz target for the recipe loader: arbitrary bytes as a recipe file.
//!
//! Every input must give a checked recipe or an error that renders (with its position
//! inside the text), never a panic or a stack overflow. A checked recipe's model must
//! parse or be refused, and a small one must survive the linearizability analysis.
//! Nothing touches the disk: `recipe::from_bytes` only names the path.
#![no_main]

use std::path::Path;

use fitwright::analysis::{FreeParameter, ModelSpec, TransformChoice, analyze};
use fitwright::model::parse_model;
use fitwright::recipe::from_bytes;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let recipe = match from_bytes(Path::new("fuzz/recipe.toml"), data.to_vec()) {
        Ok(r) => r,
        Err(e) => {
            let _ = e.to_string();
            return;
        }
    };
    let (model, _) = match parse_model(&recipe) {
        Ok(m) => m,
        Err(e) => {
            let _ = e.to_string();
            return;
        }
    };
    if model.equation.len() > 300 {
        return;
    }
    let spec = ModelSpec {
        response: model.response.clone(),
        rhs: model.rhs.clone(),
        predictors: model.predictors.clone(),
        parameters: model
            .free()
            .iter()
            .map(|p| FreeParameter {
                name: p.name.clone(),
                start: p.start,
            })
            .collect(),
        fixed: model
            .parameters
            .iter()
            .filter_map(|p| p.fixed.map(|v| (p.name.clone(), v)))
            .collect(),
    };
    let analysis = analyze(&spec, &TransformChoice::Auto);
    let _ = fitwright::analysis::explain_text(&analysis);
});

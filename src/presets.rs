//! Built-in model presets (`[model] preset = "…"`, `fitwright models`): published models with
//! their usual names and equations in fitwright's grammar.
//!
//! The library is filled by the analysis stage's catalogue; see DEVELOPERS.md "How to add a
//! preset".

/// A built-in model.
#[derive(Debug, Clone, Copy)]
pub struct Preset {
    /// The name used in recipes, e.g. `power-law`.
    pub key: &'static str,
    /// The usual name.
    pub title: &'static str,
    /// The equation in fitwright's grammar.
    pub equation: &'static str,
    /// Parameters with typical start values (`None` where the model is linear in it).
    pub parameters: &'static [(&'static str, Option<f64>)],
    pub description: &'static str,
}

const PRESETS: &[Preset] = &[
    Preset {
        key: "straight-line",
        title: "Straight line",
        equation: "y = b0 + b1 * x",
        parameters: &[("b0", None), ("b1", None)],
        description: "linear response with an offset",
    },
    Preset {
        key: "line-through-origin",
        title: "Straight line through the origin",
        equation: "y = b1 * x",
        parameters: &[("b1", None)],
        description: "proportional response, no offset",
    },
];

/// Every preset, in the order `fitwright models` lists them.
pub fn all() -> &'static [Preset] {
    PRESETS
}

/// The preset of a recipe key.
pub fn find(key: &str) -> Option<&'static Preset> {
    PRESETS.iter().find(|p| p.key == key)
}

//! Built-in model presets (`[model] preset`, `fitwright models`): published models under
//! their usual names, written in our grammar.
//!
//! Equations are the standard textbook forms (from memory); the typical starts are
//! common-practice orders of magnitude for the scenario named, not fitted values.

use crate::expr::{Equation, parse_equation};

/// A built-in model.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Preset {
    /// The key used in recipes: `[model] preset = "thermistor-beta"`.
    pub key: &'static str,
    pub name: &'static str,
    pub equation: &'static str,
    pub response: &'static str,
    pub predictors: &'static [&'static str],
    /// Parameter names with a typical start value.
    pub parameters: &'static [(&'static str, f64)],
    pub description: &'static str,
}

impl Preset {
    /// The parsed equation (every preset parses; a test checks it).
    pub fn parse(&self) -> Equation {
        parse_equation(self.equation).expect("built-in preset equations parse")
    }

    pub fn parameter_names(&self) -> Vec<&'static str> {
        self.parameters.iter().map(|(n, _)| *n).collect()
    }
}

const PRESETS: &[Preset] = &[
    Preset {
        key: "line",
        name: "Straight line",
        equation: "y = a + b*x",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 0.0), ("b", 1.0)],
        description: "Offset a and slope b; linear in its parameters.",
    },
    Preset {
        key: "line-origin",
        name: "Line through the origin",
        equation: "y = b*x",
        response: "y",
        predictors: &["x"],
        parameters: &[("b", 1.0)],
        description: "Proportional response without offset (R² is uncentred).",
    },
    Preset {
        key: "poly2",
        name: "Polynomial, degree 2",
        equation: "y = a + b*x + c*x^2",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 0.0), ("b", 1.0), ("c", 0.0)],
        description: "Quadratic calibration curve, e.g. a load cell's non-linearity.",
    },
    Preset {
        key: "poly3",
        name: "Polynomial, degree 3",
        equation: "y = a + b*x + c*x^2 + d*x^3",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 0.0), ("b", 1.0), ("c", 0.0), ("d", 0.0)],
        description: "Cubic calibration curve.",
    },
    Preset {
        key: "exponential",
        name: "Exponential",
        equation: "y = a*exp(b*x)",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 1.0), ("b", 0.1)],
        description: "Growth or decay at a constant relative rate b; linearized by ln(y).",
    },
    Preset {
        key: "power",
        name: "Power law",
        equation: "y = a*x^b",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 1.0), ("b", 0.5)],
        description: "Power-law sensor response (e.g. a gas sensor's resistance vs concentration); linearized by ln(y) for x > 0.",
    },
    Preset {
        key: "saturation",
        name: "Saturation growth",
        equation: "y = a*(1 - exp(-b*x))",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 1.0), ("b", 1.0)],
        description: "First-order rise to the plateau a at rate b (step response, sensor warm-up); fitted nonlinearly.",
    },
    Preset {
        key: "michaelis-menten",
        name: "Michaelis–Menten",
        equation: "v = Vmax*S/(Km + S)",
        response: "v",
        predictors: &["S"],
        parameters: &[("Vmax", 1.0), ("Km", 1.0)],
        description: "Enzyme rate v vs substrate concentration S; Vmax the limiting rate, Km the half-saturation concentration.",
    },
    Preset {
        key: "langmuir",
        name: "Langmuir isotherm",
        equation: "q = qmax*K*C/(1 + K*C)",
        response: "q",
        predictors: &["C"],
        parameters: &[("qmax", 1.0), ("K", 1.0)],
        description: "Adsorbed amount q vs concentration (or pressure) C; qmax the monolayer capacity, K the affinity.",
    },
    Preset {
        key: "arrhenius",
        name: "Arrhenius",
        equation: "k = A*exp(-Ea/(8.314462618*T))",
        response: "k",
        predictors: &["T"],
        parameters: &[("A", 1e6), ("Ea", 5e4)],
        description: "Rate constant k vs absolute temperature T (K); Ea in J/mol, 8.314462618 J/(mol·K) the molar gas constant.",
    },
    Preset {
        key: "thermistor-beta",
        name: "Thermistor beta model",
        equation: "R = R25*exp(B*(1/(T + 273.15) - 1/298.15))",
        response: "R",
        predictors: &["T"],
        parameters: &[("R25", 10000.0), ("B", 3950.0)],
        description: "NTC thermistor resistance R (Ω) vs temperature T (°C); R25 the resistance at 25 °C, B the beta constant (K).",
    },
    Preset {
        key: "steinhart-hart",
        name: "Steinhart–Hart",
        equation: "T = 1/(A + B*ln(R) + C*ln(R)^3)",
        response: "T",
        predictors: &["R"],
        parameters: &[("A", 1.1e-3), ("B", 2.4e-4), ("C", 7.5e-8)],
        description: "Thermistor absolute temperature T (K) vs resistance R (Ω); linear in A, B, C after 1/T.",
    },
    Preset {
        key: "logistic4",
        name: "Four-parameter logistic",
        equation: "y = d + (a - d)/(1 + (x/c)^b)",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 0.0), ("b", 1.0), ("c", 1.0), ("d", 1.0)],
        description: "Sigmoidal assay standard curve: response a at zero dose, d at infinite dose, midpoint c, slope b.",
    },
    Preset {
        key: "gompertz",
        name: "Gompertz",
        equation: "y = a*exp(-b*exp(-c*x))",
        response: "y",
        predictors: &["x"],
        parameters: &[("a", 1.0), ("b", 1.0), ("c", 1.0)],
        description: "Asymmetric sigmoid growth to the asymptote a; b sets the displacement, c the rate.",
    },
    Preset {
        key: "hill",
        name: "Hill",
        equation: "y = Vmax*x^n/(K^n + x^n)",
        response: "y",
        predictors: &["x"],
        parameters: &[("Vmax", 1.0), ("K", 1.0), ("n", 1.0)],
        description: "Cooperative binding or dose response: maximum Vmax, half-effect concentration K, Hill coefficient n.",
    },
];

/// Every built-in preset, in the order `fitwright models` lists them.
pub fn presets() -> &'static [Preset] {
    PRESETS
}

/// The preset with this key (exact, case-sensitive).
pub fn preset(key: &str) -> Option<&'static Preset> {
    PRESETS.iter().find(|p| p.key == key)
}

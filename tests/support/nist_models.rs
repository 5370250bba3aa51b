//! The 27 NIST StRD nonlinear models, hand-coded with their exact Jacobians.
//!
//! Each formula is the one printed in the header of the problem's `.dat` file (NIST ITL StRD,
//! "Nonlinear Regression"); the derivatives are worked out by hand. Nelson's model is stated
//! for log[y], so its response is ln y. These stand in until the expression engine can build
//! the same models from text.

use fitwright::fit::lm::{Model, ModelError};
use nalgebra::DMatrix;

/// Which formula.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Formula {
    /// b1·(1 − exp(−b2·x)) — Misra1a, BoxBOD.
    SaturatingExp,
    /// exp(−b1·x)/(b2 + b3·x) — Chwirut1, Chwirut2.
    Chwirut,
    /// b1·x^b2 — DanWood.
    Power,
    /// b1·(1 − (1 + b2·x/2)^(−2)) — Misra1b.
    Misra1b,
    /// b1·(1 − (1 + 2·b2·x)^(−1/2)) — Misra1c.
    Misra1c,
    /// b1·b2·x·(1 + b2·x)^(−1) — Misra1d.
    Misra1d,
    /// (b1 + b2·x + b3·x²)/(1 + b4·x + b5·x²) — Kirby2.
    RationalQuadratic,
    /// (b1 + b2·x + b3·x² + b4·x³)/(1 + b5·x + b6·x² + b7·x³) — Hahn1, Thurber.
    RationalCubic,
    /// ln y = b1 − b2·x1·exp(−b3·x2) — Nelson.
    Nelson,
    /// b1·exp(−b2·x) + b3·exp(−b4·x) + b5·exp(−b6·x) — Lanczos1–3.
    ThreeExponentials,
    /// b1·exp(−b2·x) + b3·exp(−(x−b4)²/b5²) + b6·exp(−(x−b7)²/b8²) — Gauss1–3.
    TwoGaussians,
    /// b1 − b2·x − arctan(b3/(x − b4))/π — Roszman1.
    Roszman,
    /// b1 + b2·cos(2πx/12) + b3·sin(2πx/12) + b5·cos(2πx/b4) + b6·sin(2πx/b4)
    /// + b8·cos(2πx/b7) + b9·sin(2πx/b7) — ENSO.
    Enso,
    /// b1·(x² + x·b2)/(x² + x·b3 + b4) — MGH09.
    Mgh09,
    /// b1·exp(b2/(x + b3)) — MGH10.
    Mgh10,
    /// b1 + b2·exp(−x·b4) + b3·exp(−x·b5) — MGH17.
    Mgh17,
    /// b1/(1 + exp(b2 − b3·x)) — Rat42.
    Rat42,
    /// b1/(1 + exp(b2 − b3·x))^(1/b4) — Rat43.
    Rat43,
    /// (b1/b2)·exp(−0.5·((x − b3)/b2)²) — Eckerle4.
    Eckerle4,
    /// b1·(b2 + x)^(−1/b3) — Bennett5.
    Bennett5,
}

/// The formula of a NIST problem, by name.
pub fn formula(name: &str) -> Option<Formula> {
    use Formula::*;
    Some(match name {
        "Misra1a" | "BoxBOD" => SaturatingExp,
        "Chwirut1" | "Chwirut2" => Chwirut,
        "DanWood" => Power,
        "Misra1b" => Misra1b,
        "Misra1c" => Misra1c,
        "Misra1d" => Misra1d,
        "Kirby2" => RationalQuadratic,
        "Hahn1" | "Thurber" => RationalCubic,
        "Nelson" => Nelson,
        "Lanczos1" | "Lanczos2" | "Lanczos3" => ThreeExponentials,
        "Gauss1" | "Gauss2" | "Gauss3" => TwoGaussians,
        "Roszman1" => Roszman,
        "ENSO" => Enso,
        "MGH09" => Mgh09,
        "MGH10" => Mgh10,
        "MGH17" => Mgh17,
        "Rat42" => Rat42,
        "Rat43" => Rat43,
        "Eckerle4" => Eckerle4,
        "Bennett5" => Bennett5,
        _ => return None,
    })
}

/// A NIST model over its predictor columns.
#[derive(Debug, Clone)]
pub struct NistModel {
    pub name: &'static str,
    pub formula: Formula,
    pub x: Vec<f64>,
    /// Second predictor (Nelson only).
    pub x2: Vec<f64>,
}

impl NistModel {
    pub fn new(name: &'static str, x: &[Vec<f64>]) -> Self {
        let formula = formula(name).unwrap_or_else(|| panic!("no model for {name}"));
        NistModel {
            name,
            formula,
            x: x[0].clone(),
            x2: x.get(1).cloned().unwrap_or_default(),
        }
    }

    /// The response the model is stated for (ln y for Nelson).
    pub fn response(&self, y: &[f64]) -> Vec<f64> {
        match self.formula {
            Formula::Nelson => y.iter().map(|v| v.ln()).collect(),
            _ => y.to_vec(),
        }
    }

    fn p(&self) -> usize {
        use Formula::*;
        match self.formula {
            SaturatingExp | Power | Misra1b | Misra1c | Misra1d => 2,
            Chwirut | Nelson | Mgh10 | Rat42 | Eckerle4 | Bennett5 => 3,
            Roszman | Mgh09 | Rat43 => 4,
            RationalQuadratic | Mgh17 => 5,
            ThreeExponentials => 6,
            RationalCubic => 7,
            TwoGaussians => 8,
            Enso => 9,
        }
    }

    /// Value and (optionally) gradient at row i.
    fn row(&self, b: &[f64], i: usize, g: Option<&mut [f64]>) -> f64 {
        use Formula::*;
        use std::f64::consts::PI;
        let x = self.x[i];
        match self.formula {
            SaturatingExp => {
                let e = (-b[1] * x).exp();
                if let Some(g) = g {
                    g[0] = 1.0 - e;
                    g[1] = b[0] * x * e;
                }
                b[0] * (1.0 - e)
            }
            Chwirut => {
                let e = (-b[0] * x).exp();
                let d = b[1] + b[2] * x;
                if let Some(g) = g {
                    g[0] = -x * e / d;
                    g[1] = -e / (d * d);
                    g[2] = -x * e / (d * d);
                }
                e / d
            }
            Power => {
                let v = x.powf(b[1]);
                if let Some(g) = g {
                    g[0] = v;
                    g[1] = b[0] * v * x.ln();
                }
                b[0] * v
            }
            Misra1b => {
                let u = 1.0 + b[1] * x / 2.0;
                if let Some(g) = g {
                    g[0] = 1.0 - u.powi(-2);
                    g[1] = b[0] * x * u.powi(-3);
                }
                b[0] * (1.0 - u.powi(-2))
            }
            Misra1c => {
                let u = 1.0 + 2.0 * b[1] * x;
                let r = u.sqrt();
                if let Some(g) = g {
                    g[0] = 1.0 - 1.0 / r;
                    g[1] = b[0] * x / (u * r);
                }
                b[0] * (1.0 - 1.0 / r)
            }
            Misra1d => {
                let u = 1.0 + b[1] * x;
                if let Some(g) = g {
                    g[0] = b[1] * x / u;
                    g[1] = b[0] * x / (u * u);
                }
                b[0] * b[1] * x / u
            }
            RationalQuadratic => {
                let num = b[0] + b[1] * x + b[2] * x * x;
                let den = 1.0 + b[3] * x + b[4] * x * x;
                if let Some(g) = g {
                    g[0] = 1.0 / den;
                    g[1] = x / den;
                    g[2] = x * x / den;
                    g[3] = -num * x / (den * den);
                    g[4] = -num * x * x / (den * den);
                }
                num / den
            }
            RationalCubic => {
                let (x2, x3) = (x * x, x * x * x);
                let num = b[0] + b[1] * x + b[2] * x2 + b[3] * x3;
                let den = 1.0 + b[4] * x + b[5] * x2 + b[6] * x3;
                if let Some(g) = g {
                    g[0] = 1.0 / den;
                    g[1] = x / den;
                    g[2] = x2 / den;
                    g[3] = x3 / den;
                    let q = -num / (den * den);
                    g[4] = q * x;
                    g[5] = q * x2;
                    g[6] = q * x3;
                }
                num / den
            }
            Nelson => {
                let x2 = self.x2[i];
                let e = (-b[2] * x2).exp();
                if let Some(g) = g {
                    g[0] = 1.0;
                    g[1] = -x * e;
                    g[2] = b[1] * x * x2 * e;
                }
                b[0] - b[1] * x * e
            }
            ThreeExponentials => {
                let (e1, e2, e3) = ((-b[1] * x).exp(), (-b[3] * x).exp(), (-b[5] * x).exp());
                if let Some(g) = g {
                    g[0] = e1;
                    g[1] = -b[0] * x * e1;
                    g[2] = e2;
                    g[3] = -b[2] * x * e2;
                    g[4] = e3;
                    g[5] = -b[4] * x * e3;
                }
                b[0] * e1 + b[2] * e2 + b[4] * e3
            }
            TwoGaussians => {
                let e = (-b[1] * x).exp();
                let (d1, d2) = (x - b[3], x - b[6]);
                let g1 = (-d1 * d1 / (b[4] * b[4])).exp();
                let g2 = (-d2 * d2 / (b[7] * b[7])).exp();
                if let Some(g) = g {
                    g[0] = e;
                    g[1] = -b[0] * x * e;
                    g[2] = g1;
                    g[3] = b[2] * g1 * 2.0 * d1 / (b[4] * b[4]);
                    g[4] = b[2] * g1 * 2.0 * d1 * d1 / (b[4] * b[4] * b[4]);
                    g[5] = g2;
                    g[6] = b[5] * g2 * 2.0 * d2 / (b[7] * b[7]);
                    g[7] = b[5] * g2 * 2.0 * d2 * d2 / (b[7] * b[7] * b[7]);
                }
                b[0] * e + b[2] * g1 + b[5] * g2
            }
            Roszman => {
                let d = x - b[3];
                let q = b[2] / d;
                if let Some(g) = g {
                    let c = 1.0 / (PI * (1.0 + q * q));
                    g[0] = 1.0;
                    g[1] = -x;
                    g[2] = -c / d;
                    g[3] = -c * b[2] / (d * d);
                }
                b[0] - b[1] * x - q.atan() / PI
            }
            Enso => {
                let w0 = 2.0 * PI * x / 12.0;
                let w1 = 2.0 * PI * x / b[3];
                let w2 = 2.0 * PI * x / b[6];
                let (s1, c1) = w1.sin_cos();
                let (s2, c2) = w2.sin_cos();
                if let Some(g) = g {
                    g[0] = 1.0;
                    g[1] = w0.cos();
                    g[2] = w0.sin();
                    g[3] = (w1 / b[3]) * (b[4] * s1 - b[5] * c1);
                    g[4] = c1;
                    g[5] = s1;
                    g[6] = (w2 / b[6]) * (b[7] * s2 - b[8] * c2);
                    g[7] = c2;
                    g[8] = s2;
                }
                b[0] + b[1] * w0.cos()
                    + b[2] * w0.sin()
                    + b[4] * c1
                    + b[5] * s1
                    + b[7] * c2
                    + b[8] * s2
            }
            Mgh09 => {
                let num = x * x + x * b[1];
                let den = x * x + x * b[2] + b[3];
                if let Some(g) = g {
                    g[0] = num / den;
                    g[1] = b[0] * x / den;
                    g[2] = -b[0] * num * x / (den * den);
                    g[3] = -b[0] * num / (den * den);
                }
                b[0] * num / den
            }
            Mgh10 => {
                let d = x + b[2];
                let e = (b[1] / d).exp();
                if let Some(g) = g {
                    g[0] = e;
                    g[1] = b[0] * e / d;
                    g[2] = -b[0] * e * b[1] / (d * d);
                }
                b[0] * e
            }
            Mgh17 => {
                let (e4, e5) = ((-x * b[3]).exp(), (-x * b[4]).exp());
                if let Some(g) = g {
                    g[0] = 1.0;
                    g[1] = e4;
                    g[2] = e5;
                    g[3] = -b[1] * x * e4;
                    g[4] = -b[2] * x * e5;
                }
                b[0] + b[1] * e4 + b[2] * e5
            }
            Rat42 => {
                let e = (b[1] - b[2] * x).exp();
                let d = 1.0 + e;
                if let Some(g) = g {
                    g[0] = 1.0 / d;
                    g[1] = -b[0] * e / (d * d);
                    g[2] = b[0] * x * e / (d * d);
                }
                b[0] / d
            }
            Rat43 => {
                let e = (b[1] - b[2] * x).exp();
                let d = 1.0 + e;
                let v = d.powf(-1.0 / b[3]);
                if let Some(g) = g {
                    g[0] = v;
                    g[1] = -b[0] * v * e / (b[3] * d);
                    g[2] = b[0] * v * x * e / (b[3] * d);
                    g[3] = b[0] * v * d.ln() / (b[3] * b[3]);
                }
                b[0] * v
            }
            Eckerle4 => {
                let u = (x - b[2]) / b[1];
                let e = (-0.5 * u * u).exp();
                if let Some(g) = g {
                    g[0] = e / b[1];
                    g[1] = b[0] * e * (u * u - 1.0) / (b[1] * b[1]);
                    g[2] = b[0] * e * u / (b[1] * b[1]);
                }
                b[0] / b[1] * e
            }
            Bennett5 => {
                let u = b[1] + x;
                let v = u.powf(-1.0 / b[2]);
                if let Some(g) = g {
                    g[0] = v;
                    g[1] = -b[0] * v / (b[2] * u);
                    g[2] = b[0] * v * u.ln() / (b[2] * b[2]);
                }
                b[0] * v
            }
        }
    }
}

fn domain_error(name: &str, row: usize) -> ModelError {
    ModelError::new(format!(
        "{name}: the model is not finite at row {}",
        row + 1
    ))
}

impl Model for NistModel {
    fn n_params(&self) -> usize {
        self.p()
    }

    fn eval(&self, params: &[f64], f_out: &mut [f64]) -> Result<(), ModelError> {
        for (i, f) in f_out.iter_mut().enumerate() {
            *f = self.row(params, i, None);
            if !f.is_finite() {
                return Err(domain_error(self.name, i));
            }
        }
        Ok(())
    }

    fn jacobian(&self, params: &[f64], j_out: &mut DMatrix<f64>) -> Result<(), ModelError> {
        let mut g = [0.0; 9];
        let p = self.p();
        for i in 0..j_out.nrows() {
            self.row(params, i, Some(&mut g[..p]));
            for j in 0..p {
                if !g[j].is_finite() {
                    return Err(domain_error(self.name, i));
                }
                j_out[(i, j)] = g[j];
            }
        }
        Ok(())
    }
}

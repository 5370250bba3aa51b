//! One-dimensional root finding by Brent's method, shared by the quantile
//! polishing in [`super::distributions`] and inverse prediction in
//! [`super::calibration`].

/// Why a bracketed root search failed.
#[derive(Debug, Clone, PartialEq)]
pub enum RootError {
    /// `f(a)` and `f(b)` have the same sign, so `[a, b]` brackets no root.
    NotBracketed,
    /// The function returned NaN or an infinity at `x`.
    NonFinite { x: f64 },
}

/// Find a root of `f` in `[a, b]` by Brent's method (bisection, secant and
/// inverse quadratic interpolation; R. P. Brent, *Algorithms for Minimization
/// without Derivatives*, 1973, ch. 4, procedure `zero` — from memory).
///
/// Requires `f(a)` and `f(b)` of opposite sign (or one of them zero). Stops
/// when the bracket is narrower than `2·tol(x)` with
/// `tol(x) = 2ε|x| + rel_tol·|x| + abs_tol`, or after 500 iterations (each
/// iteration at least halves the bracket every few steps, so the cap is never
/// reached for `rel_tol ≥ ε`). Returns the best estimate.
pub fn brent<F: FnMut(f64) -> f64>(
    mut f: F,
    a: f64,
    b: f64,
    rel_tol: f64,
    abs_tol: f64,
) -> Result<f64, RootError> {
    let (mut a, mut b) = (a, b);
    let mut fa = f(a);
    let mut fb = f(b);
    if !fa.is_finite() {
        return Err(RootError::NonFinite { x: a });
    }
    if !fb.is_finite() {
        return Err(RootError::NonFinite { x: b });
    }
    if fa == 0.0 {
        return Ok(a);
    }
    if fb == 0.0 {
        return Ok(b);
    }
    if (fa > 0.0) == (fb > 0.0) {
        return Err(RootError::NotBracketed);
    }
    let mut c = a;
    let mut fc = fa;
    let mut d = b - a;
    let mut e = d;
    for _ in 0..500 {
        if (fb > 0.0) == (fc > 0.0) {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol = 2.0 * f64::EPSILON * b.abs() + rel_tol * b.abs() + abs_tol;
        let m = 0.5 * (c - b);
        if m.abs() <= tol || fb == 0.0 {
            return Ok(b);
        }
        if e.abs() < tol || fa.abs() <= fb.abs() {
            d = m;
            e = m;
        } else {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                // Secant step.
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                // Inverse quadratic interpolation.
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * m * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * m * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = m;
                e = m;
            }
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol { d } else { tol.copysign(m) };
        fb = f(b);
        if !fb.is_finite() {
            return Err(RootError::NonFinite { x: b });
        }
    }
    Ok(b)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_cube_root_of_two_to_full_precision() {
        // 2^(1/3) = 1.2599210498948731647672... (closed form).
        let r = brent(|x| x * x * x - 2.0, 0.0, 2.0, 1e-15, 0.0).unwrap();
        assert!((r - 2f64.cbrt()).abs() < 4e-15, "{r}");
    }

    #[test]
    fn refuses_an_interval_without_sign_change() {
        assert_eq!(
            brent(|x| x * x + 1.0, -1.0, 1.0, 1e-12, 0.0),
            Err(RootError::NotBracketed)
        );
    }

    #[test]
    fn reports_a_nan_instead_of_looping() {
        let r = brent(
            |x| if x > 0.5 { f64::NAN } else { x - 0.7 },
            0.0,
            1.0,
            1e-12,
            0.0,
        );
        assert!(matches!(r, Err(RootError::NonFinite { .. })));
    }

    #[test]
    fn handles_a_root_at_an_endpoint() {
        assert_eq!(brent(|x| x - 1.0, 1.0, 3.0, 1e-12, 0.0), Ok(1.0));
    }
}

//! Weighted fits checked against statsmodels and scipy.
//!
//! Reference values generated once by `python3 scripts/reference_fit_values.py`
//! (numpy 2.4, scipy 1.17, statsmodels 0.15) and pasted below: A from statsmodels `WLS`
//! (parameters, standard errors, covariance, R², adjusted R², 95 % intervals, mean and
//! observation intervals at a new point), B from `scipy.optimize.curve_fit` (MINPACK lm, tight
//! tolerances) with `absolute_sigma=False` (our mode "residuals") and `True` (mode "weights"),
//! χ² p-value from `scipy.stats.chi2.sf`. The data are invented calibration scenarios.

use fitwright::fit::covariance::{self, NewReading, UncertaintyMode, UncertaintySettings};
use fitwright::fit::linear::fit_linear;
use fitwright::fit::lm::{self, LmOptions, Model, ModelError, Observations};
use nalgebra::DMatrix;

const A_X: [f64; 9] = [0.0, 25.0, 50.0, 100.0, 200.0, 300.0, 400.0, 600.0, 800.0];
const A_Y: [f64; 9] = [
    0.012, 0.871, 1.702, 3.391, 6.604, 9.731, 12.79, 18.612, 24.205,
];
const A_U: [f64; 9] = [0.005, 0.006, 0.008, 0.012, 0.02, 0.03, 0.04, 0.06, 0.08];
const A_PARAMS: [f64; 3] = [
    0.018296939392307674,
    0.033951931406947335,
    -4.8221509734383405e-06,
];
const A_BSE: [f64; 3] = [
    0.0059331363266085894,
    0.00013245765936360047,
    2.625002183510808e-07,
];
const A_COV: [f64; 9] = [
    3.520210667012247e-05,
    -4.5601227632249436e-07,
    6.710654223196173e-10,
    -4.5601227632249436e-07,
    1.7545031524083616e-08,
    -3.015090843008942e-11,
    6.710654223196173e-10,
    -3.015090843008942e-11,
    6.890636463436508e-14,
];
const A_RSQUARED: f64 = 0.9999742835531741;
const A_RSQUARED_ADJ: f64 = 0.9999657114042321;
const A_SSR: f64 = 12.88909702657835;
const A_CI_LOW: [f64; 3] = [
    0.003779077800270333,
    0.03362781919047562,
    -5.464465868649745e-06,
];
const A_CI_HIGH: [f64; 3] = [
    0.03281480098434501,
    0.03427604362341905,
    -4.179836078226936e-06,
];
const A_X0: f64 = 350.0;
const A_U0: f64 = 0.035;
const A_MEAN_CI_LOW: f64 = 11.257247727683195;
const A_MEAN_CI_HIGH: f64 = 11.364271147472161;
const A_OBS_CI_LOW: f64 = 11.174306402344698;
const A_OBS_CI_HIGH: f64 = 11.447212472810659;
const B_T: [f64; 10] = [-20.0, -10.0, 0.0, 10.0, 20.0, 25.0, 30.0, 40.0, 50.0, 60.0];
const B_R: [f64; 10] = [
    96210.0, 55480.0, 32910.0, 19950.0, 12450.0, 10010.0, 8070.0, 5340.0, 3610.0, 2490.0,
];
const B_U: [f64; 10] = [
    972.1,
    564.8000000000001,
    339.1,
    209.5,
    134.5,
    110.10000000000001,
    90.7,
    63.4,
    46.1,
    34.900000000000006,
];
const B_START: [f64; 2] = [9000.0, 3500.0];
const B_PARAMS: [f64; 2] = [9925.584216253785, 3851.238547077653];
const B_COV_RESIDUALS: [f64; 4] = [
    2900.2938174703536,
    -370.19153962547074,
    -370.19153962547074,
    296.9484421068278,
];
const B_COV_WEIGHTS: [f64; 4] = [
    1446.726348942554,
    -184.65917187621443,
    -184.65917187621443,
    148.1240048458579,
];
const B_CHI2: f64 = 16.03782951538967;
const B_CHI2_P: f64 = 0.041841844808270086;
const B_T975_8: f64 = 2.306004135204166;

fn close(got: f64, want: f64, rel: f64, what: &str) {
    assert!(
        (got - want).abs() <= rel * want.abs(),
        "{what}: got {got:e}, reference {want:e} (relative tolerance {rel:e})"
    );
}

#[test]
fn weighted_quadratic_matches_statsmodels_wls() {
    let w: Vec<f64> = A_U.iter().map(|u| 1.0 / (u * u)).collect();
    let x = DMatrix::from_fn(A_X.len(), 3, |i, j| A_X[i].powi(j as i32));
    let fit = fit_linear(&x, &A_Y, Some(&w), &["a", "b", "c"]).unwrap();
    let unc = covariance::uncertainty_from_unscaled(
        &fit.unscaled_covariance,
        &fit.coefficients,
        &[true; 3],
        A_X.len(),
        fit.ssr,
        UncertaintySettings::default(),
    )
    .unwrap();
    let stats = covariance::fit_statistics(
        &A_Y,
        Some(&w),
        &fit.fitted,
        3,
        true,
        UncertaintyMode::Residuals,
    )
    .unwrap();
    for j in 0..3 {
        close(fit.coefficients[j], A_PARAMS[j], 1e-10, "parameter");
        close(unc.std_errors[j].unwrap(), A_BSE[j], 1e-9, "standard error");
        let (lo, hi) = unc.intervals[j].unwrap();
        close(lo, A_CI_LOW[j], 1e-9, "interval low");
        close(hi, A_CI_HIGH[j], 1e-9, "interval high");
        for k in 0..3 {
            close(unc.covariance[(j, k)], A_COV[3 * j + k], 1e-9, "covariance");
        }
    }
    close(fit.ssr, A_SSR, 1e-10, "weighted SSR");
    close(stats.r_squared.unwrap(), A_RSQUARED, 1e-12, "R²");
    close(
        stats.adjusted_r_squared.unwrap(),
        A_RSQUARED_ADJ,
        1e-12,
        "adjusted R²",
    );
    let g = [1.0, A_X0, A_X0 * A_X0];
    let yhat: f64 = g.iter().zip(&fit.coefficients).map(|(g, b)| g * b).sum();
    let band = unc
        .band(
            &g,
            yhat,
            Some(NewReading {
                weight: 1.0 / (A_U0 * A_U0),
                count: 1,
            }),
        )
        .unwrap();
    close(
        band.confidence.0,
        A_MEAN_CI_LOW,
        1e-10,
        "confidence band low",
    );
    close(
        band.confidence.1,
        A_MEAN_CI_HIGH,
        1e-10,
        "confidence band high",
    );
    let (plo, phi) = band.prediction.unwrap();
    close(plo, A_OBS_CI_LOW, 1e-10, "prediction band low");
    close(phi, A_OBS_CI_HIGH, 1e-10, "prediction band high");
}

/// R = R25·exp(B·(1/(T + 273.15) − 1/298.15)).
struct Beta<'a>(&'a [f64]);

impl Model for Beta<'_> {
    fn n_params(&self) -> usize {
        2
    }
    fn eval(&self, p: &[f64], f: &mut [f64]) -> Result<(), ModelError> {
        for (fi, t) in f.iter_mut().zip(self.0) {
            *fi = p[0] * (p[1] * (1.0 / (t + 273.15) - 1.0 / 298.15)).exp();
        }
        Ok(())
    }
    fn jacobian(&self, p: &[f64], j: &mut DMatrix<f64>) -> Result<(), ModelError> {
        for (i, t) in self.0.iter().enumerate() {
            let u = 1.0 / (t + 273.15) - 1.0 / 298.15;
            let e = (p[1] * u).exp();
            j[(i, 0)] = e;
            j[(i, 1)] = p[0] * u * e;
        }
        Ok(())
    }
}

#[test]
fn weighted_beta_model_matches_curve_fit_in_both_uncertainty_modes() {
    let w: Vec<f64> = B_U.iter().map(|u| 1.0 / (u * u)).collect();
    let obs = Observations {
        y: &B_R,
        weights: Some(&w),
    };
    let out = lm::fit(&Beta(&B_T), &obs, &B_START, None, &LmOptions::default()).unwrap();
    assert!(out.stop.converged(), "{}", out.stop);
    for (got, want) in out.params.iter().zip(B_PARAMS) {
        close(*got, want, 1e-9, "parameter");
    }
    for (mode, want) in [
        (UncertaintyMode::Residuals, B_COV_RESIDUALS),
        (UncertaintyMode::Weights, B_COV_WEIGHTS),
    ] {
        let settings = UncertaintySettings {
            mode,
            confidence: 0.95,
        };
        let u = covariance::uncertainty_from_jacobian(
            &out.jacobian,
            Some(&w),
            &out.params,
            &out.at_bound,
            &["R25", "B"],
            out.ssr,
            settings,
        )
        .unwrap();
        for j in 0..2 {
            for k in 0..2 {
                close(u.covariance[(j, k)], want[2 * j + k], 1e-7, "covariance");
            }
        }
        if mode == UncertaintyMode::Residuals {
            close(u.quantile, B_T975_8, 1e-10, "t quantile");
        }
    }
    let stats = covariance::fit_statistics(
        &B_R,
        Some(&w),
        &out.fitted,
        2,
        true,
        UncertaintyMode::Weights,
    )
    .unwrap();
    let chi = stats.chi_square.unwrap();
    close(chi.statistic, B_CHI2, 1e-9, "χ²");
    close(chi.p_value, B_CHI2_P, 1e-8, "χ² p-value");
}

//! Conformance of the weighted linear least squares against the 11 NIST StRD linear problems
//! (source: NIST ITL, Statistical Reference Datasets, "Linear Least Squares Regression";
//! certified values read from the files in place). Thresholds per problem in
//! `support/linear_cases.rs`.

mod support;

use support::linear_cases::{LINEAR_CASES, run_linear};
use support::strd_data::strd_dir_or_skip;

#[test]
fn every_linear_problem_meets_its_certified_accuracy() {
    let Some(dir) = strd_dir_or_skip("every_linear_problem_meets_its_certified_accuracy") else {
        return;
    };
    let mut failures = Vec::new();
    for case in LINEAR_CASES {
        let r = run_linear(&dir, case);
        println!(
            "{:<9} params min LRE {:>5.1}  sds min LRE {:>5.1}  residual SD LRE {:>5.1}",
            case.name,
            r.min_param(),
            r.min_sd(),
            r.residual_sd_lre
        );
        if r.min_param() < case.min_param_lre {
            failures.push(format!(
                "{}: parameter LRE {:.1} < {}",
                case.name,
                r.min_param(),
                case.min_param_lre
            ));
        }
        if r.min_sd() < case.min_sd_lre {
            failures.push(format!(
                "{}: SD LRE {:.1} < {}",
                case.name,
                r.min_sd(),
                case.min_sd_lre
            ));
        }
        if r.residual_sd_lre < case.min_residual_sd_lre {
            failures.push(format!(
                "{}: residual SD LRE {:.1} < {}",
                case.name, r.residual_sd_lre, case.min_residual_sd_lre
            ));
        }
    }
    assert!(
        failures.is_empty(),
        "below certified accuracy:\n{}",
        failures.join("\n")
    );
}

#[test]
fn certified_r_squared_is_reproduced() {
    // NIST certifies R² for every linear problem (centred, uncentred for NoInt1/NoInt2).
    let Some(dir) = strd_dir_or_skip("certified_r_squared_is_reproduced") else {
        return;
    };
    for case in LINEAR_CASES {
        let r = run_linear(&dir, case);
        let got = r
            .r_squared_lre
            .expect("every linear StRD file certifies R-Squared");
        assert!(got >= 6.0, "{}: R² LRE {got:.1}", case.name);
    }
}

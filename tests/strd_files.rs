//! Every NIST StRD file parses, and what it certifies is self-consistent (source: NIST ITL,
//! Statistical Reference Datasets, read in place): n − p equals the certified degrees of
//! freedom, nonlinear files give two starts per parameter, and the certified residual SD
//! squared times n − p equals the certified RSS.

/// Files whose printed degrees of freedom differ from n − p, with the printed value. Rat43
/// prints 9 for n = 15, p = 4; its certified residual SD is √(RSS/11), so 11 is meant (the
/// test checks that).
const DOF_AS_PRINTED: [(&str, usize); 1] = [("Rat43", 9)];

mod support;

use fitwright::fit::strd::{StrdKind, lre, parse};
use support::strd_data::strd_dir_or_skip;

#[test]
fn every_strd_file_parses_and_is_self_consistent() {
    let Some(dir) = strd_dir_or_skip("every_strd_file_parses_and_is_self_consistent") else {
        return;
    };
    let mut counts = [0usize; 2];
    for (sub, kind) in [
        ("linear", StrdKind::Linear),
        ("nonlinear", StrdKind::Nonlinear),
    ] {
        let mut paths: Vec<_> = std::fs::read_dir(dir.join(sub))
            .expect("StRD subfolder is readable")
            .map(|e| e.expect("directory entry").path())
            .filter(|p| p.extension().is_some_and(|e| e == "dat"))
            .collect();
        paths.sort();
        for path in paths {
            let text = std::fs::read_to_string(&path).expect("readable file");
            let p = parse(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            let file = path
                .file_stem()
                .and_then(|s| s.to_str())
                .unwrap_or_default();
            assert_eq!(p.name, file);
            assert_eq!(p.kind, kind, "{file}");
            assert!(
                p.model_text.contains('='),
                "{file}: model text {:?}",
                p.model_text
            );
            let n = p.y.len();
            assert!(p.x.iter().all(|c| c.len() == n), "{file}: ragged data");
            let dof = n - p.parameters.len();
            match DOF_AS_PRINTED.iter().find(|(f, _)| *f == file) {
                Some((_, printed)) => assert_eq!(p.dof, *printed, "{file}: printed dof"),
                None => assert_eq!(dof, p.dof, "{file}: n − p vs certified dof"),
            }
            assert_eq!(p.column_names.len(), 1 + p.x.len(), "{file}: data header");
            for c in &p.parameters {
                assert_eq!(
                    c.starts.is_some(),
                    kind == StrdKind::Nonlinear,
                    "{file} {}",
                    c.name
                );
            }
            if let Some(rss) = p.residual_ss {
                // 0 = 0 for the exact Wampler1/2 fits; otherwise agreement to ~10 digits.
                let from_sd = p.residual_sd * p.residual_sd * dof as f64;
                assert!(
                    rss == from_sd || lre(from_sd, rss, 15) > 8.5,
                    "{file}: RSS {rss} vs sd²·dof {from_sd}"
                );
            }
            counts[(kind == StrdKind::Nonlinear) as usize] += 1;
        }
    }
    assert_eq!(
        counts,
        [11, 27],
        "the StRD collections hold 11 linear and 27 nonlinear problems"
    );
}

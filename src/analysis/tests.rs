//! The model catalog: every preset and further models with their expected outcome, and for
//! every linearizable one a numerical identity test at random θ and x:
//! `T(f(x; θ), x) = h₀(x) + Σ gⱼ(θ)·hⱼ(x)` (relative tolerance 1e-9) and the back-transform
//! recovers θ from g(θ) (relative tolerance 1e-8). The expected outcomes follow from the
//! algebra of each model (worked by hand; the presets' forms are from memory).

use super::*;
use crate::expr::{eval_recursive, parse_equation};

#[derive(Clone, Copy)]
enum Expect {
    Linear,
    /// Linearizable with this transform (printed form).
    By(&'static str),
    /// Not linearizable; the reason contains this text.
    Not(&'static str),
    /// Not identifiable; these parameters appear only in combination.
    Combined(&'static [&'static str]),
}

#[derive(Clone, Copy)]
enum Choice {
    Auto,
    Given(&'static str),
}

struct Case {
    equation: &'static str,
    predictors: &'static [&'static str],
    params: &'static [(&'static str, Option<f64>)],
    fixed: &'static [(&'static str, f64)],
    choice: Choice,
    expect: Expect,
    /// Range of the predictors for the identity test.
    x_range: (f64, f64),
}

const fn case(
    equation: &'static str,
    predictors: &'static [&'static str],
    params: &'static [(&'static str, Option<f64>)],
    expect: Expect,
) -> Case {
    Case {
        equation,
        predictors,
        params,
        fixed: &[],
        choice: Choice::Auto,
        expect,
        x_range: (0.5, 3.0),
    }
}

fn preset_expectation(key: &str) -> (Expect, (f64, f64)) {
    match key {
        "line" | "line-origin" | "poly2" | "poly3" => (Expect::Linear, (-3.0, 3.0)),
        "exponential" | "power" => (Expect::By("ln(y)"), (0.5, 3.0)),
        "saturation" => (Expect::Not("inside exp(…)"), (0.5, 3.0)),
        "michaelis-menten" => (Expect::By("1/v"), (0.1, 5.0)),
        "langmuir" => (Expect::By("1/q"), (0.1, 5.0)),
        "arrhenius" => (Expect::By("ln(k)"), (250.0, 400.0)),
        "thermistor-beta" => (Expect::By("ln(R)"), (-20.0, 80.0)),
        "steinhart-hart" => (Expect::By("1/T"), (500.0, 50_000.0)),
        "logistic4" => (Expect::Not("under 1/(…)"), (0.5, 3.0)),
        "gompertz" => (Expect::Not("inside exp(…)"), (0.5, 3.0)),
        "hill" => (Expect::Not("in the power x^n"), (0.5, 3.0)),
        other => panic!("no expectation for preset {other}"),
    }
}

fn catalog() -> Vec<Case> {
    use Expect::*;
    vec![
        // Offsets h₀.
        case(
            "y = a*x*exp(b*x)",
            &["x"],
            &[("a", Some(1.2)), ("b", Some(0.4))],
            By("ln(y)"),
        ),
        case(
            "y = x + a + b*x^2",
            &["x"],
            &[("a", None), ("b", None)],
            Linear,
        ),
        // Two predictors.
        case(
            "F = a + b*V + c*V*T",
            &["V", "T"],
            &[("a", None), ("b", None), ("c", None)],
            Linear,
        ),
        case(
            "y = a*u^b*v^c",
            &["u", "v"],
            &[("a", Some(2.0)), ("b", Some(0.5)), ("c", Some(1.5))],
            By("ln(y)"),
        ),
        // Known constants inside the model.
        case(
            "y = a*exp(b*(x - 20))",
            &["x"],
            &[("a", Some(1.5)), ("b", Some(0.3))],
            By("ln(y)"),
        ),
        // Transform none, but g is not θ itself.
        case(
            "y = exp(a) + b*x",
            &["x"],
            &[("a", Some(0.5)), ("b", Some(1.0))],
            By("y"),
        ),
        case(
            "y = 1/(a + b*x)",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(0.5))],
            By("1/y"),
        ),
        case(
            "y = (a + b*x)^2",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(0.5))],
            By("sqrt(y)"),
        ),
        case(
            "y = sqrt(a + b*x)",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(0.5))],
            By("y^2"),
        ),
        case(
            "y = (a + b*x)^-2",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(0.5))],
            By("1/sqrt(y)"),
        ),
        // A coefficient equation that cannot be isolated: Newton.
        case(
            "y = a + exp(a) + b*x",
            &["x"],
            &[("a", Some(0.8)), ("b", Some(1.0))],
            By("y"),
        ),
        // Only locally invertible: s ↦ 1/s².
        case(
            "y = a + x/s^2",
            &["x"],
            &[("a", Some(1.0)), ("s", Some(1.3))],
            By("y"),
        ),
        // Given transforms.
        Case {
            choice: Choice::Given("S/v"),
            x_range: (0.1, 5.0),
            ..case(
                "v = Vmax*S/(Km + S)",
                &["S"],
                &[("Vmax", Some(2.0)), ("Km", Some(0.7))],
                By("S/v"),
            )
        },
        Case {
            choice: Choice::Given("ln(y)"),
            ..case(
                "y = a*exp(b*x)",
                &["x"],
                &[("a", Some(2.0)), ("b", Some(-0.4))],
                By("ln(y)"),
            )
        },
        Case {
            choice: Choice::Given("1/(T + 273.15)"),
            x_range: (500.0, 50_000.0),
            ..case(
                "T = 1/(A + B*ln(R) + C*ln(R)^3) - 273.15",
                &["R"],
                &[
                    ("A", Some(1.1e-3)),
                    ("B", Some(2.4e-4)),
                    ("C", Some(7.5e-8)),
                ],
                By("1/(T + 273.15)"),
            )
        },
        // A fixed parameter substituted as a constant.
        Case {
            fixed: &[("T0", 298.15)],
            x_range: (-20.0, 80.0),
            ..case(
                "R = R0*exp(B*(1/(T + 273.15) - 1/T0))",
                &["T"],
                &[("R0", Some(10_000.0)), ("B", Some(3950.0))],
                By("ln(R)"),
            )
        },
        // Not linearizable.
        case(
            "y = a + b*exp(c*x)",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(1.0)), ("c", Some(0.5))],
            Not("inside exp(…)"),
        ),
        case(
            "y = a*sin(b*x + c)",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(1.0)), ("c", Some(0.0))],
            Not("inside sin(…)"),
        ),
        case(
            "y = a/(1 + exp(-b*(x - c)))",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(1.0)), ("c", Some(1.0))],
            Not("mixes"),
        ),
        case(
            "y = a*exp(b*x) + c*exp(d*x)",
            &["x"],
            &[
                ("a", Some(1.0)),
                ("b", Some(-1.0)),
                ("c", Some(1.0)),
                ("d", Some(-0.1)),
            ],
            Not("inside exp(…)"),
        ),
        case(
            "y = a + b*x + a*b*x^2",
            &["x"],
            &[("a", None), ("b", None)],
            Not("tied"),
        ),
        // Not identifiable.
        case(
            "y = a*b*x",
            &["x"],
            &[("a", None), ("b", None)],
            Combined(&["a", "b"]),
        ),
        case(
            "y = a*b*exp(c*x)",
            &["x"],
            &[("a", Some(1.0)), ("b", Some(1.0)), ("c", Some(0.2))],
            Combined(&["a", "b"]),
        ),
        case(
            "y = (a + b)*x + c",
            &["x"],
            &[("a", None), ("b", None), ("c", None)],
            Combined(&["a", "b"]),
        ),
        case(
            "y = exp(a + b)*x^c",
            &["x"],
            &[("a", None), ("b", None), ("c", None)],
            Combined(&["a", "b"]),
        ),
        case(
            "y = a/b + c*x",
            &["x"],
            &[("a", None), ("b", None), ("c", None)],
            Combined(&["a", "b"]),
        ),
    ]
}

fn spec(
    equation: &str,
    predictors: &[&str],
    params: &[(&str, Option<f64>)],
    fixed: &[(&str, f64)],
) -> ModelSpec {
    let eq = parse_equation(equation).unwrap_or_else(|e| panic!("{equation}: {e}"));
    let mut m = ModelSpec::new(&eq.response, eq.rhs, predictors, params);
    for (n, v) in fixed {
        m = m.with_fixed(n, *v);
    }
    m
}

fn run(c: &Case) -> (ModelSpec, Analysis) {
    let m = spec(c.equation, c.predictors, c.params, c.fixed);
    let choice = match c.choice {
        Choice::Auto => TransformChoice::Auto,
        Choice::Given(t) => TransformChoice::Given(crate::expr::parse_expression(t).unwrap()),
    };
    let a = analyze(&m, &choice);
    (m, a)
}

fn all_cases() -> Vec<Case> {
    let mut cases: Vec<Case> = presets()
        .iter()
        .map(|p| {
            let (expect, x_range) = preset_expectation(p.key);
            let params: Vec<(&'static str, Option<f64>)> =
                p.parameters.iter().map(|(n, s)| (*n, Some(*s))).collect();
            Case {
                equation: p.equation,
                predictors: p.predictors,
                params: Box::leak(params.into_boxed_slice()),
                fixed: &[],
                choice: Choice::Auto,
                expect,
                x_range,
            }
        })
        .collect();
    cases.extend(catalog());
    cases
}

#[test]
fn the_catalog_is_big_enough() {
    let cases = all_cases();
    let count = |f: &dyn Fn(&Expect) -> bool| cases.iter().filter(|c| f(&c.expect)).count();
    assert!(cases.len() >= 30, "{} cases", cases.len());
    assert!(count(&|e| matches!(e, Expect::Not(_))) >= 5);
    assert!(count(&|e| matches!(e, Expect::Combined(_))) >= 3);
    assert!(cases.iter().any(|c| c.predictors.len() == 2));
}

#[test]
fn every_model_in_the_catalog_gets_its_expected_outcome() {
    let mut failures = Vec::new();
    for c in all_cases() {
        let (_, a) = run(&c);
        let ok = match (c.expect, &a.outcome) {
            (Expect::Linear, Outcome::Linear(_)) => true,
            (Expect::By(t), Outcome::Linearizable(l)) => l.transform.to_string() == t,
            (Expect::Not(text), Outcome::NotLinearizable { reason }) => reason.contains(text),
            (Expect::Combined(ps), Outcome::NotIdentifiable { parameters, .. }) => parameters == ps,
            _ => false,
        };
        if !ok {
            failures.push(format!("{}:\n{}", c.equation, explain_text(&a)));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

/// Deterministic pseudo-random numbers in [0, 1) (xorshift64*).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    }

    fn between(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.next()
    }
}

#[test]
fn linearizations_are_identities_and_back_transforms_recover_theta() {
    let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
    let mut checked = 0;
    for c in all_cases() {
        let (m, a) = run(&c);
        let Some(lin) = a.linearization() else {
            continue;
        };
        let mut rhs = m.rhs.clone();
        for (n, v) in &m.fixed {
            rhs = rhs.substitute(n, &crate::expr::Expr::number(*v));
        }
        let composed = lin.transform.substitute(&m.response, &rhs);
        for _ in 0..20 {
            // θ within ±30 % of the start (1 where none), the branch of the start's sign.
            let theta: Vec<f64> = m
                .parameters
                .iter()
                .map(|p| match p.start.unwrap_or(1.0) {
                    0.0 => rng.between(0.2, 1.0),
                    s => s * rng.between(0.7, 1.3),
                })
                .collect();
            let x: Vec<f64> = m
                .predictors
                .iter()
                .map(|_| rng.between(c.x_range.0, c.x_range.1))
                .collect();
            let at = |n: &str| {
                m.predictors
                    .iter()
                    .position(|p| p == n)
                    .map(|i| x[i])
                    .or_else(|| {
                        m.parameters
                            .iter()
                            .position(|p| p.name == n)
                            .map(|i| theta[i])
                    })
            };
            let Ok(lhs) = eval_recursive(&composed, &at) else {
                // Outside the model's domain at this point (e.g. ln of a negative value).
                continue;
            };
            let mut rhs_value = match &lin.offset {
                Some(h0) => eval_recursive(h0, &at).unwrap(),
                None => 0.0,
            };
            for b in &lin.basis {
                rhs_value +=
                    eval_recursive(&b.g, &at).unwrap() * eval_recursive(&b.h, &at).unwrap();
            }
            assert!(
                (lhs - rhs_value).abs() <= 1e-9 * lhs.abs().max(1.0),
                "{}: T(f) = {lhs} but h0 + Σ g·h = {rhs_value} at θ = {theta:?}, x = {x:?}",
                c.equation
            );
            let coefficients = lin.coefficients(&theta).unwrap();
            let back = lin
                .back_transform_values(&coefficients)
                .unwrap_or_else(|e| panic!("{}: {e}", c.equation));
            for (i, (t, b)) in theta.iter().zip(&back).enumerate() {
                assert!(
                    (t - b).abs() <= 1e-8 * t.abs().max(1e-300),
                    "{}: {} = {t} came back as {b}",
                    c.equation,
                    m.parameters[i].name
                );
            }
            checked += 1;
        }
    }
    assert!(checked >= 20 * 20, "only {checked} identity checks ran");
}

#[test]
fn auto_transforms_use_the_model_names_whatever_they_are() {
    // A response called `x` and a predictor called `y` must not be confused with the
    // x and y of the search-order description.
    let m = spec("x = a*exp(b*y)", &["y"], &[("a", None), ("b", None)], &[]);
    let a = analyze(&m, &TransformChoice::Auto);
    let tried: Vec<&str> = a.candidates.iter().map(|c| c.transform.as_str()).collect();
    assert_eq!(
        tried,
        ["x", "ln(x)", "1/x", "sqrt(x)", "x^2", "1/sqrt(x)", "y/x"]
    );
    assert_eq!(a.linearization().unwrap().transform.to_string(), "ln(x)");
}

#[test]
fn auto_lists_every_transform_that_works_and_picks_the_first() {
    let m = spec(
        "v = Vmax*S/(Km + S)",
        &["S"],
        &[("Vmax", None), ("Km", None)],
        &[],
    );
    let a = analyze(&m, &TransformChoice::Auto);
    let working: Vec<&str> = a.working().iter().map(|c| c.transform.as_str()).collect();
    assert_eq!(working, ["1/v", "S/v"]);
    assert_eq!(a.chosen, Some(2));
    let tried: Vec<&str> = a.candidates.iter().map(|c| c.transform.as_str()).collect();
    assert_eq!(
        tried,
        ["v", "ln(v)", "1/v", "sqrt(v)", "v^2", "1/sqrt(v)", "S/v"]
    );
}

#[test]
fn thermistor_beta_model_in_detail() {
    let p = preset("thermistor-beta").unwrap();
    let eq = p.parse();
    let m = ModelSpec::new(
        &eq.response,
        eq.rhs,
        p.predictors,
        &[("R25", Some(10_000.0)), ("B", Some(3950.0))],
    );
    let a = analyze(&m, &TransformChoice::Auto);
    let lin = a.linearization().expect("linearizable");
    let basis: Vec<(String, String)> = lin
        .basis
        .iter()
        .map(|b| (b.h.to_string(), b.g.to_string()))
        .collect();
    assert_eq!(
        basis,
        [
            (
                "1".to_string(),
                "ln(R25) - 0.0033540164346805303*B".to_string()
            ),
            ("1/(T + 273.15)".to_string(), "B".to_string()),
        ]
    );
    let steps: Vec<String> = lin
        .back_transform
        .iter()
        .map(|s| format!("{} = {}", s.parameter, s.formula.as_ref().unwrap()))
        .collect();
    assert_eq!(steps, ["B = c₂", "R25 = exp(0.0033540164346805303*B + c₁)"]);
    assert_eq!(lin.weight_factor.to_string(), "R^2");
    let conditions: Vec<(String, Scope)> = lin
        .conditions
        .iter()
        .map(|c| (c.expr.to_string(), c.scope))
        .collect();
    assert_eq!(
        conditions,
        [
            ("R > 0".to_string(), Scope::Data),
            ("R25 > 0".to_string(), Scope::Parameters),
            ("T + 273.15 != 0".to_string(), Scope::Data),
        ]
    );
    // ln(R) needs R > 0: rows 4 and 9 break it.
    let r = [
        9800.0, 9700.0, 9600.0, 9500.0, -1.0, 9300.0, 9200.0, 9100.0, 9000.0, 0.0,
    ];
    let cond = &lin.conditions[0];
    assert_eq!(
        offending_rows(&cond.expr, &["R"], &[&r], &[], &[]).unwrap(),
        [4, 9]
    );
    let json = serde_json::to_string(&a).unwrap();
    assert!(json.contains(r#""kind":"linearizable""#), "{json}");
    assert!(json.contains(r#""h":"1/(T + 273.15)""#), "{json}");
}

#[test]
fn delta_method_weight_factors_follow_the_transform() {
    let m = spec("y = a*x/(b + x)", &["x"], &[("a", None), ("b", None)], &[]);
    for (t, want) in [
        ("ln(y)", "y^2"),
        ("1/y", "y^4"),
        ("sqrt(y)", "4*y"),
        ("y^2", "0.25/y^2"),
        ("x/y", "y^4/x^2"),
    ] {
        let l = decompose::linearize(
            &Prepared {
                response: "y".into(),
                rhs: m.rhs.clone(),
                predictors: vec!["x".into()],
                params: vec!["a".into(), "b".into()],
                starts: vec![None, None],
            },
            &crate::expr::parse_expression(t).unwrap(),
        );
        let weight = match &l {
            Outcome::Linear(l) | Outcome::Linearizable(l) => l.weight_factor.to_string(),
            // Transforms that do not linearize still need no weight here.
            _ => continue,
        };
        assert_eq!(weight, want, "{t}");
    }
}

#[test]
fn an_even_power_takes_the_branch_of_the_start_sign() {
    for (start, sign) in [(Some(1.3), 1.0), (Some(-1.3), -1.0), (None, 1.0)] {
        let m = spec(
            "y = a + x/s^2",
            &["x"],
            &[("a", Some(1.0)), ("s", start)],
            &[],
        );
        let a = analyze(&m, &TransformChoice::Auto);
        let lin = a.linearization().unwrap();
        let step = lin
            .back_transform
            .iter()
            .find(|s| s.parameter == "s")
            .unwrap();
        assert!(
            step.branch
                .as_ref()
                .unwrap()
                .contains("the other sign fits equally")
        );
        let back = lin.back_transform_values(&[1.0, 0.25]).unwrap();
        assert_eq!(back, [1.0, 2.0 * sign]);
    }
}

#[test]
fn newton_solves_a_coefficient_that_cannot_be_isolated() {
    let m = spec(
        "y = a + exp(a) + b*x",
        &["x"],
        &[("a", Some(0.0)), ("b", Some(1.0))],
        &[],
    );
    let a = analyze(&m, &TransformChoice::None);
    let lin = a.linearization().unwrap();
    let methods: Vec<(&str, BackMethod)> = lin
        .back_transform
        .iter()
        .map(|s| (s.parameter.as_str(), s.method))
        .collect();
    assert_eq!(
        methods,
        [("b", BackMethod::Symbolic), ("a", BackMethod::Newton)]
    );
    // a + exp(a) = 1 + e at a = 1.
    let theta = lin
        .back_transform_values(&[1.0 + std::f64::consts::E, 2.0])
        .unwrap();
    assert!(
        (theta[0] - 1.0).abs() < 1e-12 && theta[1] == 2.0,
        "{theta:?}"
    );
}

#[test]
fn not_identifiable_names_the_combination() {
    let m = spec("y = a*b*x", &["x"], &[("a", None), ("b", None)], &[]);
    let a = analyze(&m, &TransformChoice::Auto);
    let Outcome::NotIdentifiable {
        parameters,
        combinations,
        reason,
    } = &a.outcome
    else {
        panic!("{}", explain_text(&a));
    };
    assert_eq!(parameters, &["a", "b"]);
    assert_eq!(combinations, &["a·b"]);
    assert_eq!(
        reason,
        "a and b appear only in combination (a·b): 1 coefficient for 2 parameters"
    );
}

#[test]
fn not_linearizable_names_the_term_parameter_variable_and_how() {
    let m = spec(
        "y = a/(1 + exp(-b*x))",
        &["x"],
        &[("a", None), ("b", None)],
        &[],
    );
    let a = analyze(&m, &TransformChoice::None);
    let Outcome::NotLinearizable { reason } = &a.outcome else {
        panic!("{}", explain_text(&a));
    };
    assert_eq!(
        reason,
        "term a/(exp(−b·x) + 1) mixes parameter b with variable x under 1/(…)"
    );
}

#[test]
fn presets_parse_resolve_and_are_found_by_key() {
    let mut keys = Vec::new();
    for p in presets() {
        let eq = p.parse();
        assert_eq!(eq.response, p.response, "{}", p.key);
        crate::expr::resolve(&eq.rhs, p.predictors, &p.parameter_names())
            .unwrap_or_else(|e| panic!("{}: {e}", p.key));
        assert!(!keys.contains(&p.key), "duplicate key {}", p.key);
        keys.push(p.key);
        assert_eq!(preset(p.key).map(|q| q.name), Some(p.name));
    }
    assert!(preset("Thermistor-Beta").is_none());
    assert_eq!(keys.len(), 15);
}

#[test]
fn explain_shows_every_transform_and_the_chosen_linearization() {
    let m = spec(
        "R = R25*exp(B*(1/(T + 273.15) - 1/298.15))",
        &["T"],
        &[("R25", Some(10_000.0)), ("B", Some(3950.0))],
        &[],
    );
    let text = explain_text(&analyze(&m, &TransformChoice::Auto));
    for line in [
        "Parameters  R25 (start 10000), B (start 3950)",
        "  ✗ R (none)          not linearizable: term R25·exp(−0.003354016435·B)·exp(B/(T + 273.15)) mixes parameter B with variable T inside exp(…)",
        "  ✓ ln(R)             linearizable   ← chosen",
        "Linear model fitted:  ln(R) = c₁·h₁ + c₂·h₂",
        "  h₁ = 1                 c₁ = ln(R25) − 0.003354016435·B",
        "  h₂ = 1/(T + 273.15)    c₂ = B",
        "  B = c₂",
        "  R25 = exp(0.003354016435·B + c₁)",
        "  R > 0  — on every data row; domain of ln(R) in the transform",
        "  R25 > 0  — on the fitted parameters; used ln(a·b) = ln a + ln b",
        "Weights of the transformed fit (delta method): w′ = w·R^2   [= w/(∂T/∂R)²]",
    ] {
        assert!(
            text.lines().any(|l| l == line),
            "missing line\n{line}\nin\n{text}"
        );
    }
    let p = preset("saturation").unwrap();
    let eq = p.parse();
    let m = ModelSpec::new(
        &eq.response,
        eq.rhs,
        p.predictors,
        &[("a", Some(1.0)), ("b", None)],
    );
    let text = explain_text(&analyze(&m, &TransformChoice::Auto));
    assert!(text.contains(
        "Result: not linearizable — term −a·exp(−b·x) mixes parameter b with variable x inside exp(…)"
    ), "{text}");
    assert!(text.contains("needs start values for b"), "{text}");
}

#[test]
fn a_badly_scaled_coefficient_map_is_still_invertible() {
    // y = b1·b2·x/(1 + b2·x) (the form of NIST StRD Misra1d) at its far start b1 = 500,
    // b2 = 1e-4: 1/y = 1/b1 + (1/(b1·b2))·(1/x), g = (1/b1, 1/(b1·b2)), det ∂g/∂θ =
    // 1/(b1³·b2²) = 0.8 — invertible, though its entries span 4e-6 to 2e5.
    let m = spec(
        "y = b1*b2*x*((1+b2*x)^(-1))",
        &["x"],
        &[("b1", Some(500.0)), ("b2", Some(1e-4))],
        &[],
    );
    let a = analyze(&m, &TransformChoice::Auto);
    let Outcome::Linearizable(l) = &a.outcome else {
        panic!("{}", explain_text(&a));
    };
    assert_eq!(l.transform.to_string(), "1/y");
}

#[test]
fn a_coefficient_map_singular_at_the_start_is_refused_with_the_parameter() {
    // g = (a², b) has ∂g/∂a = 2a = 0 at the start a = 0, whatever the scaling.
    let m = spec(
        "y = a^2*x + b*x^2",
        &["x"],
        &[("a", Some(0.0)), ("b", Some(1.0))],
        &[],
    );
    let a = analyze(&m, &TransformChoice::Auto);
    let Outcome::NotIdentifiable {
        parameters, reason, ..
    } = &a.outcome
    else {
        panic!("{}", explain_text(&a));
    };
    assert_eq!(parameters, &["a"]);
    assert!(
        reason.contains("singular Jacobian at a = 0, b = 1"),
        "{reason}"
    );
}

/// The deepest equations the parser accepts, with parameters deep inside, through the whole
/// analysis (every auto transform, expansion, derivatives, conditions, back-transform) and
/// its explanation, on a 2 MiB thread (the default of test threads and of the batch's
/// workers) in a debug build: none may exhaust the stack.
#[test]
fn deepest_accepted_equations_survive_the_analysis_on_a_small_stack() {
    let equations = [
        format!("y = a + b*{}x{}", "sin(".repeat(199), ")".repeat(199)),
        format!("y = a*exp(b*{}x{})", "(1 + x*".repeat(98), ")".repeat(98)),
        format!("y = a*{}x{}", "(1 + b*x^".repeat(99), ")".repeat(99)),
        format!("y = {}a*x + b{}", "ln(1 + ".repeat(99), ")".repeat(99)),
        format!("y = a + b*{}x", "-".repeat(198)),
        format!("y = {}a/(b + x){}", "1/(1 + ".repeat(98), ")".repeat(98)),
    ];
    let handle = std::thread::Builder::new()
        .stack_size(2 << 20)
        .spawn(move || {
            for eq in &equations {
                let parsed = parse_equation(eq).expect("within the limits");
                let model = ModelSpec::new(
                    "y",
                    parsed.rhs.clone(),
                    &["x"],
                    &[("a", Some(1.5)), ("b", Some(0.5))],
                );
                // `auto` tries every transform of SPEC §4, ln(y), 1/y and y² among them.
                let a = analyze(&model, &TransformChoice::Auto);
                assert_eq!(a.candidates.len(), 7);
                assert!(!explain_text(&a).is_empty());
                assert!(serde_json::to_string(&a).is_ok());
            }
        })
        .expect("thread");
    assert!(
        handle.join().is_ok(),
        "the analysis failed on a 2 MiB stack"
    );
}

/// Found by the analyze_equation fuzz target: under y² this sum expands to hundreds of
/// basis terms, whose independence test took seconds while each term got a fresh SVD. The
/// outcome must not change with the method: no transform separates the parameters.
#[test]
fn sum_expanding_to_hundreds_of_basis_terms_is_analysed() {
    let src = include_str!("../../fuzz/seeds/analyze_equation/slow-y2");
    let eq = parse_equation(src.trim()).expect("parses");
    let mut names: Vec<String> = Vec::new();
    for (n, _) in eq.rhs.identifiers() {
        if !names.contains(&n) {
            names.push(n);
        }
    }
    let (params, predictors) = names.split_at(3);
    let predictors: Vec<&str> = predictors.iter().map(String::as_str).collect();
    let params: Vec<(&str, Option<f64>)> = params.iter().map(|p| (p.as_str(), Some(1.5))).collect();
    let model = ModelSpec::new(&eq.response, eq.rhs.clone(), &predictors, &params);
    let a = analyze(&model, &TransformChoice::Auto);
    assert_eq!(a.outcome.label(), "not linearizable", "{:?}", a.outcome);
    assert!(
        a.candidates
            .iter()
            .all(|c| c.outcome.linearization().is_none())
    );
}

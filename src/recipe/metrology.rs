//! The metrology sections of a recipe (SPEC §14): `[item]`, `[procedure]`, `[[standards]]`,
//! `[conditions]`, `[uncertainty]`, `[decision]`, checked like every other section (types,
//! unknown keys with "did you mean", TOML dates), and the tolerance forms shared with
//! `[[acceptance.points]]`.
//!
//! A reference standard whose `due` date is before `[conditions] measured_on` makes the recipe
//! invalid. Whether `applies_to` names a variable of the model is checked once the model is
//! parsed (`pipeline::metrology::check_variables`).

use std::ops::Range;

use super::Spanned;
use super::raw::{Node, Value};
use super::section::Section;
use crate::error::{Error, Result, did_you_mean};
use crate::metrology::gum::{Component, Coverage, DEFAULT_PROBABILITY};
use crate::metrology::record::{Condition, Item, Procedure, Standard};
use crate::metrology::{Axis, Budget, Combine, Date, DecisionRule, Tolerance};
use crate::source::SourceFile;

const ITEM_KEYS: &[&str] = &["description", "id"];
const PROCEDURE_KEYS: &[&str] = &["id", "revision"];
const STANDARD_KEYS: &[&str] = &["id", "certificate", "due", "u", "applies_to", "dof"];
const CONDITION_KEYS: &[&str] = &["value", "min", "max", "unit"];
const UNCERTAINTY_KEYS: &[&str] = &["coverage_k", "coverage_probability", "components"];
const COMPONENT_KEYS: &[&str] = &["name", "u", "applies_to", "dof"];
const DECISION_KEYS: &[&str] = &["rule", "tolerance", "tolerance_x"];
const TOLERANCE_KEYS: &[&str] = &["rel", "fs", "full_scale", "abs", "combine"];

/// A reference standard with the spans later checks point at.
#[derive(Debug, Clone)]
pub struct StandardSpec {
    pub standard: Standard,
    pub span: Range<usize>,
    pub applies_to_span: Option<Range<usize>>,
}

/// A condition quantity with its span.
#[derive(Debug, Clone)]
pub struct ConditionSpec {
    pub condition: Condition,
    pub span: Range<usize>,
}

/// A listed uncertainty component with the span of its `applies_to`.
#[derive(Debug, Clone)]
pub struct ComponentSpec {
    pub component: Component,
    pub applies_to_span: Range<usize>,
}

/// `[decision]`.
#[derive(Debug, Clone, Default)]
pub struct DecisionSpec {
    pub rule: DecisionRule,
    /// The tolerance of every calibration point (as found, as left) and its variable.
    pub tolerance: Option<(Tolerance, Axis)>,
    pub span: Range<usize>,
}

/// The six sections of SPEC §14.
#[derive(Debug, Clone, Default)]
pub struct MetrologySpec {
    pub item: Option<Item>,
    pub procedure: Option<Procedure>,
    pub standards: Vec<StandardSpec>,
    pub measured_on: Option<Spanned<Date>>,
    pub conditions: Vec<ConditionSpec>,
    pub coverage: Coverage,
    pub components: Vec<ComponentSpec>,
    pub decision: DecisionSpec,
    /// Whether an `[uncertainty]` section was given.
    pub has_uncertainty: bool,
}

impl MetrologySpec {
    /// The uncertainty budget: the standards that state `u`, then the listed components.
    pub fn budget(&self) -> Budget {
        Budget {
            components: self
                .standards
                .iter()
                .filter_map(|s| s.standard.component())
                .chain(self.components.iter().map(|c| c.component.clone()))
                .collect(),
            coverage: self.coverage,
        }
    }

    /// Every `applies_to` with its span, for the check against the model's variables.
    pub fn variables(&self) -> Vec<(&str, Range<usize>)> {
        let standards = self.standards.iter().filter_map(|s| {
            Some((
                s.standard.applies_to.as_deref()?,
                s.applies_to_span.clone()?,
            ))
        });
        let components = self
            .components
            .iter()
            .map(|c| (c.component.applies_to.as_str(), c.applies_to_span.clone()));
        standards.chain(components).collect()
    }

    /// Whether the recipe has none of the §14 sections.
    pub fn is_empty(&self) -> bool {
        self.item.is_none()
            && self.procedure.is_none()
            && self.standards.is_empty()
            && self.measured_on.is_none()
            && self.conditions.is_empty()
            && !self.has_uncertainty
            && self.decision.tolerance.is_none()
            && self.decision.rule == DecisionRule::Simple
    }
}

/// Read the §14 sections out of the root table (each optional).
pub fn check(root: &mut Section<'_>) -> Result<MetrologySpec> {
    let source = root.source;
    let mut spec = MetrologySpec::default();
    if let Some(mut s) = root.table("item", ITEM_KEYS)? {
        spec.item = Some(Item {
            description: s.string("description")?.map(|v| v.value),
            id: s.string("id")?.map(|v| v.value),
        });
    }
    if let Some(mut s) = root.table("procedure", PROCEDURE_KEYS)? {
        spec.procedure = Some(Procedure {
            id: s.string("id")?.map(|v| v.value),
            revision: s.string("revision")?.map(|v| v.value),
        });
    }
    if let Some((span, items)) = root.list("standards")? {
        for node in items {
            spec.standards.push(standard(source, node, &span)?);
        }
    }
    if let Some(s) = root.open_table("conditions")? {
        conditions(source, s, &mut spec)?;
    }
    if let Some(s) = root.table("uncertainty", UNCERTAINTY_KEYS)? {
        spec.has_uncertainty = true;
        uncertainty(source, s, &mut spec)?;
    }
    if let Some(s) = root.table("decision", DECISION_KEYS)? {
        spec.decision = decision(s)?;
    }
    check_due_dates(source, &spec)?;
    Ok(spec)
}

fn table_entries<'a>(
    source: &'a SourceFile,
    node: Node,
    label: &str,
    allowed: &[&str],
    example: &str,
) -> Result<Section<'a>> {
    match node.value {
        Value::Table(entries) => Section::new(source, label, node.span, entries, allowed),
        ref v => Err(Error::input(format!(
            "each of {label} must be a table, found {}",
            v.type_name()
        ))
        .at(source.locate(node.span.clone()))
        .help(format!("write it as {example}"))),
    }
}

fn standard(source: &SourceFile, node: Node, _list: &Range<usize>) -> Result<StandardSpec> {
    let span = node.span.clone();
    let mut t = table_entries(
        source,
        node,
        "[[standards]]",
        STANDARD_KEYS,
        "a [[standards]] section with `id`, `certificate`, `due`, `u` and `applies_to`",
    )?;
    let id = t.string("id")?.ok_or_else(|| {
        t.error(span.clone(), "a reference standard needs an `id`")
            .help("give its asset number, e.g. `id = \"REF-PRT-2\"`")
    })?;
    let certificate = t.string("certificate")?.map(|v| v.value);
    let due = t.date("due")?;
    let u = non_negative(&mut t, "u")?;
    let applies_to = t.string("applies_to")?;
    let dof = positive(&mut t, "dof")?;
    match (&u, &applies_to) {
        (Some(u), None) => {
            return Err(t
                .error(
                    u.span.clone(),
                    format!("the standard `{}` gives `u` but not `applies_to`", id.value),
                )
                .help(
                    "say which variable the standard uncertainty is in, e.g. `applies_to = \"T\"`",
                ));
        }
        (None, Some(a)) => {
            return Err(t
                .error(a.span.clone(), format!("the standard `{}` gives `applies_to` but no `u`", id.value))
                .help("give its standard uncertainty `u` (in the unit of that variable), or remove `applies_to`"));
        }
        _ => {}
    }
    let applies_to_span = applies_to.as_ref().map(|a| a.span.clone());
    Ok(StandardSpec {
        standard: Standard {
            id: id.value,
            certificate,
            due: due.as_ref().map(|d| d.value),
            u: u.map(|v| v.value),
            applies_to: applies_to.map(|a| a.value),
            dof: dof.map(|v| v.value),
        },
        // The due span is kept as the standard's span: the due-date check points at it.
        span: due.map_or(span, |d| d.span),
        applies_to_span,
    })
}

fn conditions(source: &SourceFile, mut s: Section<'_>, spec: &mut MetrologySpec) -> Result<()> {
    spec.measured_on = s.date("measured_on")?;
    for (k, node) in s.into_entries() {
        let entries = match node.value {
            Value::Table(e) => e,
            ref v => {
                let err = Error::input(format!(
                    "`{}` in [conditions] must be a condition table or `measured_on`, found {}",
                    k.name,
                    v.type_name()
                ))
                .at(source.locate(k.span.clone()));
                return Err(match did_you_mean(&k.name, ["measured_on"]) {
                    Some(m) => err.help(m),
                    None => err.help(format!(
                        "write `{} = {{ value = 21.3, min = 18.0, max = 25.0, unit = \"°C\" }}`",
                        k.name
                    )),
                });
            }
        };
        let label = format!("[conditions] {}", k.name);
        let mut t = Section::new(source, label, node.span.clone(), entries, CONDITION_KEYS)?;
        let value = t.number("value")?.ok_or_else(|| {
            t.error(
                node.span.clone(),
                format!("the condition `{}` needs a `value`", k.name),
            )
            .help("the value measured during the calibration, e.g. `value = 21.3`")
        })?;
        let min = t.number("min")?;
        let max = t.number("max")?;
        if let (Some(lo), Some(hi)) = (&min, &max)
            && lo.value > hi.value
        {
            return Err(t
                .error(
                    hi.span.clone(),
                    format!("`max` of the condition `{}` is below its `min`", k.name),
                )
                .help("swap or correct the limits"));
        }
        spec.conditions.push(ConditionSpec {
            condition: Condition {
                name: k.name,
                value: value.value,
                min: min.map(|v| v.value),
                max: max.map(|v| v.value),
                unit: t.string("unit")?.map(|u| u.value),
            },
            span: node.span,
        });
    }
    Ok(())
}

fn uncertainty(source: &SourceFile, mut s: Section<'_>, spec: &mut MetrologySpec) -> Result<()> {
    let probability = s.number("coverage_probability")?;
    if let Some(p) = &probability
        && !(p.value > 0.0 && p.value < 1.0)
    {
        return Err(s
            .error(
                p.span.clone(),
                format!(
                    "`coverage_probability` must lie strictly between 0 and 1, found {}",
                    p.value
                ),
            )
            .help("for example 0.9545 (EA-4/02) or 0.95"));
    }
    spec.coverage = match s.take("coverage_k") {
        None => Coverage::Fixed { k: 2.0 },
        Some((_, node)) => match node.value {
            Value::Str(ref t) if t == "auto" => Coverage::Auto {
                probability: probability
                    .as_ref()
                    .map_or(DEFAULT_PROBABILITY, |p| p.value),
            },
            Value::Float(k) if k.is_finite() && k > 0.0 => Coverage::Fixed { k },
            Value::Int(k) if k > 0 => Coverage::Fixed { k: k as f64 },
            ref v => {
                return Err(s
                    .error(node.span.clone(), format!("`coverage_k` must be a positive number or \"auto\", found {}", value_text(v)))
                    .help("write `coverage_k = 2`, or `coverage_k = \"auto\"` for k from the Welch–Satterthwaite effective degrees of freedom"));
            }
        },
    };
    if let (Coverage::Fixed { .. }, Some(p)) = (&spec.coverage, &probability) {
        return Err(s
            .error(p.span.clone(), "`coverage_probability` applies only with `coverage_k = \"auto\"`")
            .help("with a fixed k the coverage probability follows from k; remove it, or set `coverage_k = \"auto\"`"));
    }
    if let Some((_, items)) = s.list("components")? {
        for node in items {
            let span = node.span.clone();
            let mut t = table_entries(
                source,
                node,
                "[uncertainty] components",
                COMPONENT_KEYS,
                "`{ name = \"readout resolution\", u = 0.29, applies_to = \"R\" }`",
            )?;
            let name = t.string("name")?.ok_or_else(|| {
                t.error(span.clone(), "an uncertainty component needs a `name`")
                    .help("say what it is, e.g. `name = \"readout resolution\"`")
            })?;
            let u = non_negative(&mut t, "u")?.ok_or_else(|| {
                t.error(
                    span.clone(),
                    format!("the component `{}` needs `u`", name.value),
                )
                .help("its standard uncertainty, in the unit of `applies_to`")
            })?;
            let applies_to = t.string("applies_to")?.ok_or_else(|| {
                t.error(
                    span.clone(),
                    format!("the component `{}` needs `applies_to`", name.value),
                )
                .help("the variable whose unit `u` is in: the response or the predictor")
            })?;
            let dof = positive(&mut t, "dof")?;
            spec.components.push(ComponentSpec {
                component: Component {
                    name: name.value,
                    u: u.value,
                    applies_to: applies_to.value,
                    dof: dof.map(|d| d.value),
                },
                applies_to_span: applies_to.span,
            });
        }
    }
    Ok(())
}

fn value_text(v: &Value) -> String {
    match v {
        Value::Str(s) => format!("\"{s}\""),
        Value::Int(i) => i.to_string(),
        Value::Float(f) => f.to_string(),
        other => other.type_name().to_string(),
    }
}

fn decision(mut s: Section<'_>) -> Result<DecisionSpec> {
    let span = s.span.clone();
    let rule = match s.string("rule")? {
        None => DecisionRule::Simple,
        Some(r) => DecisionRule::parse(&r.value).ok_or_else(|| {
            let err = s.error(
                r.span.clone(),
                format!("`rule` in [decision] cannot be \"{}\"", r.value),
            );
            match did_you_mean(&r.value, DecisionRule::NAMES) {
                Some(m) => err.help(format!("{m} (one of: {})", DecisionRule::NAMES.join(", "))),
                None => err.help(format!("use one of: {}", DecisionRule::NAMES.join(", "))),
            }
        })?,
    };
    let tolerance = tolerance_pair(&mut s, "[decision]")?;
    Ok(DecisionSpec {
        rule,
        tolerance,
        span,
    })
}

/// `tolerance` (response units) or `tolerance_x` (predictor units) of a table: at most one.
pub fn tolerance_pair(s: &mut Section<'_>, label: &str) -> Result<Option<(Tolerance, Axis)>> {
    let y = tolerance_value(s, "tolerance")?;
    let x = tolerance_value(s, "tolerance_x")?;
    match (y, x) {
        (Some(_), Some((_, span))) => Err(s
            .error(span, format!("{label} has both `tolerance` and `tolerance_x`"))
            .help("keep one: `tolerance` is in units of the response, `tolerance_x` in units of the predictor")),
        (Some((t, _)), None) => Ok(Some((t, Axis::Response))),
        (None, Some((t, _))) => Ok(Some((t, Axis::Predictor))),
        (None, None) => Ok(None),
    }
}

/// A tolerance: a number (±abs) or `{ rel, fs, full_scale, abs, combine }`.
pub fn tolerance_value(
    s: &mut Section<'_>,
    key: &str,
) -> Result<Option<(Tolerance, Range<usize>)>> {
    let source = s.source;
    let label = s.label.clone();
    let Some((k, node)) = s.take(key) else {
        return Ok(None);
    };
    let span = node.span.clone();
    let tolerance = match node.value {
        Value::Float(v) if v.is_finite() && v >= 0.0 => Tolerance::absolute(v),
        Value::Int(v) if v >= 0 => Tolerance::absolute(v as f64),
        Value::Float(_) | Value::Int(_) => {
            return Err(
                Error::input(format!("`{key}` in {label} must not be negative"))
                    .at(source.locate(span))
                    .help("a tolerance is a half-width: ±value"),
            );
        }
        Value::Table(entries) => {
            let mut t = Section::new(
                source,
                format!("`{key}` of {label}"),
                span.clone(),
                entries,
                TOLERANCE_KEYS,
            )?;
            let rel = non_negative(&mut t, "rel")?;
            let fs = non_negative(&mut t, "fs")?;
            let full_scale = non_negative(&mut t, "full_scale")?;
            let abs = non_negative(&mut t, "abs")?;
            let combine = match t.string("combine")? {
                None => Combine::Sum,
                Some(c) => match c.value.as_str() {
                    "sum" => Combine::Sum,
                    "max" => Combine::Max,
                    other => {
                        let err =
                            t.error(c.span.clone(), format!("`combine` cannot be \"{other}\""));
                        return Err(match did_you_mean(other, ["sum", "max"]) {
                            Some(m) => err.help(format!("{m} (sum or max)")),
                            None => err.help(
                                "use \"sum\" (the terms add up) or \"max\" (the largest term)",
                            ),
                        });
                    }
                },
            };
            if let (Some(f), None) = (&fs, &full_scale) {
                return Err(t
                    .error(
                        f.span.clone(),
                        "`fs` (a fraction of full scale) needs `full_scale`",
                    )
                    .help("give the full scale in the tolerance's unit, e.g. `full_scale = 100`"));
            }
            if rel.is_none() && fs.is_none() && abs.is_none() {
                return Err(t
                    .error(span.clone(), format!("`{key}` gives none of `rel`, `fs`, `abs`"))
                    .help("for example `{ rel = 0.0005, fs = 0.0002, full_scale = 100 }`: ±(0.05 % of reading + 0.02 % of full scale)"));
            }
            Tolerance {
                rel: rel.map_or(0.0, |v| v.value),
                fs: fs.map_or(0.0, |v| v.value),
                full_scale: full_scale.map_or(0.0, |v| v.value),
                abs: abs.map_or(0.0, |v| v.value),
                combine,
            }
        }
        ref v => {
            return Err(Error::input(format!(
                "`{}` in {label} must be a number or a table, found {}",
                k.name,
                v.type_name()
            ))
            .at(source.locate(span))
            .help(format!("write `{key} = 0.5`, or `{key} = {{ rel = 0.0005, fs = 0.0002, full_scale = 100, combine = \"sum\" }}`")));
        }
    };
    Ok(Some((tolerance, span)))
}

fn non_negative(t: &mut Section<'_>, key: &str) -> Result<Option<Spanned<f64>>> {
    let v = t.number(key)?;
    if let Some(n) = &v
        && n.value < 0.0
    {
        return Err(t
            .error(
                n.span.clone(),
                format!("`{key}` in {} must not be negative", t.label),
            )
            .help("an uncertainty or tolerance is a magnitude"));
    }
    Ok(v)
}

fn positive(t: &mut Section<'_>, key: &str) -> Result<Option<Spanned<f64>>> {
    let v = t.number(key)?;
    if let Some(n) = &v
        && n.value <= 0.0
    {
        return Err(t
            .error(
                n.span.clone(),
                format!("`{key}` in {} must be positive", t.label),
            )
            .help(
                "degrees of freedom are positive; leave `dof` out for an infinite number (type B)",
            ));
    }
    Ok(v)
}

/// A standard past its due date on the measurement date makes the recipe invalid (SPEC §14).
fn check_due_dates(source: &SourceFile, spec: &MetrologySpec) -> Result<()> {
    for s in &spec.standards {
        let Some(due) = s.standard.due else { continue };
        let name = match &s.standard.certificate {
            Some(c) => format!("`{}` (certificate {c})", s.standard.id),
            None => format!("`{}`", s.standard.id),
        };
        let Some(measured) = &spec.measured_on else {
            return Err(Error::input(format!(
                "the due date of the reference standard {name} cannot be checked: [conditions] has no `measured_on`"
            ))
            .at(source.locate(s.span.clone()))
            .help("add the date of the measurements, e.g. `[conditions] measured_on = 2026-11-28`"));
        };
        if due < measured.value {
            return Err(Error::input(format!(
                "the reference standard {name} was past its due date on the measurement date: due {due}, measured on {}",
                measured.value
            ))
            .at(source.locate(s.span.clone()))
            .note(format!("`measured_on = {}` is in [conditions]", measured.value))
            .help("use a standard whose calibration was current on the measurement date, or correct the dates; a calibration made with an expired standard is not valid"));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recipe::raw::RawRecipe;
    use std::sync::Arc;

    fn parse(text: &str) -> Result<MetrologySpec> {
        let source = Arc::new(SourceFile::new("r.toml", text.to_string()));
        let raw = RawRecipe::parse(source.clone())?;
        let mut root = Section::new(
            &source,
            "the recipe",
            0..text.len(),
            raw.root,
            &[
                "item",
                "procedure",
                "standards",
                "conditions",
                "uncertainty",
                "decision",
            ],
        )?;
        check(&mut root)
    }

    const GOOD: &str = r#"
[item]
description = "Cold-room probe"
id = "CR-A7"
[procedure]
id = "CAL-TH-004"
revision = "C"
[[standards]]
id = "REF-PRT-2"
certificate = "C-2291"
due = 2027-03-01
u = 0.010
applies_to = "T"
[conditions]
measured_on = 2026-11-28
ambient = { value = 21.3, min = 18.0, max = 25.0, unit = "°C" }
[uncertainty]
coverage_k = 2
components = [ { name = "readout resolution", u = 0.29, applies_to = "R" } ]
[decision]
rule = "simple"
"#;

    #[test]
    fn the_spec_example_reads_back_whole() {
        let m = parse(GOOD).expect("valid");
        assert_eq!(m.item.as_ref().and_then(|i| i.id.as_deref()), Some("CR-A7"));
        assert_eq!(
            m.procedure.as_ref().and_then(|p| p.revision.as_deref()),
            Some("C")
        );
        assert_eq!(m.standards[0].standard.due, Date::new(2027, 3, 1));
        assert_eq!(
            m.measured_on.as_ref().map(|d| d.value),
            Date::new(2026, 11, 28)
        );
        assert_eq!(m.conditions[0].condition.max, Some(25.0));
        let b = m.budget();
        assert_eq!(
            b.components.len(),
            2,
            "the standard and the listed component"
        );
        assert_eq!(b.components[0].applies_to, "T");
        assert_eq!(b.coverage, Coverage::Fixed { k: 2.0 });
        assert_eq!(m.decision.rule, DecisionRule::Simple);
    }

    #[test]
    fn an_expired_standard_is_named_with_both_dates_at_its_due_value() {
        let text = GOOD.replace("due = 2027-03-01", "due = 2026-10-01");
        let e = parse(&text).expect_err("expired");
        assert_eq!(e.exit_code(), 2);
        assert!(
            e.message.contains("`REF-PRT-2` (certificate C-2291)"),
            "{}",
            e.message
        );
        assert!(
            e.message.contains("due 2026-10-01, measured on 2026-11-28"),
            "{}",
            e.message
        );
        let loc = e.location.as_ref().expect("located");
        assert_eq!(loc.line_text.trim(), "due = 2026-10-01");
        assert_eq!(loc.column, 7, "the caret is under the date");
    }

    #[test]
    fn unknown_keys_and_quoted_dates_are_caught() {
        let e = parse(&GOOD.replace("certificate =", "certifcate =")).expect_err("typo");
        assert_eq!(e.help.as_deref(), Some("did you mean `certificate`?"));
        let e = parse(&GOOD.replace("measured_on = 2026-11-28", "measured_on = \"2026-11-28\""))
            .expect_err("string");
        assert!(
            e.help
                .as_deref()
                .unwrap_or("")
                .contains("remove the quotes"),
            "{e}"
        );
        let e = parse(&GOOD.replace("measured_on = 2026-11-28", "measured = 2026-11-28"))
            .expect_err("typo of measured_on");
        assert_eq!(e.help.as_deref(), Some("did you mean `measured_on`?"));
        let e =
            parse(&GOOD.replace("rule = \"simple\"", "rule = \"guardband\"")).expect_err("rule");
        assert!(
            e.help.as_deref().unwrap_or("").contains("guard-band"),
            "{e}"
        );
    }

    #[test]
    fn coverage_auto_and_tolerance_forms_are_read() {
        let text = GOOD
            .replace("coverage_k = 2", "coverage_k = \"auto\"\ncoverage_probability = 0.99")
            .replace(
                "rule = \"simple\"",
                "rule = \"guard-band\"\ntolerance_x = { rel = 0.001, abs = 0.05, combine = \"max\" }",
            );
        let m = parse(&text).expect("valid");
        assert_eq!(m.coverage, Coverage::Auto { probability: 0.99 });
        let (t, axis) = m.decision.tolerance.expect("tolerance");
        assert_eq!(axis, Axis::Predictor);
        assert_eq!(t.combine, Combine::Max);
        assert!((t.limit(100.0) - 0.1).abs() < 1e-15);
        let e = parse(&GOOD.replace("rule = \"simple\"", "tolerance = { fs = 0.001 }"))
            .expect_err("fs alone");
        assert!(e.message.contains("needs `full_scale`"), "{e}");
        let e = parse(&GOOD.replace(
            "coverage_k = 2",
            "coverage_k = 2\ncoverage_probability = 0.95",
        ))
        .expect_err("probability with fixed k");
        assert!(e.message.contains("only with"), "{e}");
    }

    #[test]
    fn due_without_measurement_date_cannot_be_checked() {
        let e = parse(&GOOD.replace("measured_on = 2026-11-28\n", "")).expect_err("no date");
        assert!(e.message.contains("cannot be checked"), "{e}");
    }
}

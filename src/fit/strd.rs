//! Parser for the NIST Statistical Reference Datasets (StRD) `.dat` files, and the log
//! relative error used to score a fit against them.
//!
//! Text in, values out: the caller reads the file. The layout followed here is the one stated in
//! each file's own header (NIST ITL, StRD "Linear Least Squares Regression" and "Nonlinear
//! Regression" collections): a `File Format:` block giving the line ranges of the starting
//! values, the certified values and the data; a `Data:` block giving the number of
//! observations and the level of difficulty; a `Model:` block with the model text.

use std::fmt;

/// Which StRD collection a file belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StrdKind {
    Linear,
    Nonlinear,
}

/// NIST's level of difficulty.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Difficulty {
    Lower,
    Average,
    Higher,
}

impl fmt::Display for Difficulty {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Difficulty::Lower => "lower",
            Difficulty::Average => "average",
            Difficulty::Higher => "higher",
        })
    }
}

/// A certified parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct CertifiedParameter {
    /// As written in the file (`b1`, `B0`).
    pub name: String,
    /// Certified estimate.
    pub value: f64,
    /// Number of significant digits of the certified estimate as printed.
    pub value_digits: u32,
    /// Certified standard deviation of the estimate.
    pub std_dev: f64,
    /// Number of significant digits of the certified standard deviation as printed.
    pub std_dev_digits: u32,
    /// Starting values 1 ("far") and 2 ("near") — nonlinear problems only.
    pub starts: Option<[f64; 2]>,
}

/// One parsed StRD problem.
#[derive(Debug, Clone, PartialEq)]
pub struct StrdProblem {
    /// Dataset name from the `Dataset Name:` line.
    pub name: String,
    pub kind: StrdKind,
    pub difficulty: Difficulty,
    /// The model as printed in the file (equation lines, joined by newlines).
    pub model_text: String,
    pub parameters: Vec<CertifiedParameter>,
    /// Certified residual sum of squares (nonlinear: its own line; linear: ANOVA residual row).
    pub residual_ss: Option<f64>,
    /// Certified residual standard deviation.
    pub residual_sd: f64,
    /// Significant digits of the certified residual standard deviation.
    pub residual_sd_digits: u32,
    /// Certified R² (linear problems only).
    pub r_squared: Option<f64>,
    /// Residual degrees of freedom.
    pub dof: usize,
    /// Column names from the data header (response first).
    pub column_names: Vec<String>,
    /// The response column.
    pub y: Vec<f64>,
    /// Predictor columns, in file order.
    pub x: Vec<Vec<f64>>,
}

/// A parse failure, with the 1-based line when one applies.
#[derive(Debug, Clone, PartialEq)]
pub struct StrdParseError {
    pub line: Option<usize>,
    pub message: String,
}

impl fmt::Display for StrdParseError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.line {
            Some(l) => write!(f, "line {l}: {}", self.message),
            None => f.write_str(&self.message),
        }
    }
}

impl std::error::Error for StrdParseError {}

fn err(line: Option<usize>, message: impl Into<String>) -> StrdParseError {
    StrdParseError {
        line,
        message: message.into(),
    }
}

/// Parse one StRD file's text.
pub fn parse(text: &str) -> Result<StrdProblem, StrdParseError> {
    let lines: Vec<&str> = text.lines().map(|l| l.trim_end_matches('\r')).collect();
    let name = lines
        .iter()
        .find_map(|l| l.trim_start().strip_prefix("Dataset Name:"))
        .and_then(|rest| rest.split_whitespace().next())
        .ok_or_else(|| err(None, "no `Dataset Name:` line"))?
        .to_string();
    let kind = if lines
        .iter()
        .any(|l| l.contains("Nonlinear Least Squares Regression"))
    {
        StrdKind::Nonlinear
    } else if lines
        .iter()
        .any(|l| l.contains("Linear Least Squares Regression"))
    {
        StrdKind::Linear
    } else {
        return Err(err(
            None,
            "no `Procedure:` line naming linear or nonlinear regression",
        ));
    };
    let certified = line_range(&lines, "Certified Values")?;
    let data = line_range(&lines, "Data  ")
        .or_else(|_| line_range(&lines, "Data "))
        .map_err(|_| {
            err(
                None,
                "no `Data (lines a to b)` entry in the file format block",
            )
        })?;
    let difficulty = lines
        .iter()
        .find(|l| l.contains("Level of Difficulty"))
        .and_then(|l| {
            if l.contains("Lower") {
                Some(Difficulty::Lower)
            } else if l.contains("Average") {
                Some(Difficulty::Average)
            } else if l.contains("Higher") {
                Some(Difficulty::Higher)
            } else {
                None
            }
        })
        .ok_or_else(|| err(None, "no `… Level of Difficulty` line"))?;

    let model_text = model_text(&lines, certified.0);
    let block = slice(&lines, certified)?;
    let parameters = parse_parameters(block, certified.0, kind)?;
    if parameters.is_empty() {
        return Err(err(
            Some(certified.0),
            "no parameter lines in the certified values",
        ));
    }
    let (residual_ss, residual_sd, residual_sd_digits, r_squared, dof) =
        parse_summary(block, certified.0, kind)?;

    let header_line = data.0.checked_sub(1).filter(|&l| l >= 1);
    let column_names: Vec<String> = header_line
        .and_then(|l| lines.get(l - 1))
        .and_then(|l| l.trim_start().strip_prefix("Data:"))
        .map(|rest| rest.split_whitespace().map(str::to_string).collect())
        .unwrap_or_default();
    let mut columns: Vec<Vec<f64>> = Vec::new();
    for (k, line) in slice(&lines, data)?.iter().enumerate() {
        let lineno = data.0 + k;
        let values = numbers(line).ok_or_else(|| err(Some(lineno), "data line is not numeric"))?;
        if values.is_empty() {
            continue;
        }
        if columns.is_empty() {
            columns = vec![Vec::new(); values.len()];
        }
        if values.len() != columns.len() {
            return Err(err(
                Some(lineno),
                format!(
                    "data line has {} values, expected {}",
                    values.len(),
                    columns.len()
                ),
            ));
        }
        for (c, v) in columns.iter_mut().zip(values) {
            c.push(v);
        }
    }
    if columns.len() < 2 {
        return Err(err(
            Some(data.0),
            "data need a response and at least one predictor",
        ));
    }
    let y = columns.remove(0);
    Ok(StrdProblem {
        name,
        kind,
        difficulty,
        model_text,
        parameters,
        residual_ss,
        residual_sd,
        residual_sd_digits,
        r_squared,
        dof,
        column_names,
        y,
        x: columns,
    })
}

/// `(lines a to b)` after `label` in the file format block, 1-based inclusive.
fn line_range(lines: &[&str], label: &str) -> Result<(usize, usize), StrdParseError> {
    for l in lines.iter().take(20) {
        if let Some(pos) = l.find(label) {
            let rest = &l[pos + label.len()..];
            let inner = rest
                .split_once("lines")
                .and_then(|(_, r)| r.split_once(')'))
                .map(|(r, _)| r);
            if let Some(inner) = inner {
                let parts: Vec<&str> = inner.split_whitespace().collect();
                if let [a, "to", b] = parts.as_slice()
                    && let (Ok(a), Ok(b)) = (a.parse::<usize>(), b.parse::<usize>())
                    && a >= 1
                    && a <= b
                {
                    return Ok((a, b));
                }
            }
        }
    }
    Err(err(
        None,
        format!("no `{} (lines a to b)` entry", label.trim()),
    ))
}

fn slice<'a>(lines: &'a [&'a str], range: (usize, usize)) -> Result<&'a [&'a str], StrdParseError> {
    lines.get(range.0 - 1..range.1).ok_or_else(|| {
        err(
            Some(range.0),
            format!("lines {} to {} are past the end", range.0, range.1),
        )
    })
}

/// Every whitespace-separated token parsed as a number, or None if one is not a number.
fn numbers(s: &str) -> Option<Vec<f64>> {
    s.split_whitespace()
        .map(|t| t.parse::<f64>().ok())
        .collect()
}

/// Significant digits of a printed number: the mantissa's digits without leading zeros
/// (trailing zeros count, they were printed). A printed zero counts its printed decimals
/// (`0.000000000000000` certifies zero to 15 decimals).
fn significant_digits(token: &str) -> u32 {
    let mantissa = token
        .trim_start_matches(['+', '-'])
        .split(['E', 'e'])
        .next()
        .unwrap_or("");
    let digits: String = mantissa.chars().filter(|c| c.is_ascii_digit()).collect();
    let trimmed = digits.trim_start_matches('0');
    if trimmed.is_empty() {
        mantissa.split_once('.').map_or(0, |(_, d)| d.len()) as u32
    } else {
        trimmed.len() as u32
    }
}

fn parse_parameters(
    block: &[&str],
    first: usize,
    kind: StrdKind,
) -> Result<Vec<CertifiedParameter>, StrdParseError> {
    let mut out = Vec::new();
    for (k, line) in block.iter().enumerate() {
        let lineno = first + k;
        let t = line.trim();
        let Some(name) = t.split_whitespace().next() else {
            continue;
        };
        let is_param = (name.starts_with('b') || name.starts_with('B'))
            && name.len() > 1
            && name[1..].chars().all(|c| c.is_ascii_digit());
        if !is_param {
            continue;
        }
        let rest = t[name.len()..].trim_start();
        let rest = rest.strip_prefix('=').unwrap_or(rest);
        let tokens: Vec<&str> = rest.split_whitespace().collect();
        let value_of = |s: &str| {
            s.parse::<f64>()
                .map_err(|_| err(Some(lineno), format!("`{s}` is not a number")))
        };
        let (starts, v, sd) = match (kind, tokens.as_slice()) {
            (StrdKind::Nonlinear, [s1, s2, v, sd]) => {
                (Some([value_of(s1)?, value_of(s2)?]), *v, *sd)
            }
            (StrdKind::Linear, [v, sd]) => (None, *v, *sd),
            _ => {
                return Err(err(
                    Some(lineno),
                    format!("parameter line for {name} has {} numbers", tokens.len()),
                ));
            }
        };
        out.push(CertifiedParameter {
            name: name.to_string(),
            value: value_of(v)?,
            value_digits: significant_digits(v),
            std_dev: value_of(sd)?,
            std_dev_digits: significant_digits(sd),
            starts,
        });
    }
    Ok(out)
}

type Summary = (Option<f64>, f64, u32, Option<f64>, usize);

fn parse_summary(block: &[&str], first: usize, kind: StrdKind) -> Result<Summary, StrdParseError> {
    let mut rss = None;
    let mut sd = None;
    let mut r2 = None;
    let mut dof = None;
    for (k, line) in block.iter().enumerate() {
        let lineno = first + k;
        let t = line.trim();
        let last_number = |t: &str| -> Option<(f64, u32)> {
            let tok = t.split_whitespace().last()?;
            tok.parse::<f64>()
                .ok()
                .map(|v| (v, significant_digits(tok)))
        };
        if t.starts_with("Residual Sum of Squares:") {
            rss = last_number(t).map(|v| v.0);
        } else if t.starts_with("Residual Standard Deviation:")
            || (kind == StrdKind::Linear && t.starts_with("Standard Deviation"))
        {
            if let Some(v) = last_number(t) {
                sd = Some(v);
            }
        } else if t.starts_with("Degrees of Freedom:") {
            dof = t
                .split_whitespace()
                .last()
                .and_then(|v| v.parse::<usize>().ok());
        } else if t.starts_with("R-Squared") {
            r2 = last_number(t).map(|v| v.0);
        } else if kind == StrdKind::Linear && t.starts_with("Residual") {
            // ANOVA row: Residual <dof> <sum of squares> <mean square>
            let v: Vec<&str> = t.split_whitespace().skip(1).collect();
            if v.len() >= 2 {
                dof = v[0].parse::<usize>().ok().or(dof);
                rss = v[1].parse::<f64>().ok().or(rss);
            }
        }
        let _ = lineno;
    }
    let (sd, sd_digits) = sd.ok_or_else(|| {
        err(
            Some(first),
            "no residual standard deviation in the certified values",
        )
    })?;
    let dof = dof.ok_or_else(|| err(Some(first), "no residual degrees of freedom"))?;
    Ok((rss, sd, sd_digits, r2, dof))
}

/// The equation lines of the `Model:` block (from the first line with `=` to the line
/// before the certified values or the `Certified Regression Statistics` heading).
fn model_text(lines: &[&str], certified_start: usize) -> String {
    let Some(start) = lines
        .iter()
        .position(|l| l.trim_start().starts_with("Model:"))
    else {
        return String::new();
    };
    let mut out: Vec<&str> = Vec::new();
    let end = certified_start.saturating_sub(1).min(lines.len());
    let mut seen_equation = false;
    for l in lines.get(start + 1..end).unwrap_or(&[]) {
        let t = l.trim();
        if t.starts_with("Certified Regression") || t.starts_with("Start") {
            break;
        }
        if t.contains('=') {
            seen_equation = true;
        }
        if seen_equation && !t.is_empty() {
            out.push(t);
        }
    }
    out.join("\n")
}

/// Log relative error of `estimate` against `certified` (McCullough, "Assessing the reliability
/// of statistical software", The American Statistician 52, 1998):
/// LRE = −log₁₀(|estimate − certified| / |certified|), capped at `digits` (the certified
/// significant digits) and 0 when the estimate misses by more than 100 %. For a certified
/// value of exactly 0 the absolute error is used, LRE = −log₁₀|estimate| (same source).
/// A non-finite estimate scores 0.
pub fn lre(estimate: f64, certified: f64, digits: u32) -> f64 {
    let cap = f64::from(digits);
    if !estimate.is_finite() {
        return 0.0;
    }
    let err = if certified == 0.0 {
        estimate.abs()
    } else {
        (estimate - certified).abs() / certified.abs()
    };
    if err == 0.0 {
        return cap;
    }
    if certified != 0.0 && err > 1.0 {
        return 0.0;
    }
    // `+ 0.0` turns −0 (an error of exactly 100 %) into 0.
    (-err.log10()).clamp(0.0, cap) + 0.0
}

#[cfg(test)]
mod tests {
    use super::*;

    // A file in the StRD layout with invented numbers (not a NIST dataset): a sensor
    // warm-up curve, two parameters.
    const SAMPLE: &str = "NIST/ITL StRD\r
Dataset Name:  Warmup1   (Warmup1.dat)\r
\r
File Format:   ASCII\r
               Starting Values   (lines 16 to 17)\r
               Certified Values  (lines 16 to 22)\r
               Data              (lines 25 to 27)\r
\r
Procedure:     Nonlinear Least Squares Regression\r
Data:          1 Response  (y)\r
               3 Observations\r
               Lower Level of Difficulty\r
Model:         2 Parameters (b1 and b2)\r
               y = b1*(1-exp[-b2*x])  +  e\r
        Start 1     Start 2           Parameter     Standard Deviation\r
  b1 =   500         250           1.2500000000E+02  3.1000000000E+00\r
  b2 =     0.0001      0.0005      4.2000000000E-04  5.5000000000E-06\r
\r
Residual Sum of Squares:                    2.5000000000E-01\r
Residual Standard Deviation:                5.0000000000E-01\r
Degrees of Freedom:                                 1\r
Number of Observations:                             3\r
\r
Data:   y               x\r
      12.50E0      80.0E0\r
      16.25E0     120.0E0\r
      19.00E0     150.0E0\r
";

    #[test]
    fn parses_the_layout_stated_in_the_header() {
        let p = parse(SAMPLE).unwrap();
        assert_eq!(p.name, "Warmup1");
        assert_eq!(p.kind, StrdKind::Nonlinear);
        assert_eq!(p.difficulty, Difficulty::Lower);
        assert_eq!(p.parameters.len(), 2);
        assert_eq!(p.parameters[1].starts, Some([0.0001, 0.0005]));
        assert_eq!(p.parameters[0].value, 125.0);
        assert_eq!(p.parameters[0].value_digits, 11);
        assert_eq!(p.residual_ss, Some(0.25));
        assert_eq!(p.dof, 1);
        assert_eq!(p.column_names, ["y", "x"]);
        assert_eq!(p.y, [12.5, 16.25, 19.0]);
        assert_eq!(p.x, vec![vec![80.0, 120.0, 150.0]]);
        assert_eq!(p.model_text, "y = b1*(1-exp[-b2*x])  +  e");
    }

    #[test]
    fn truncated_file_is_an_error_with_a_line() {
        let cut: String = SAMPLE.lines().take(24).map(|l| format!("{l}\n")).collect();
        let e = parse(&cut).unwrap_err();
        assert_eq!(e.line, Some(25));
    }

    #[test]
    fn lre_follows_its_definition() {
        // Definition in McCullough (1998): −log10 of the relative error, capped, 0 beyond 100 %.
        assert!((lre(1.000001, 1.0, 15) - 6.0).abs() < 1e-6);
        assert_eq!(lre(1.0, 1.0, 11), 11.0);
        assert_eq!(lre(3.0, 1.0, 11), 0.0);
        assert_eq!(lre(1e-20, 1.0, 11), 0.0);
        assert!((lre(1e-9, 0.0, 15) - 9.0).abs() < 1e-12);
        assert_eq!(lre(f64::NAN, 1.0, 11), 0.0);
        assert_eq!(significant_digits("0.000000000000000"), 15);
        assert_eq!(significant_digits("-0.358191792925910E-01"), 15);
        assert_eq!(significant_digits("1.20196866396E-0"), 12);
    }
}

//! A schema-checking reader over one TOML table of the raw recipe.
//!
//! A [`Section`] is built with the list of keys the table may hold; any other key is an error
//! at once, with a "did you mean" suggestion. Typed getters check the value's type and return
//! it with its span.

use std::ops::Range;

use super::raw::{Key, Node, Value};
use super::{Spanned, Text};
use crate::error::{Error, Result, did_you_mean};
use crate::source::SourceFile;

pub struct Section<'a> {
    pub source: &'a SourceFile,
    /// How the table is named in messages, e.g. `[fit]` or `[model.parameters.B]`.
    pub label: String,
    pub span: Range<usize>,
    entries: Vec<(Key, Node)>,
}

impl<'a> Section<'a> {
    /// Check that every key of `entries` is in `allowed`.
    pub fn new(
        source: &'a SourceFile,
        label: impl Into<String>,
        span: Range<usize>,
        entries: Vec<(Key, Node)>,
        allowed: &[&str],
    ) -> Result<Self> {
        let label = label.into();
        for (k, _) in &entries {
            if !allowed.contains(&k.name.as_str()) {
                let mut err = Error::input(format!("unknown key `{}` in {label}", k.name))
                    .at(source.locate(k.span.clone()));
                err = match did_you_mean(&k.name, allowed.iter().copied()) {
                    Some(s) => err.help(s),
                    None => err.help(format!("the keys allowed here are: {}", allowed.join(", "))),
                };
                return Err(err);
            }
        }
        Ok(Section {
            source,
            label,
            span,
            entries,
        })
    }

    /// A table whose keys are free (names of variables or parameters).
    pub fn open(
        source: &'a SourceFile,
        label: impl Into<String>,
        span: Range<usize>,
        entries: Vec<(Key, Node)>,
    ) -> Self {
        Section {
            source,
            label: label.into(),
            span,
            entries,
        }
    }

    pub fn error(&self, span: Range<usize>, message: impl Into<String>) -> Error {
        Error::input(message).at(self.source.locate(span))
    }

    /// Remove and return an entry.
    pub fn take(&mut self, key: &str) -> Option<(Key, Node)> {
        let i = self.entries.iter().position(|(k, _)| k.name == key)?;
        Some(self.entries.remove(i))
    }

    /// Every remaining key with the span of `key = value`.
    pub fn key_spans(&self) -> Vec<(String, Range<usize>)> {
        self.entries
            .iter()
            .map(|(k, n)| (k.name.clone(), k.span.start..n.span.end.max(k.span.end)))
            .collect()
    }

    /// All remaining entries (for tables with free keys).
    pub fn into_entries(self) -> Vec<(Key, Node)> {
        self.entries
    }

    fn type_error(&self, key: &Key, node: &Node, expected: &str) -> Error {
        self.error(
            node.span.clone(),
            format!(
                "`{}` in {} must be {expected}, found {}",
                key.name,
                self.label,
                node.value.type_name()
            ),
        )
    }

    pub fn string(&mut self, key: &str) -> Result<Option<Spanned<String>>> {
        Ok(self.text(key)?.map(|t| Spanned::new(t.value, t.span)))
    }

    /// A string with the information needed to point inside it.
    pub fn text(&mut self, key: &str) -> Result<Option<Text>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => match node.value {
                Value::Str(ref s) => Ok(Some(text_of(self.source, s, node.span.clone()))),
                _ => Err(self.type_error(&k, &node, "a string")),
            },
        }
    }

    /// A number; TOML integers are accepted where a float is expected.
    pub fn number(&mut self, key: &str) -> Result<Option<Spanned<f64>>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => {
                let v = match node.value {
                    Value::Float(f) => f,
                    Value::Int(i) => i as f64,
                    _ => return Err(self.type_error(&k, &node, "a number")),
                };
                if !v.is_finite() {
                    return Err(self
                        .error(
                            node.span.clone(),
                            format!("`{}` in {} must be a finite number", k.name, self.label),
                        )
                        .help("write an ordinary number; nan and inf are not allowed here"));
                }
                Ok(Some(Spanned::new(v, node.span)))
            }
        }
    }

    /// A TOML local date (`due = 2027-03-01`, no quotes, no time).
    pub fn date(&mut self, key: &str) -> Result<Option<Spanned<crate::metrology::Date>>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => match &node.value {
                Value::Datetime(d) => match crate::metrology::Date::from_toml(d) {
                    Some(date) => Ok(Some(Spanned::new(date, node.span))),
                    None => Err(self
                        .error(
                            node.span.clone(),
                            format!(
                                "`{}` in {} must be a valid calendar date, without a time",
                                k.name, self.label
                            ),
                        )
                        .help(format!(
                            "write only the day, e.g. `{} = 2027-03-01`",
                            k.name
                        ))),
                },
                Value::Str(text) if crate::metrology::Date::parse(text).is_some() => Err(self
                    .error(
                        node.span.clone(),
                        format!(
                            "`{}` in {} is a string, not a TOML date",
                            k.name, self.label
                        ),
                    )
                    .help(format!("remove the quotes: `{} = {text}`", k.name))),
                _ => Err(self.type_error(&k, &node, "a date such as 2027-03-01")),
            },
        }
    }

    pub fn boolean(&mut self, key: &str) -> Result<Option<Spanned<bool>>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => match node.value {
                Value::Bool(b) => Ok(Some(Spanned::new(b, node.span))),
                _ => Err(self.type_error(&k, &node, "true or false")),
            },
        }
    }

    /// A non-negative integer.
    pub fn count(&mut self, key: &str) -> Result<Option<Spanned<usize>>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => match node.value {
                Value::Int(i) if i >= 0 => Ok(Some(Spanned::new(i as usize, node.span))),
                Value::Int(_) => Err(self.error(
                    node.span.clone(),
                    format!("`{}` in {} must not be negative", k.name, self.label),
                )),
                _ => Err(self.type_error(&k, &node, "a whole number")),
            },
        }
    }

    /// A sub-table, checked against its own allowed keys.
    pub fn table(&mut self, key: &str, allowed: &[&str]) -> Result<Option<Section<'a>>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => match node.value {
                Value::Table(entries) => {
                    let label = sub_label(&self.label, &k.name);
                    Section::new(self.source, label, node.span, entries, allowed).map(Some)
                }
                ref v => Err(self.error(
                    node.span.clone(),
                    format!(
                        "`{}` in {} must be a table, found {}",
                        k.name,
                        self.label,
                        v.type_name()
                    ),
                )),
            },
        }
    }

    /// A sub-table with free keys.
    pub fn open_table(&mut self, key: &str) -> Result<Option<Section<'a>>> {
        match self.take(key) {
            None => Ok(None),
            Some((k, node)) => match node.value {
                Value::Table(entries) => Ok(Some(Section::open(
                    self.source,
                    sub_label(&self.label, &k.name),
                    node.span,
                    entries,
                ))),
                ref v => Err(self.error(
                    node.span.clone(),
                    format!(
                        "`{}` in {} must be a table, found {}",
                        k.name,
                        self.label,
                        v.type_name()
                    ),
                )),
            },
        }
    }

    /// An array's items, or a single non-array value as a one-item list.
    pub fn list(&mut self, key: &str) -> Result<Option<(Range<usize>, Vec<Node>)>> {
        match self.take(key) {
            None => Ok(None),
            Some((_, node)) => match node.value {
                Value::Array(items) => Ok(Some((node.span, items))),
                _ => {
                    let span = node.span.clone();
                    Ok(Some((span, vec![node])))
                }
            },
        }
    }

    /// An array of strings.
    pub fn strings(&mut self, key: &str) -> Result<Option<Vec<Text>>> {
        let Some((_, items)) = self.list(key)? else {
            return Ok(None);
        };
        let mut out = Vec::new();
        for node in items {
            match node.value {
                Value::Str(ref s) => out.push(text_of(self.source, s, node.span.clone())),
                ref v => {
                    return Err(self.error(
                        node.span.clone(),
                        format!(
                            "`{key}` in {} must list strings, found {}",
                            self.label,
                            v.type_name()
                        ),
                    ));
                }
            }
        }
        Ok(Some(out))
    }
}

/// `[a]` + `b` → `[a.b]`.
pub fn sub_label(label: &str, key: &str) -> String {
    if label == "the recipe" {
        format!("[{key}]")
    } else {
        let inner = label.trim_start_matches('[').trim_end_matches(']');
        format!("[{inner}.{key}]")
    }
}

/// A string node as [`Text`]: when the raw TOML between the quotes equals the decoded value
/// (no escapes, single-line), character positions inside it map back to the recipe exactly.
pub fn text_of(source: &SourceFile, value: &str, span: Range<usize>) -> Text {
    let raw = source.text.get(span.clone()).unwrap_or("");
    let content_start = ["\"\"\"", "'''", "\"", "'"]
        .iter()
        .find(|q| raw.starts_with(*q) && raw.len() >= 2 * q.len())
        .and_then(|q| {
            let inner = raw.get(q.len()..raw.len() - q.len())?;
            (inner == value).then_some(span.start + q.len())
        });
    Text {
        value: value.to_string(),
        span,
        content_start,
    }
}

/// Keys of a free table must be identifiers (variable or parameter names).
pub fn is_identifier(name: &str) -> bool {
    let mut chars = name.chars();
    match chars.next() {
        Some(c) if c.is_alphabetic() || c == '_' => chars.all(|c| c.is_alphanumeric() || c == '_'),
        _ => false,
    }
}

//! The recipe as read: a TOML tree in which every key and value keeps its byte span.
//!
//! This is step one of recipe loading. Nothing here knows the schema; [`super::check`]
//! walks the tree, validates it and builds the checked [`super::Recipe`].

use std::ops::Range;
use std::sync::Arc;

use toml::de::{DeTable, DeValue};

use crate::error::{Error, Result};
use crate::source::SourceFile;

/// A TOML value with its span.
#[derive(Debug, Clone)]
pub struct Node {
    pub span: Range<usize>,
    pub value: Value,
}

/// A TOML key with its span.
#[derive(Debug, Clone)]
pub struct Key {
    pub name: String,
    pub span: Range<usize>,
}

#[derive(Debug, Clone)]
pub enum Value {
    Str(String),
    Int(i64),
    Float(f64),
    Bool(bool),
    Datetime(toml::value::Datetime),
    Array(Vec<Node>),
    Table(Vec<(Key, Node)>),
}

impl Value {
    /// The TOML type name, for "expected a number, found a string" messages.
    pub fn type_name(&self) -> &'static str {
        match self {
            Value::Str(_) => "a string",
            Value::Int(_) => "an integer",
            Value::Float(_) => "a float",
            Value::Bool(_) => "a boolean",
            Value::Datetime(_) => "a date",
            Value::Array(_) => "an array",
            Value::Table(_) => "a table",
        }
    }
}

/// A parsed recipe document: the root table and the source it came from.
#[derive(Debug, Clone)]
pub struct RawRecipe {
    pub source: Arc<SourceFile>,
    pub root: Vec<(Key, Node)>,
}

impl RawRecipe {
    /// Parse TOML text. Syntax errors carry the TOML parser's span.
    pub fn parse(source: Arc<SourceFile>) -> Result<RawRecipe> {
        let parsed = DeTable::parse(&source.text).map_err(|e| {
            let mut err = Error::input(format!(
                "the recipe is not valid TOML: {}",
                e.message().trim()
            ))
            .help("fix the TOML syntax at the marked place (https://toml.io describes the format)");
            match e.span() {
                Some(span) => err = err.at(source.locate(span)),
                None => err = err.in_file(&source.path),
            }
            err
        })?;
        let span = parsed.span();
        let root = convert_table(parsed.into_inner(), span.clone(), &source)?;
        match root.value {
            Value::Table(entries) => Ok(RawRecipe {
                source,
                root: entries,
            }),
            _ => Err(Error::internal("TOML document root is not a table")),
        }
    }
}

fn convert_table(table: DeTable<'_>, span: Range<usize>, source: &SourceFile) -> Result<Node> {
    let mut entries = Vec::with_capacity(table.len());
    for (k, v) in table {
        let key = Key {
            name: k.get_ref().to_string(),
            span: k.span(),
        };
        let vspan = v.span();
        entries.push((key, convert_value(v.into_inner(), vspan, source)?));
    }
    Ok(Node {
        span,
        value: Value::Table(entries),
    })
}

fn convert_value(value: DeValue<'_>, span: Range<usize>, source: &SourceFile) -> Result<Node> {
    let bad_number = |what: &str| {
        Error::input(format!("this {what} cannot be represented"))
            .at(source.locate(span.clone()))
            .help("write a number within the range of a 64-bit float / integer")
    };
    let value = match value {
        DeValue::String(s) => Value::Str(s.into_owned()),
        DeValue::Integer(i) => {
            let v = i64::from_str_radix(&i.as_str().replace('_', ""), i.radix())
                .map_err(|_| bad_number("integer"))?;
            Value::Int(v)
        }
        DeValue::Float(f) => {
            let text = f.as_str().replace('_', "");
            let v: f64 = match text.as_str() {
                "inf" | "+inf" => f64::INFINITY,
                "-inf" => f64::NEG_INFINITY,
                "nan" | "+nan" | "-nan" => f64::NAN,
                t => t.parse().map_err(|_| bad_number("float"))?,
            };
            Value::Float(v)
        }
        DeValue::Boolean(b) => Value::Bool(b),
        DeValue::Datetime(d) => Value::Datetime(d),
        DeValue::Array(a) => {
            let mut items = Vec::new();
            for item in a {
                let s = item.span();
                items.push(convert_value(item.into_inner(), s, source)?);
            }
            Value::Array(items)
        }
        DeValue::Table(t) => return convert_table(t, span, source),
    };
    Ok(Node { span, value })
}

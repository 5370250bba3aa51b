//! Splits expression source into tokens with byte spans.

use super::ast::Span;
use super::error::ExprError;

#[derive(Clone, Debug, PartialEq)]
pub enum Tok {
    Number(f64),
    Ident(String),
    Plus,
    Minus,
    Star,
    Slash,
    Caret,
    LParen,
    RParen,
    Comma,
    Lt,
    Le,
    Gt,
    Ge,
    EqEq,
    Ne,
    AndAnd,
    OrOr,
    Bang,
    /// A single `=`, only meaningful after the response name of an equation.
    Assign,
    Eof,
}

impl Tok {
    /// How the token reads in an error message.
    pub fn describe(&self) -> String {
        match self {
            Tok::Number(v) => format!("the number `{v}`"),
            Tok::Ident(s) => format!("the name `{s}`"),
            Tok::Eof => "the end of the expression".to_string(),
            other => format!("`{}`", other.text()),
        }
    }

    fn text(&self) -> &'static str {
        match self {
            Tok::Plus => "+",
            Tok::Minus => "-",
            Tok::Star => "*",
            Tok::Slash => "/",
            Tok::Caret => "^",
            Tok::LParen => "(",
            Tok::RParen => ")",
            Tok::Comma => ",",
            Tok::Lt => "<",
            Tok::Le => "<=",
            Tok::Gt => ">",
            Tok::Ge => ">=",
            Tok::EqEq => "==",
            Tok::Ne => "!=",
            Tok::AndAnd => "&&",
            Tok::OrOr => "||",
            Tok::Bang => "!",
            Tok::Assign => "=",
            Tok::Number(_) | Tok::Ident(_) | Tok::Eof => "",
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Token {
    pub tok: Tok,
    pub span: Span,
}

fn is_ident_start(c: char) -> bool {
    c == '_' || c.is_alphabetic()
}

fn is_ident_continue(c: char) -> bool {
    c == '_' || c.is_alphanumeric()
}

/// Tokenizes the whole source; the last token is always `Eof`.
pub fn lex(src: &str) -> Result<Vec<Token>, ExprError> {
    let mut tokens = Vec::new();
    let mut chars = src.char_indices().peekable();
    while let Some(&(start, c)) = chars.peek() {
        if c.is_whitespace() {
            chars.next();
            continue;
        }
        if c.is_ascii_digit() || (c == '.' && next_is_digit(src, start + 1)) {
            let (token, end) = lex_number(src, start)?;
            while chars.peek().is_some_and(|&(i, _)| i < end) {
                chars.next();
            }
            tokens.push(token);
            continue;
        }
        if is_ident_start(c) {
            let mut end = start;
            while let Some(&(i, c)) = chars.peek() {
                if !is_ident_continue(c) {
                    break;
                }
                end = i + c.len_utf8();
                chars.next();
            }
            tokens.push(Token {
                tok: Tok::Ident(src[start..end].to_string()),
                span: Span::new(start, end),
            });
            continue;
        }
        chars.next();
        let next = chars.peek().map(|&(_, c)| c);
        let one = |tok| (tok, 1);
        let (tok, len) = match (c, next) {
            ('+', _) => one(Tok::Plus),
            ('-', _) => one(Tok::Minus),
            ('*', Some('*')) => {
                return Err(
                    ExprError::new(Span::new(start, start + 2), "`**` is not an operator")
                        .with_help("write powers with `^`, e.g. `x^2`"),
                );
            }
            ('*', _) => one(Tok::Star),
            ('/', _) => one(Tok::Slash),
            ('^', _) => one(Tok::Caret),
            ('(', _) => one(Tok::LParen),
            (')', _) => one(Tok::RParen),
            (',', _) => one(Tok::Comma),
            ('<', Some('=')) => (Tok::Le, 2),
            ('<', _) => one(Tok::Lt),
            ('>', Some('=')) => (Tok::Ge, 2),
            ('>', _) => one(Tok::Gt),
            ('=', Some('=')) => (Tok::EqEq, 2),
            ('=', _) => one(Tok::Assign),
            ('!', Some('=')) => (Tok::Ne, 2),
            ('!', _) => one(Tok::Bang),
            ('&', Some('&')) => (Tok::AndAnd, 2),
            ('|', Some('|')) => (Tok::OrOr, 2),
            ('&', _) | ('|', _) => {
                return Err(ExprError::new(
                    Span::new(start, start + 1),
                    format!("`{c}` alone is not an operator"),
                )
                .with_help(format!(
                    "write `{c}{c}` for logical {}",
                    if c == '&' { "and" } else { "or" }
                )));
            }
            _ => {
                let mut err = ExprError::new(
                    Span::new(start, start + c.len_utf8()),
                    format!("unexpected character `{c}`"),
                );
                if c == '×' || c == '·' {
                    err = err.with_help("write multiplication with `*`");
                } else if c == '−' {
                    err = err.with_help("write subtraction with the ASCII `-`");
                }
                return Err(err);
            }
        };
        if len == 2 {
            chars.next();
        }
        tokens.push(Token {
            tok,
            span: Span::new(start, start + len),
        });
    }
    tokens.push(Token {
        tok: Tok::Eof,
        span: Span::new(src.len(), src.len()),
    });
    Ok(tokens)
}

fn next_is_digit(src: &str, at: usize) -> bool {
    src.as_bytes().get(at).is_some_and(|b| b.is_ascii_digit())
}

/// `digits [. digits] [e [+-] digits]` or `. digits [e …]`; returns the token and the end offset.
fn lex_number(src: &str, start: usize) -> Result<(Token, usize), ExprError> {
    let bytes = src.as_bytes();
    let digits = |mut i: usize| {
        while bytes.get(i).is_some_and(|b| b.is_ascii_digit()) {
            i += 1;
        }
        i
    };
    let mut end = digits(start);
    if bytes.get(end) == Some(&b'.') {
        end = digits(end + 1);
    }
    if matches!(bytes.get(end), Some(b'e' | b'E')) {
        let mut i = end + 1;
        if matches!(bytes.get(i), Some(b'+' | b'-')) {
            i += 1;
        }
        let after = digits(i);
        if after == i {
            return Err(ExprError::new(
                Span::new(start, i.min(src.len())),
                "the exponent of this number has no digits",
            )
            .with_help("write e.g. `2e-3`; for a product with a name `e` write `2*e`"));
        }
        end = after;
    }
    // A number running straight into a name or another dot is a typo, not two tokens.
    if let Some(c) = src[end..].chars().next()
        && (is_ident_continue(c) || c == '.')
    {
        let mut bad_end = end;
        for (i, c) in src[end..].char_indices() {
            if is_ident_continue(c) || c == '.' {
                bad_end = end + i + c.len_utf8();
            } else {
                break;
            }
        }
        let help = if c == '.' {
            "a number has at most one decimal point".to_string()
        } else {
            format!(
                "write the product with `*`, e.g. `{}*{}`",
                &src[start..end],
                &src[end..bad_end]
            )
        };
        return Err(ExprError::new(Span::new(start, bad_end), "malformed number").with_help(help));
    }
    let text = &src[start..end];
    let value: f64 = text
        .parse()
        .map_err(|_| ExprError::new(Span::new(start, end), format!("`{text}` is not a number")))?;
    if !value.is_finite() {
        return Err(ExprError::new(
            Span::new(start, end),
            format!("the number `{text}` is too large for a 64-bit float"),
        ));
    }
    Ok((
        Token {
            tok: Tok::Number(value),
            span: Span::new(start, end),
        },
        end,
    ))
}

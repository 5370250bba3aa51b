//! Recursive-descent parser for the grammar in `docs/grammar.md`.
//!
//! Chains of `+ -`, `* /`, `&&` and `||` are read by loops, never by recursion; every
//! construct that recurses (parentheses, calls, `^`, prefix `-` and `!`) first takes a
//! nesting level, and more than [`MAX_DEPTH`] levels is an error, so no input can
//! exhaust the stack.

use super::ast::{AddOp, CmpOp, Expr, ExprKind, Func, LogicOp, MulOp, Span};
use super::error::{ExprError, MAX_DEPTH, MAX_SOURCE_CHARS};
use super::lexer::{Tok, Token, lex};

/// `response = expression`, as written in `[model] equation`.
#[derive(Clone, Debug, PartialEq)]
pub struct Equation {
    pub response: String,
    pub response_span: Span,
    pub rhs: Expr,
}

/// Parses an arithmetic expression (model right-hand sides, weights, transforms).
/// Comparisons and logical operators are refused: they belong to filters.
pub fn parse_expression(src: &str) -> Result<Expr, ExprError> {
    let tokens = lex_checked(src)?;
    let mut p = Parser::new(&tokens);
    let expr = p.parse_all()?;
    check_numeric(&expr)?;
    Ok(expr)
}

/// Parses a row filter (`[data] where`): comparisons combined with `&&`, `||`, `!`.
pub fn parse_filter(src: &str) -> Result<Expr, ExprError> {
    let tokens = lex_checked(src)?;
    let mut p = Parser::new(&tokens);
    let expr = p.parse_all()?;
    check_boolean(&expr)?;
    Ok(expr)
}

/// Parses `<identifier> = <expression>`. Spans in the result are offsets into `src`.
pub fn parse_equation(src: &str) -> Result<Equation, ExprError> {
    let tokens = lex_checked(src)?;
    let assign = tokens.iter().position(|t| t.tok == Tok::Assign);
    let Some(assign) = assign else {
        let span = Span::new(0, src.len());
        return Err(ExprError::new(span, "an equation needs `=`")
            .with_help("write it as `response = expression`, e.g. `y = a + b*x`"));
    };
    let (response, response_span) = match (&tokens[..assign], tokens.get(assign)) {
        (
            [
                Token {
                    tok: Tok::Ident(name),
                    span,
                },
            ],
            _,
        ) => (name.clone(), *span),
        ([], Some(t)) => {
            return Err(
                ExprError::new(t.span, "the equation has no response name before `=`")
                    .with_help("write it as `response = expression`, e.g. `y = a + b*x`"),
            );
        }
        (left, _) => {
            let span = left[0].span.to(left[left.len() - 1].span);
            return Err(ExprError::new(
                span,
                "the left side of `=` must be a single name (the response)",
            )
            .with_help("write the model solved for the response, e.g. `y = a + b*x`"));
        }
    };
    if Func::from_name(&response).is_some() || response == "pi" {
        return Err(ExprError::new(
            response_span,
            format!("`{response}` is reserved and cannot name the response"),
        ));
    }
    let mut p = Parser::new(&tokens[assign + 1..]);
    if p.peek().tok == Tok::Eof {
        return Err(ExprError::new(
            p.peek().span,
            "the equation has nothing after `=`",
        ));
    }
    let rhs = p.parse_all()?;
    check_numeric(&rhs)?;
    if let Some((_, span)) = rhs.identifiers().into_iter().find(|(n, _)| *n == response) {
        return Err(ExprError::new(
            span,
            format!("the response `{response}` also appears on the right side"),
        )
        .with_help("write the model solved for the response (an explicit equation)"));
    }
    Ok(Equation {
        response,
        response_span,
        rhs,
    })
}

/// Enforces the length and depth limits before any recursion, then tokenizes.
fn lex_checked(src: &str) -> Result<Vec<Token>, ExprError> {
    // Parentheses depth first, by a loop: a 10,000-level nesting must get the depth
    // message even though it also breaks the length limit.
    let mut depth = 0usize;
    for (i, b) in src.bytes().enumerate() {
        match b {
            b'(' => {
                depth += 1;
                if depth > MAX_DEPTH {
                    return Err(depth_error(Span::new(i, i + 1)));
                }
            }
            b')' => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    let chars = src.chars().count();
    if chars > MAX_SOURCE_CHARS {
        let start = src
            .char_indices()
            .nth(MAX_SOURCE_CHARS)
            .map_or(src.len(), |(i, _)| i);
        return Err(ExprError::new(
            Span::new(start, src.len()),
            format!("the expression is {chars} characters long; the limit is {MAX_SOURCE_CHARS}"),
        )
        .with_help("split the model into shorter pieces or use a preset"));
    }
    if src.trim().is_empty() {
        return Err(ExprError::new(
            Span::new(0, src.len()),
            "the expression is empty",
        ));
    }
    lex(src)
}

fn depth_error(span: Span) -> ExprError {
    ExprError::new(
        span,
        format!("the expression is nested deeper than {MAX_DEPTH} levels"),
    )
    .with_help("parentheses, function calls, `^` and prefix signs each open a level; flatten the expression")
}

struct Parser<'t> {
    tokens: &'t [Token],
    pos: usize,
    depth: usize,
}

impl<'t> Parser<'t> {
    fn new(tokens: &'t [Token]) -> Parser<'t> {
        Parser {
            tokens,
            pos: 0,
            depth: 0,
        }
    }

    fn peek(&self) -> &'t Token {
        // The lexer always ends the stream with `Eof`, and `bump` never moves past it.
        &self.tokens[self.pos.min(self.tokens.len() - 1)]
    }

    fn bump(&mut self) -> &'t Token {
        let t = self.peek();
        if t.tok != Tok::Eof {
            self.pos += 1;
        }
        t
    }

    fn prev_span(&self) -> Span {
        self.tokens
            .get(self.pos.wrapping_sub(1))
            .map_or(Span::default(), |t| t.span)
    }

    fn enter(&mut self, span: Span) -> Result<(), ExprError> {
        self.depth += 1;
        if self.depth > MAX_DEPTH {
            return Err(depth_error(span));
        }
        Ok(())
    }

    fn leave(&mut self) {
        self.depth -= 1;
    }

    fn parse_all(&mut self) -> Result<Expr, ExprError> {
        let expr = self.parse_or()?;
        let t = self.peek();
        match &t.tok {
            Tok::Eof => Ok(expr),
            Tok::RParen => Err(ExprError::new(t.span, "unmatched `)`")
                .with_help("remove it or add the matching `(`")),
            Tok::Assign => Err(ExprError::new(t.span, "`=` is not allowed here").with_help(
                "an equation has one `=` after the response name; to compare values in a filter write `==`",
            )),
            Tok::Comma => Err(ExprError::new(t.span, "`,` outside a function call")),
            other => Err(ExprError::new(
                t.span,
                format!("unexpected {} after a complete expression", other.describe()),
            )
            .with_help("put an operator (`+ - * / ^`) between the two parts")),
        }
    }

    fn parse_or(&mut self) -> Result<Expr, ExprError> {
        self.parse_expr(0)
    }

    /// Precedence climbing: a prefix term, then every binary operator that binds at
    /// least as tightly as `min_bp`. Operators of one chain class (`+ -`, `* /`, `&&`,
    /// `||`) extend the node this loop built, so chains come out flat and need no
    /// recursion; only `^` (right-associative) recurses, and it takes a nesting level.
    fn parse_expr(&mut self, min_bp: u8) -> Result<Expr, ExprError> {
        let mut lhs = self.parse_prefix()?;
        let mut built: Option<Class> = None;
        loop {
            let t = self.peek();
            let Some((class, left_bp, right_bp)) = binary_op(&t.tok) else {
                break;
            };
            if left_bp < min_bp {
                break;
            }
            if class == Class::Compare && built == Some(Class::Compare) {
                return Err(ExprError::new(t.span, "comparisons do not chain")
                    .with_help("write `a < b && b < c` instead of `a < b < c`"));
            }
            self.bump();
            let rhs = if class == Class::Pow {
                self.enter(t.span)?;
                if self.peek().tok == Tok::Eof {
                    return Err(
                        ExprError::new(t.span, "`^` has no exponent").with_help("write e.g. `x^2`")
                    );
                }
                let r = self.parse_expr(right_bp)?;
                self.leave();
                r
            } else {
                self.parse_expr(right_bp)?
            };
            lhs = combine(lhs, built == Some(class), &t.tok, rhs);
            built = Some(class);
        }
        Ok(lhs)
    }

    /// Prefix `-` (operand: everything binding tighter than `* /`, so `-x^2 = -(x^2)`),
    /// prefix `!` (operand: a comparison), or an atom.
    fn parse_prefix(&mut self) -> Result<Expr, ExprError> {
        let t = self.peek();
        let (bp, neg) = match t.tok {
            Tok::Minus => (UNARY_BP, true),
            Tok::Bang => (NOT_BP, false),
            Tok::Plus => {
                return Err(ExprError::new(t.span, "a prefix `+` is not allowed")
                    .with_help("remove the `+`"));
            }
            _ => return self.parse_atom(),
        };
        self.bump();
        self.enter(t.span)?;
        let inner = self.parse_expr(bp)?;
        self.leave();
        let span = t.span.to(inner.span);
        let kind = if neg {
            ExprKind::Neg(Box::new(inner))
        } else {
            ExprKind::Not(Box::new(inner))
        };
        Ok(Expr::new(kind, span))
    }

    fn parse_atom(&mut self) -> Result<Expr, ExprError> {
        let t = self.bump();
        match &t.tok {
            Tok::Number(v) => Ok(Expr::new(ExprKind::Number(*v), t.span)),
            Tok::Ident(name) => {
                if self.peek().tok == Tok::LParen {
                    return self.parse_call(name, t.span);
                }
                if Func::from_name(name).is_some() {
                    return Err(ExprError::new(t.span, format!("`{name}` is a function"))
                        .with_help(format!("call it with an argument, e.g. `{name}(x)`")));
                }
                Ok(Expr::new(ExprKind::Name(name.clone()), t.span))
            }
            Tok::LParen => {
                self.enter(t.span)?;
                if self.peek().tok == Tok::RParen {
                    return Err(ExprError::new(
                        t.span.to(self.peek().span),
                        "empty parentheses",
                    ));
                }
                let inner = self.parse_or()?;
                self.expect_close(t.span)?;
                self.leave();
                // The group keeps the span of its contents; the printer re-adds
                // parentheses where precedence needs them.
                Ok(inner)
            }
            Tok::Eof => Err(
                ExprError::new(t.span, "the expression ends too early").with_help(format!(
                    "something is missing after {}",
                    self.tokens
                        .get(self.pos.wrapping_sub(2))
                        .map_or("the start".to_string(), |p| p.tok.describe())
                )),
            ),
            other => Err(ExprError::new(
                t.span,
                format!(
                    "expected a number, a name or `(`, found {}",
                    other.describe()
                ),
            )),
        }
    }

    fn parse_call(&mut self, name: &str, name_span: Span) -> Result<Expr, ExprError> {
        let Some(func) = Func::from_name(name) else {
            let names: Vec<&str> = Func::ALL.iter().map(|f| f.name()).collect();
            let mut err = ExprError::new(name_span, format!("unknown function `{name}`"));
            err = match super::resolve::closest(name, &names) {
                Some(best) => err.with_help(format!("did you mean `{best}`?")),
                None => err.with_help(format!("the functions are {}", names.join(", "))),
            };
            return Err(err);
        };
        let open = self.bump();
        self.enter(open.span)?;
        let mut args = Vec::new();
        if self.peek().tok != Tok::RParen {
            loop {
                args.push(self.parse_or()?);
                if self.peek().tok == Tok::Comma {
                    self.bump();
                    continue;
                }
                break;
            }
        }
        self.expect_close(open.span)?;
        self.leave();
        let span = name_span.to(self.prev_span());
        if args.len() != func.arity() {
            let want = match func.arity() {
                1 => "1 argument".to_string(),
                n => format!("{n} arguments"),
            };
            return Err(ExprError::new(
                span,
                format!("`{name}` takes {want}, found {}", args.len()),
            ));
        }
        Ok(Expr::new(ExprKind::Call { func, args }, span))
    }

    fn expect_close(&mut self, open: Span) -> Result<(), ExprError> {
        let t = self.peek();
        if t.tok == Tok::RParen {
            self.bump();
            return Ok(());
        }
        Err(
            ExprError::new(t.span, format!("expected `)`, found {}", t.tok.describe()))
                .with_help(format!("the `(` at byte {} is not closed", open.start)),
        )
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Class {
    Or,
    And,
    Compare,
    Sum,
    Product,
    Pow,
}

/// Binding power of a prefix `!` operand: tighter than `&&`, looser than comparisons.
const NOT_BP: u8 = 6;
/// Binding power of a prefix `-` operand: tighter than `* /`, looser than `^`.
const UNARY_BP: u8 = 14;

/// (class, left binding power, right binding power) of a binary operator.
/// Left-associative operators have right > left; `^` has right = left (right-associative).
fn binary_op(tok: &Tok) -> Option<(Class, u8, u8)> {
    Some(match tok {
        Tok::OrOr => (Class::Or, 2, 3),
        Tok::AndAnd => (Class::And, 4, 5),
        t if cmp_op(t).is_some() => (Class::Compare, 8, 9),
        Tok::Plus | Tok::Minus => (Class::Sum, 10, 11),
        Tok::Star | Tok::Slash => (Class::Product, 12, 13),
        Tok::Caret => (Class::Pow, 16, 16),
        _ => return None,
    })
}

/// Joins `lhs op rhs`; `extend` means `lhs` is a chain of the same class built by the
/// current loop (not a parenthesized group), which then just grows.
fn combine(lhs: Expr, extend: bool, tok: &Tok, rhs: Expr) -> Expr {
    let span = lhs.span.to(rhs.span);
    let kind = match (tok, lhs.kind) {
        (Tok::Plus | Tok::Minus, kind) => {
            let op = if *tok == Tok::Plus {
                AddOp::Add
            } else {
                AddOp::Sub
            };
            match kind {
                ExprKind::Sum { first, mut rest } if extend => {
                    rest.push((op, rhs));
                    ExprKind::Sum { first, rest }
                }
                kind => ExprKind::Sum {
                    first: Box::new(Expr::new(kind, lhs.span)),
                    rest: vec![(op, rhs)],
                },
            }
        }
        (Tok::Star | Tok::Slash, kind) => {
            let op = if *tok == Tok::Star {
                MulOp::Mul
            } else {
                MulOp::Div
            };
            match kind {
                ExprKind::Product { first, mut rest } if extend => {
                    rest.push((op, rhs));
                    ExprKind::Product { first, rest }
                }
                kind => ExprKind::Product {
                    first: Box::new(Expr::new(kind, lhs.span)),
                    rest: vec![(op, rhs)],
                },
            }
        }
        (Tok::AndAnd | Tok::OrOr, kind) => {
            let op = if *tok == Tok::AndAnd {
                LogicOp::And
            } else {
                LogicOp::Or
            };
            match kind {
                ExprKind::Logic { op: o, mut terms } if extend && o == op => {
                    terms.push(rhs);
                    ExprKind::Logic { op, terms }
                }
                kind => ExprKind::Logic {
                    op,
                    terms: vec![Expr::new(kind, lhs.span), rhs],
                },
            }
        }
        (Tok::Caret, kind) => ExprKind::Pow(Box::new(Expr::new(kind, lhs.span)), Box::new(rhs)),
        (t, kind) => match cmp_op(t) {
            Some(op) => ExprKind::Compare(op, Box::new(Expr::new(kind, lhs.span)), Box::new(rhs)),
            // `binary_op` only admits the tokens above.
            None => kind,
        },
    };
    Expr::new(kind, span)
}

fn cmp_op(tok: &Tok) -> Option<CmpOp> {
    Some(match tok {
        Tok::Lt => CmpOp::Lt,
        Tok::Le => CmpOp::Le,
        Tok::Gt => CmpOp::Gt,
        Tok::Ge => CmpOp::Ge,
        Tok::EqEq => CmpOp::Eq,
        Tok::Ne => CmpOp::Ne,
        _ => return None,
    })
}

/// Refuses comparisons and logic anywhere: the expression must be number-valued.
fn check_numeric(expr: &Expr) -> Result<(), ExprError> {
    let mut found: Option<Span> = None;
    expr.visit(&mut |e| {
        if found.is_none() && e.is_boolean() {
            found = Some(e.span);
        }
    });
    match found {
        None => Ok(()),
        Some(span) => Err(ExprError::new(
            span,
            "comparisons and `&&`, `||`, `!` are only allowed in filters",
        )
        .with_help(
            "use them in `[data] where`; an equation, weight or transform computes a number",
        )),
    }
}

/// A filter must be a condition at the top, conditions under `&& || !`, and numbers
/// everywhere else.
fn check_boolean(expr: &Expr) -> Result<(), ExprError> {
    check_type(expr, true)
}

fn check_type(expr: &Expr, want_bool: bool) -> Result<(), ExprError> {
    if expr.is_boolean() != want_bool {
        return Err(if want_bool {
            ExprError::new(expr.span, "expected a condition, found a number")
                .with_help("compare it with something, e.g. `T > 0`")
        } else {
            ExprError::new(expr.span, "a condition cannot be used as a number")
        });
    }
    let child_bool = matches!(expr.kind, ExprKind::Logic { .. } | ExprKind::Not(_));
    for child in expr.children() {
        check_type(child, child_bool)?;
    }
    Ok(())
}

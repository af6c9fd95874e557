//! Hand-written Pratt parser for the formula syntax, producing an [`Ast`] with byte spans.
//!
//! Grammar (loosest first): sums `+ -`, products `* /` (left-associative), unary minus, powers
//! `^` (right-associative, binding tighter than unary minus, so `-x^2` is `-(x^2)`), then
//! numbers, symbols, calls `f(a, b)` and parentheses.

use crate::number::parse_decimal;
use num_rational::BigRational;
use std::fmt;

/// A byte range inside the formula text.
#[derive(Copy, Clone, PartialEq, Eq, Debug, Default)]
pub struct Span {
    /// First byte.
    pub start: usize,
    /// One past the last byte.
    pub end: usize,
}

impl Span {
    fn join(self, other: Span) -> Span {
        Span {
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
}

/// A parsed formula: a tree whose every node knows where it came from.
#[derive(Clone, Debug, PartialEq)]
pub struct Ast {
    /// What the node is.
    pub kind: AstKind,
    /// Where it is in the formula.
    pub span: Span,
}

/// The node kinds of an [`Ast`]; they mirror the DAG's nodes.
#[derive(Clone, Debug, PartialEq)]
pub enum AstKind {
    /// An exact number.
    Num(BigRational),
    /// A name.
    Sym(String),
    /// Unary minus.
    Neg(Box<Ast>),
    /// `a + b - c` as the terms `[a, b, -c]`.
    Add(Vec<Ast>),
    /// `a * b * c`.
    Mul(Vec<Ast>),
    /// `a / b`.
    Div(Box<Ast>, Box<Ast>),
    /// `a ^ b`.
    Pow(Box<Ast>, Box<Ast>),
    /// `name(args)`: any name; the lowering decides whether it is known.
    Call {
        /// The called name.
        name: String,
        /// Where the name is.
        name_span: Span,
        /// The arguments.
        args: Vec<Ast>,
    },
}

/// A parse failure with the byte span it points at.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ParseError {
    /// What went wrong, for a person.
    pub message: String,
    /// Where.
    pub span: Span,
}

impl fmt::Display for ParseError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} (at byte {})", self.message, self.span.start)
    }
}

impl std::error::Error for ParseError {}

/// Parser settings.
#[derive(Clone, Debug)]
pub struct ParseSettings {
    /// Deepest nesting of parentheses, calls, unary minus and powers. Every later pass recurses
    /// over the tree, so this bound is what keeps them off the end of the stack; 256 levels is
    /// far beyond any formula a person writes.
    pub max_depth: usize,
    /// Longest formula in bytes (1 MiB).
    pub max_len: usize,
}

impl Default for ParseSettings {
    fn default() -> Self {
        ParseSettings {
            max_depth: 256,
            max_len: 1 << 20,
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
enum Tok {
    Num(BigRational),
    Ident(String),
    Op(char),
    End,
}

struct Lexer<'a> {
    text: &'a str,
    pos: usize,
}

impl<'a> Lexer<'a> {
    fn next(&mut self) -> Result<(Tok, Span), ParseError> {
        let bytes = self.text.as_bytes();
        while self.pos < bytes.len() && bytes[self.pos].is_ascii_whitespace() {
            self.pos += 1;
        }
        let start = self.pos;
        let Some(c) = self.text[start..].chars().next() else {
            return Ok((Tok::End, Span { start, end: start }));
        };
        if c.is_ascii_digit() || c == '.' {
            let mut end = start;
            while end < bytes.len() && (bytes[end].is_ascii_digit() || bytes[end] == b'.') {
                end += 1;
            }
            if end < bytes.len() && (bytes[end] == b'e' || bytes[end] == b'E') {
                let mut e = end + 1;
                if e < bytes.len() && (bytes[e] == b'+' || bytes[e] == b'-') {
                    e += 1;
                }
                if e < bytes.len() && bytes[e].is_ascii_digit() {
                    while e < bytes.len() && bytes[e].is_ascii_digit() {
                        e += 1;
                    }
                    end = e;
                }
            }
            let span = Span { start, end };
            self.pos = end;
            let lit = &self.text[start..end];
            return match parse_decimal(lit) {
                Some(v) => Ok((Tok::Num(v), span)),
                None => Err(ParseError {
                    message: format!("`{lit}` is not a number (or its exponent is out of range)"),
                    span,
                }),
            };
        }
        if c.is_ascii_alphabetic() || c == '_' {
            let mut end = start;
            while end < bytes.len() && (bytes[end].is_ascii_alphanumeric() || bytes[end] == b'_') {
                end += 1;
            }
            self.pos = end;
            return Ok((
                Tok::Ident(self.text[start..end].to_string()),
                Span { start, end },
            ));
        }
        let end = start + c.len_utf8();
        self.pos = end;
        let span = Span { start, end };
        match c {
            '+' | '-' | '*' | '/' | '^' | '(' | ')' | ',' => Ok((Tok::Op(c), span)),
            _ if !c.is_ascii() => Err(ParseError {
                message: format!(
                    "unexpected character `{c}` (U+{:04X}); names use ASCII letters, digits and `_`",
                    c as u32
                ),
                span,
            }),
            _ => Err(ParseError {
                message: format!("unexpected character `{c}`"),
                span,
            }),
        }
    }
}

struct Parser<'a> {
    lexer: Lexer<'a>,
    tok: Tok,
    span: Span,
    depth: usize,
    settings: &'a ParseSettings,
}

/// Parses a formula with default settings.
pub fn parse(text: &str) -> Result<Ast, ParseError> {
    parse_with(text, &ParseSettings::default())
}

/// Parses a formula.
pub fn parse_with(text: &str, settings: &ParseSettings) -> Result<Ast, ParseError> {
    if text.len() > settings.max_len {
        return Err(ParseError {
            message: format!(
                "formula is {} bytes long; the limit is {} bytes",
                text.len(),
                settings.max_len
            ),
            span: Span { start: 0, end: 0 },
        });
    }
    let mut lexer = Lexer { text, pos: 0 };
    let (tok, span) = lexer.next()?;
    let mut p = Parser {
        lexer,
        tok,
        span,
        depth: 0,
        settings,
    };
    if p.tok == Tok::End {
        return Err(ParseError {
            message: "empty formula".into(),
            span,
        });
    }
    let ast = p.sum()?;
    match &p.tok {
        Tok::End => Ok(ast),
        Tok::Op(')') => Err(p.error("unmatched `)`")),
        _ => Err(p.error(&format!(
            "expected an operator or the end of the formula, found {}",
            describe(&p.tok)
        ))),
    }
}

fn describe(t: &Tok) -> String {
    match t {
        Tok::Num(_) => "a number".into(),
        Tok::Ident(s) => format!("`{s}`"),
        Tok::Op(c) => format!("`{c}`"),
        Tok::End => "the end of the formula".into(),
    }
}

impl<'a> Parser<'a> {
    fn bump(&mut self) -> Result<(), ParseError> {
        let (tok, span) = self.lexer.next()?;
        self.tok = tok;
        self.span = span;
        Ok(())
    }

    fn error(&self, message: &str) -> ParseError {
        ParseError {
            message: message.to_string(),
            span: self.span,
        }
    }

    fn enter(&mut self) -> Result<(), ParseError> {
        self.depth += 1;
        if self.depth > self.settings.max_depth {
            return Err(self.error(&format!(
                "formula nests deeper than {} levels",
                self.settings.max_depth
            )));
        }
        Ok(())
    }

    fn sum(&mut self) -> Result<Ast, ParseError> {
        let first = self.product()?;
        let mut span = first.span;
        let mut terms = vec![first];
        while let Tok::Op(c @ ('+' | '-')) = self.tok {
            let op_span = self.span;
            self.bump()?;
            let t = self.product()?;
            span = span.join(t.span);
            terms.push(if c == '-' { negate_term(t, op_span) } else { t });
        }
        Ok(if terms.len() == 1 {
            terms.pop().expect("one term")
        } else {
            Ast {
                kind: AstKind::Add(terms),
                span,
            }
        })
    }

    fn product(&mut self) -> Result<Ast, ParseError> {
        let first = self.unary()?;
        let mut run = vec![first];
        while let Tok::Op(c @ ('*' | '/')) = self.tok {
            self.bump()?;
            let rhs = self.unary()?;
            if c == '*' {
                run.push(rhs);
            } else {
                let lhs = close_product(std::mem::take(&mut run));
                let span = lhs.span.join(rhs.span);
                run.push(Ast {
                    kind: AstKind::Div(Box::new(lhs), Box::new(rhs)),
                    span,
                });
            }
        }
        Ok(close_product(run))
    }

    fn unary(&mut self) -> Result<Ast, ParseError> {
        if self.tok == Tok::Op('-') || self.tok == Tok::Op('+') {
            let neg = self.tok == Tok::Op('-');
            let start = self.span;
            self.enter()?;
            self.bump()?;
            let inner = self.unary()?;
            self.depth -= 1;
            if !neg {
                return Ok(inner);
            }
            let span = start.join(inner.span);
            return Ok(Ast {
                kind: AstKind::Neg(Box::new(inner)),
                span,
            });
        }
        self.power()
    }

    fn power(&mut self) -> Result<Ast, ParseError> {
        let base = self.primary()?;
        if self.tok == Tok::Op('^') {
            self.enter()?;
            self.bump()?;
            let exp = self.unary()?;
            self.depth -= 1;
            let span = base.span.join(exp.span);
            return Ok(Ast {
                kind: AstKind::Pow(Box::new(base), Box::new(exp)),
                span,
            });
        }
        Ok(base)
    }

    fn primary(&mut self) -> Result<Ast, ParseError> {
        let span = self.span;
        match self.tok.clone() {
            Tok::Num(v) => {
                self.bump()?;
                Ok(Ast {
                    kind: AstKind::Num(v),
                    span,
                })
            }
            Tok::Ident(name) => {
                self.bump()?;
                if self.tok != Tok::Op('(') {
                    return Ok(Ast {
                        kind: AstKind::Sym(name),
                        span,
                    });
                }
                self.enter()?;
                self.bump()?;
                let mut args = Vec::new();
                if self.tok != Tok::Op(')') {
                    loop {
                        args.push(self.sum()?);
                        match self.tok {
                            Tok::Op(',') => self.bump()?,
                            Tok::Op(')') => break,
                            _ => {
                                return Err(self.error(&format!(
                                    "expected `,` or `)` in the call of `{name}`, found {}",
                                    describe(&self.tok)
                                )))
                            }
                        }
                    }
                }
                let end = self.span;
                self.bump()?;
                self.depth -= 1;
                Ok(Ast {
                    kind: AstKind::Call {
                        name,
                        name_span: span,
                        args,
                    },
                    span: span.join(end),
                })
            }
            Tok::Op('(') => {
                self.enter()?;
                self.bump()?;
                let inner = self.sum()?;
                if self.tok != Tok::Op(')') {
                    return Err(self.error(&format!(
                        "expected `)` to close the `(` at byte {}, found {}",
                        span.start,
                        describe(&self.tok)
                    )));
                }
                self.bump()?;
                self.depth -= 1;
                Ok(inner)
            }
            Tok::End => Err(self.error("the formula ends where a value was expected")),
            other => Err(self.error(&format!(
                "expected a number, a name or `(`, found {}",
                describe(&other)
            ))),
        }
    }
}

/// `a - b*c` is stored as `a + (-b)*c`: subtracting a product negates its first factor, which
/// is also how canonical forms write negative terms, so they print as `a - b*c`.
fn negate_term(t: Ast, op_span: Span) -> Ast {
    let span = op_span.join(t.span);
    match t.kind {
        AstKind::Mul(mut xs) => {
            let first = xs.remove(0);
            let fspan = op_span.join(first.span);
            xs.insert(
                0,
                Ast {
                    kind: AstKind::Neg(Box::new(first)),
                    span: fspan,
                },
            );
            Ast {
                kind: AstKind::Mul(xs),
                span,
            }
        }
        kind => Ast {
            kind: AstKind::Neg(Box::new(Ast { kind, span: t.span })),
            span,
        },
    }
}

fn close_product(mut run: Vec<Ast>) -> Ast {
    if run.len() == 1 {
        return run.pop().expect("one factor");
    }
    let span = run
        .iter()
        .map(|a| a.span)
        .reduce(Span::join)
        .expect("non-empty");
    Ast {
        kind: AstKind::Mul(run),
        span,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(text: &str) -> ParseError {
        parse(text).expect_err(text)
    }

    #[test]
    fn errors_point_at_the_offending_column() {
        assert_eq!(err("a + * b").span.start, 4);
        assert_eq!(err("sin(x").span.start, 5);
        assert_eq!(err("x)").span.start, 1);
        assert_eq!(err("2 $ 3").span.start, 2);
        assert!(err("").message.contains("empty"));
        assert!(err("f(a b)").message.contains("expected `,` or `)`"));
        assert!(err("é").message.contains("U+00E9"));
    }

    #[test]
    fn deep_nesting_is_an_error_not_a_crash() {
        let deep = format!("{}x{}", "(".repeat(100_000), ")".repeat(100_000));
        assert!(err(&deep).message.contains("deeper than"));
        let minus = format!("{}x", "-".repeat(100_000));
        assert!(err(&minus).message.contains("deeper than"));
        let pow = vec!["x"; 100_000].join("^");
        assert!(err(&pow).message.contains("deeper than"));
    }

    #[test]
    fn precedence_and_associativity() {
        let a = parse("-x^2").unwrap();
        assert!(matches!(a.kind, AstKind::Neg(_)));
        let b = parse("a^b^c").unwrap();
        let AstKind::Pow(_, e) = b.kind else {
            panic!("pow")
        };
        assert!(matches!(e.kind, AstKind::Pow(..)));
        let c = parse("a/b/c").unwrap();
        let AstKind::Div(l, _) = c.kind else {
            panic!("div")
        };
        assert!(matches!(l.kind, AstKind::Div(..)));
    }
}

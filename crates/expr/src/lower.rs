//! Lowering a parsed [`Ast`] into the [`Dag`], with a caller-supplied resolver for names.

use crate::dag::{Dag, ExprId, Func};
use crate::parse::{Ast, AstKind, Span};

/// A problem found while lowering, with the span it points at.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LowerError {
    /// Stable class of the problem (`unknown-function`, `arity`, `syntax`, or a class the
    /// resolver chose), so callers report it without reading the message.
    pub class: &'static str,
    /// What is wrong.
    pub message: String,
    /// Where, in the formula.
    pub span: Span,
    /// How to fix it, if there is an obvious way.
    pub hint: Option<String>,
}

/// Decides what names mean while lowering.
pub trait Resolver {
    /// The expression a symbol stands for.
    fn symbol(&mut self, dag: &mut Dag, name: &str, span: Span) -> Result<ExprId, LowerError>;

    /// A call of a name that is not a built-in function (`None`: unknown). The arguments are
    /// already lowered.
    fn call(
        &mut self,
        _dag: &mut Dag,
        _name: &str,
        _args: &[ExprId],
        _span: Span,
    ) -> Option<Result<ExprId, LowerError>> {
        None
    }

    /// Names of the extra functions `call` accepts, for suggestions.
    fn extra_functions(&self) -> &[&str] {
        &[]
    }
}

/// Resolves every name as a plain symbol of the same name.
pub struct PlainSymbols;

impl Resolver for PlainSymbols {
    fn symbol(&mut self, dag: &mut Dag, name: &str, _span: Span) -> Result<ExprId, LowerError> {
        Ok(dag.sym(name))
    }
}

/// Lowers `ast`, collecting every error. Returns `None` when any error was found.
pub fn lower(
    dag: &mut Dag,
    ast: &Ast,
    resolver: &mut dyn Resolver,
    errors: &mut Vec<LowerError>,
) -> Option<ExprId> {
    let before = errors.len();
    let id = lower_rec(dag, ast, resolver, errors);
    (errors.len() == before).then_some(id)
}

fn lower_rec(
    dag: &mut Dag,
    ast: &Ast,
    resolver: &mut dyn Resolver,
    errors: &mut Vec<LowerError>,
) -> ExprId {
    match &ast.kind {
        AstKind::Num(v) => dag.num(v.clone()),
        AstKind::Sym(name) => match resolver.symbol(dag, name, ast.span) {
            Ok(id) => id,
            Err(e) => {
                errors.push(e);
                dag.sym(name)
            }
        },
        AstKind::Neg(a) => {
            let a = lower_rec(dag, a, resolver, errors);
            dag.neg(a)
        }
        AstKind::Add(xs) => {
            let xs = xs
                .iter()
                .map(|x| lower_rec(dag, x, resolver, errors))
                .collect();
            dag.add(xs)
        }
        AstKind::Mul(xs) => {
            let xs = xs
                .iter()
                .map(|x| lower_rec(dag, x, resolver, errors))
                .collect();
            dag.mul(xs)
        }
        AstKind::Div(a, b) => {
            let a = lower_rec(dag, a, resolver, errors);
            let b = lower_rec(dag, b, resolver, errors);
            dag.div(a, b)
        }
        AstKind::Pow(a, b) => {
            let a = lower_rec(dag, a, resolver, errors);
            let b = lower_rec(dag, b, resolver, errors);
            dag.pow(a, b)
        }
        AstKind::Call {
            name,
            name_span,
            args,
        } => {
            let lowered: Vec<ExprId> = args
                .iter()
                .map(|x| lower_rec(dag, x, resolver, errors))
                .collect();
            if let Some(f) = Func::from_name(name) {
                if lowered.len() != f.arity() {
                    errors.push(LowerError {
                        class: "arity",
                        message: format!(
                            "`{name}` takes {} argument{}, found {}",
                            f.arity(),
                            if f.arity() == 1 { "" } else { "s" },
                            lowered.len()
                        ),
                        span: ast.span,
                        hint: None,
                    });
                    return dag.sym(name);
                }
                return dag.call(f, lowered);
            }
            match resolver.call(dag, name, &lowered, ast.span) {
                Some(Ok(id)) => id,
                Some(Err(e)) => {
                    errors.push(e);
                    dag.sym(name)
                }
                None => {
                    let mut known: Vec<&str> = Func::ALL.iter().map(|f| f.name()).collect();
                    known.extend(resolver.extra_functions());
                    errors.push(LowerError {
                        class: "unknown-function",
                        message: format!("unknown function `{name}`"),
                        span: *name_span,
                        hint: Some(match crate::nearest(name, known.iter().copied()) {
                            Some(s) => format!("did you mean `{s}`?"),
                            None => format!("known functions: {}", known.join(", ")),
                        }),
                    });
                    dag.sym(name)
                }
            }
        }
    }
}

/// Parses and lowers a formula with every name a plain symbol. Handy in tests and tools.
pub fn parse_expr(dag: &mut Dag, text: &str) -> Result<ExprId, LowerError> {
    let ast = crate::parse::parse(text).map_err(|e| LowerError {
        class: "syntax",
        message: e.message,
        span: e.span,
        hint: None,
    })?;
    let mut errors = Vec::new();
    lower(dag, &ast, &mut PlainSymbols, &mut errors).ok_or_else(|| errors.remove(0))
}

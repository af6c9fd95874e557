//! The validated spec: symbols with kinds, units and ranges, and the lowered formulas.

use crate::units::Dim;
use lawsmith_expr::{Dag, Decimal, ExprId};

/// What a symbol is.
#[derive(Copy, Clone, PartialEq, Eq, Debug)]
pub enum SymbolKind {
    /// Fixed at generation time.
    Parameter,
    /// Set at run time within a declared range.
    Gain,
    /// A proof coordinate tracking a reference (or an equilibrium).
    State,
    /// A reference from the guidance filter.
    Reference,
    /// The time derivative of a reference.
    Rate,
    /// Measured or estimated each cycle.
    Signal,
    /// What the plant takes; computed by a law.
    Input,
    /// A guidance command.
    Command,
    /// The plant's true value of an estimated signal or input, within a declared error of the
    /// estimate. Only the dynamics may use it.
    Uncertain,
    /// A constant the controller does not know (a named estimate error, or a constant
    /// unknown): the dynamics and the candidate may use it, the controller may not.
    Unknown,
    /// A controller state: a value the law carries from one period to the next (an
    /// integrator, an adaptive estimate), advanced by its update law.
    Memory,
}

impl SymbolKind {
    /// Lower-case name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            SymbolKind::Parameter => "parameter",
            SymbolKind::Gain => "gain",
            SymbolKind::State => "state",
            SymbolKind::Reference => "reference",
            SymbolKind::Rate => "rate",
            SymbolKind::Signal => "signal",
            SymbolKind::Input => "input",
            SymbolKind::Command => "command",
            SymbolKind::Uncertain => "true value",
            SymbolKind::Unknown => "unknown constant",
            SymbolKind::Memory => "controller state",
        }
    }
}

/// A declared interval `[lo, hi]` (lo ≤ hi), each end the decimal the spec wrote.
#[derive(Clone, Debug, PartialEq)]
pub struct Range {
    /// Lower end.
    pub lo: Decimal,
    /// Upper end.
    pub hi: Decimal,
}

impl Range {
    /// The range of two decimals.
    pub fn new(lo: Decimal, hi: Decimal) -> Range {
        Range { lo, hi }
    }

    /// A range of two numbers that arrived as f64, each read as its shortest decimal.
    pub fn from_f64(lo: f64, hi: f64) -> Range {
        Range::new(Decimal::from_f64(lo), Decimal::from_f64(hi))
    }

    /// The nearest f64 of each end: what generated code and simulation hold.
    pub fn nearest(&self) -> (f64, f64) {
        (self.lo.value(), self.hi.value())
    }

    /// The smallest f64 interval that holds the range: what a proof must cover.
    pub fn outward(&self) -> (f64, f64) {
        (self.lo.down(), self.hi.up())
    }

    /// The largest f64 interval inside the range: where a counterexample may lie.
    pub fn inward(&self) -> (f64, f64) {
        (self.lo.up(), self.hi.down())
    }

    /// True when both ends are the same number.
    pub fn is_point(&self) -> bool {
        self.lo.exact() == self.hi.exact()
    }
}

/// What a state is regulated to.
#[derive(Clone, Debug, PartialEq)]
pub enum Target {
    /// A reference from the guidance filter (its name).
    Reference(String),
    /// A fixed equilibrium value.
    Equilibrium(Decimal),
}

/// What a controller state settles at: the origin of its proof coordinate.
#[derive(Clone, Debug, PartialEq)]
pub enum Settle {
    /// A fixed value (an integrator whose steady value is known).
    Value(Decimal),
    /// A constant unknown it estimates (its name).
    Unknown(String),
}

/// What a symbol is, with the data its kind declares.
#[derive(Clone, Debug, PartialEq)]
pub enum Decl {
    /// Fixed at generation time.
    Parameter {
        /// Its value.
        value: Decimal,
    },
    /// Set at run time within a range.
    Gain {
        /// The range the proof covers.
        range: Range,
        /// The value the generated code falls back to (None when the spec gives none).
        default: Option<f64>,
    },
    /// A proof coordinate through its error around a target.
    State {
        /// What it tracks.
        target: Target,
        /// The error box of `state − target`.
        error: Range,
    },
    /// A reference from the guidance filter.
    Reference {
        /// Its range.
        range: Range,
        /// The name of its rate.
        rate: String,
    },
    /// The time derivative of a reference (or of a reference's rate).
    Rate {
        /// Its range.
        range: Range,
        /// The reference (or rate) it is the rate of.
        reference: String,
        /// The name of its own rate, when the spec declares one (`accel`).
        rate: Option<String>,
    },
    /// Measured or estimated each cycle.
    Signal {
        /// Its range.
        range: Range,
    },
    /// What the plant takes; computed by a law.
    Input,
    /// A guidance command, an actuator command or a definition's name.
    Command,
    /// The plant's true value of an estimated signal or input.
    Uncertain {
        /// The signal or input the law sees instead.
        estimate: String,
        /// How the two differ.
        form: ErrorForm,
        /// The range of the error, relative or absolute.
        error: Range,
        /// The name of the error (its proof coordinate): declared with `error:`, or
        /// [`uncertainty_name`] of the quantity.
        delta: String,
    },
    /// A constant the controller does not know.
    Unknown {
        /// Its range.
        range: Range,
        /// The uncertain quantity whose error it names, if it is one.
        of: Option<String>,
    },
    /// A controller state.
    Memory {
        /// Its value when the controller starts (or is reset).
        initial: Decimal,
        /// The limits the generated code keeps it in (projection, anti-windup).
        limits: Range,
        /// What it settles at: its proof coordinate is the state minus this.
        settle: Settle,
    },
}

impl Decl {
    /// The kind alone.
    pub fn kind(&self) -> SymbolKind {
        match self {
            Decl::Parameter { .. } => SymbolKind::Parameter,
            Decl::Gain { .. } => SymbolKind::Gain,
            Decl::State { .. } => SymbolKind::State,
            Decl::Reference { .. } => SymbolKind::Reference,
            Decl::Rate { .. } => SymbolKind::Rate,
            Decl::Signal { .. } => SymbolKind::Signal,
            Decl::Input => SymbolKind::Input,
            Decl::Command => SymbolKind::Command,
            Decl::Uncertain { .. } => SymbolKind::Uncertain,
            Decl::Unknown { .. } => SymbolKind::Unknown,
            Decl::Memory { .. } => SymbolKind::Memory,
        }
    }
}

/// A declared symbol.
#[derive(Clone, Debug)]
pub struct Symbol {
    /// Name.
    pub name: String,
    /// The unit as written.
    pub unit: String,
    /// The dimension of the unit.
    pub dim: Dim,
    /// What it is, with the data of its kind.
    pub decl: Decl,
}

impl Symbol {
    /// Its kind.
    pub fn kind(&self) -> SymbolKind {
        self.decl.kind()
    }

    /// The declared range of a gain, reference, rate or signal, or the error range of an
    /// uncertain quantity (a state's error box is [`Symbol::error`]).
    pub fn range(&self) -> Option<&Range> {
        match &self.decl {
            Decl::Gain { range, .. }
            | Decl::Reference { range, .. }
            | Decl::Rate { range, .. }
            | Decl::Signal { range } => Some(range),
            Decl::Uncertain { error, .. } => Some(error),
            Decl::Unknown { range, .. } => Some(range),
            _ => None,
        }
    }

    /// A state's error box.
    pub fn error(&self) -> Option<&Range> {
        match &self.decl {
            Decl::State { error, .. } => Some(error),
            _ => None,
        }
    }

    /// A state's reference, when it tracks one.
    pub fn reference(&self) -> Option<&str> {
        match &self.decl {
            Decl::State {
                target: Target::Reference(r),
                ..
            } => Some(r),
            _ => None,
        }
    }
}

/// How an uncertain quantity differs from its estimate.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum ErrorForm {
    /// `true = estimate · (1 + δ)`.
    Relative,
    /// `true = estimate + δ`.
    Absolute,
}

/// The name of the error coordinate `δ` of an uncertain quantity. The `δ` cannot occur in a
/// spec (identifiers are ASCII), so the name never collides with a declared one.
pub fn uncertainty_name(quantity: &str) -> String {
    format!("δ{quantity}")
}

/// What the Lyapunov argument claims.
#[derive(Clone, Debug, PartialEq)]
pub enum Claim {
    /// V̇ < 0 whenever the error is non-zero.
    NegativeDefinite,
    /// V̇ ≤ 0.
    NegativeSemidefinite,
    /// V̇ ≤ −2·rate·V.
    Exponential(f64),
    /// V̇ < 0 wherever the error of one of these states (or controller states) is not zero,
    /// whatever the other coordinates: V̇ ≤ −W(e) with W positive definite in those errors,
    /// the claim of an adaptive or integral law.
    NegativeDefiniteIn(Vec<String>),
    /// The smallest level `c` with V̇ < 0 wherever V ≥ c in the domain (every trajectory
    /// enters {V ≤ c} and stays), and the bound it implies on each error.
    UltimateBound {
        /// Required bounds, state → largest allowed |error|, in state order (empty for
        /// `auto`): the proved bounds must not exceed them.
        required: Vec<(String, f64)>,
    },
}

impl Claim {
    /// The claim as written in a spec.
    pub fn name(&self) -> String {
        match self {
            Claim::NegativeDefinite => "negative_definite".into(),
            Claim::NegativeSemidefinite => "negative_semidefinite".into(),
            Claim::Exponential(r) => format!("exponential({r})"),
            Claim::UltimateBound { .. } => "ultimate_bound".into(),
            Claim::NegativeDefiniteIn(names) => {
                format!("negative_definite_in({})", names.join(", "))
            }
        }
    }
}

/// A comparison between gain expressions, e.g. `k_tot < k_bal`.
#[derive(Clone, Debug)]
pub struct Constraint {
    /// The text as written.
    pub text: String,
    /// Left side.
    pub lhs: ExprId,
    /// `<`, `<=`, `>` or `>=`.
    pub op: String,
    /// Right side.
    pub rhs: ExprId,
}

/// An actuator mapping.
#[derive(Clone, Debug)]
pub struct Actuator {
    /// Name of the command sent to the firmware.
    pub name: String,
    /// Its law, in terms of inputs and base symbols.
    pub law: ExprId,
    /// Unit.
    pub unit: String,
    /// Position limits, exact as declared (in the actuator's unit; `deg` limits converted to
    /// rad with π to 50 decimals).
    pub limits: Range,
    /// The command the generated code sends when the law's value is not finite (declared
    /// `safe`, in the same unit as the limits; zero clamped into the limits when absent).
    pub safe: Option<f64>,
}

/// A first-order guidance filter for one reference.
#[derive(Clone, Debug)]
pub struct Guidance {
    /// The reference it produces.
    pub reference: String,
    /// The command it follows.
    pub command: String,
    /// The gain symbol (1/s).
    pub gain: String,
    /// Limits on the reference rate.
    pub rate_limit: (f64, f64),
}

/// A loaded, validated spec. Formulas are lowered into `dag` with definitions (energies and
/// `where` names), `ref(…)` and `ddt(…)` already expanded; inputs still appear as symbols in
/// `dynamics` and in later laws.
#[derive(Debug)]
pub struct Spec {
    /// The spec's name.
    pub name: String,
    /// One-line summary.
    pub summary: Option<String>,
    /// Modelling assumptions, as written.
    pub assumptions: Vec<String>,
    /// Every declared symbol, in declaration order by section.
    pub symbols: Vec<Symbol>,
    /// The expression arena.
    pub dag: Dag,
    /// Plant model: state → ẋ (inputs as symbols).
    pub dynamics: Vec<(String, ExprId)>,
    /// Energies, in order (for reports).
    pub energies: Vec<(String, ExprId)>,
    /// The `where` definitions of the Lyapunov candidate, expanded.
    pub where_defs: Vec<(String, ExprId)>,
    /// The Lyapunov candidate V, expanded to base symbols.
    pub candidate: ExprId,
    /// Where the candidate's formula is in the spec file (bytes), for errors of `derive`.
    pub candidate_span: std::ops::Range<usize>,
    /// What is claimed of V̇.
    pub claim: Claim,
    /// Laws in evaluation order: input → expression (earlier inputs as symbols).
    pub laws: Vec<(String, ExprId)>,
    /// Each controller state's update law (its time derivative), in declaration order;
    /// inputs as symbols.
    pub updates: Vec<(String, ExprId)>,
    /// Gain constraints.
    pub constraints: Vec<Constraint>,
    /// Actuator mappings.
    pub actuators: Vec<Actuator>,
    /// Guidance filters.
    pub guidance: Vec<Guidance>,
}

impl Spec {
    /// The symbol with this name.
    pub fn symbol(&self, name: &str) -> Option<&Symbol> {
        self.symbols.iter().find(|s| s.name == name)
    }

    /// The symbols of one kind, in declaration order.
    pub fn symbols_of(&self, kind: SymbolKind) -> impl Iterator<Item = &Symbol> {
        self.symbols.iter().filter(move |s| s.kind() == kind)
    }

    /// The box of a controller state's proof coordinate (the state minus what it settles
    /// at): its limits less the range of what it settles at, exactly.
    pub fn memory_error(&self, s: &Symbol) -> Option<Range> {
        let Decl::Memory { limits, settle, .. } = &s.decl else {
            return None;
        };
        let (lo, hi) = match settle {
            Settle::Value(v) => (v.exact().clone(), v.exact().clone()),
            Settle::Unknown(u) => {
                let r = self.symbol(u)?.range()?;
                (r.lo.exact().clone(), r.hi.exact().clone())
            }
        };
        Some(Range::new(
            Decimal::from_exact(&(limits.lo.exact() - hi))?,
            Decimal::from_exact(&(limits.hi.exact() - lo))?,
        ))
    }

    /// The values a state takes over the envelope, in f64: its reference's range widened by
    /// its error box, or the error box around its equilibrium (for reports).
    pub fn state_span(&self, s: &Symbol) -> Option<(f64, f64)> {
        let Decl::State { target, error } = &s.decl else {
            return None;
        };
        let (el, eh) = error.nearest();
        match target {
            Target::Reference(r) => {
                let (lo, hi) = self.symbol(r)?.range()?.nearest();
                Some((lo + el, hi + eh))
            }
            Target::Equilibrium(eq) => Some((eq.value() + el, eq.value() + eh)),
        }
    }
}

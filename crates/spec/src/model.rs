//! The validated spec: symbols with kinds, units and ranges, and the lowered formulas.

use crate::units::Dim;
use lawsmith_expr::{Dag, ExprId};

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
        }
    }
}

/// A declared symbol.
#[derive(Clone, Debug)]
pub struct Symbol {
    /// Name.
    pub name: String,
    /// Kind.
    pub kind: SymbolKind,
    /// The unit as written.
    pub unit: String,
    /// The dimension of the unit.
    pub dim: Dim,
    /// Declared range: gains, references, rates, signals; for a state, its reference's range
    /// widened by the error box (or the error box around the equilibrium).
    pub range: Option<(f64, f64)>,
    /// Parameter value.
    pub value: Option<f64>,
    /// Gain default.
    pub default: Option<f64>,
    /// State: the reference it tracks.
    pub reference: Option<String>,
    /// State: the equilibrium, when it tracks no reference.
    pub equilibrium: Option<f64>,
    /// State: the error box of `state − reference` (or `state − equilibrium`).
    pub error: Option<(f64, f64)>,
    /// Reference: the name of its rate.
    pub rate: Option<String>,
    /// Uncertain quantity: the estimate it differs from, and how (its `range` is the range
    /// of the error, relative or absolute).
    pub estimate: Option<(String, ErrorForm)>,
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
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Claim {
    /// V̇ < 0 whenever the error is non-zero.
    NegativeDefinite,
    /// V̇ ≤ 0.
    NegativeSemidefinite,
    /// V̇ ≤ −2·rate·V.
    Exponential(f64),
    /// The smallest level `c` with V̇ < 0 wherever V ≥ c in the domain (every trajectory
    /// enters {V ≤ c} and stays), and the bound it implies on each error; with
    /// [`Spec::required_bounds`], those bounds must not exceed the required ones.
    UltimateBound,
}

impl Claim {
    /// The claim as written in a spec.
    pub fn name(&self) -> String {
        match self {
            Claim::NegativeDefinite => "negative_definite".into(),
            Claim::NegativeSemidefinite => "negative_semidefinite".into(),
            Claim::Exponential(r) => format!("exponential({r})"),
            Claim::UltimateBound => "ultimate_bound".into(),
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
    /// Position limits.
    pub limits: (f64, f64),
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
    /// For an ultimate-bound claim with required bounds: state → largest allowed |error|, in
    /// state order (empty for `auto`).
    pub required_bounds: Vec<(String, f64)>,
    /// Laws in evaluation order: input → expression (earlier inputs as symbols).
    pub laws: Vec<(String, ExprId)>,
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
        self.symbols.iter().filter(move |s| s.kind == kind)
    }
}

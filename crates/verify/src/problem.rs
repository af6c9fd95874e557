//! The proof problem: the declared envelope as a box in *proof coordinates*, and the spec's
//! expressions rewritten in them.
//!
//! A state's value is not a coordinate of its own: the envelope bounds its *error* around its
//! reference, so the state `h` tracking `h_r` becomes `h_r + Δh` with `Δh` in the error box.
//! The box is then a plain product of intervals (errors, references, rates, signals, estimate
//! errors, gains), which is what branch and bound splits. An uncertain quantity (the plant's
//! true drag, say) is its estimate times `1 + δ` (or plus `δ`), and `δ` is a coordinate.
//! Parameters are replaced by the exact decimals the spec wrote, so they cost no dimension.
//! Each coordinate's box is its declared range rounded outward to f64, so it holds every
//! point the spec declares; a counterexample is reported only inside the declared range.

use crate::interval::Interval;
use lawsmith_expr::{AssumeAll, Condition, Dag, Decimal, ExprId, Simplifier};
use lawsmith_spec::{Decl, Derivation, ErrorForm, Range, Settle, Spec, Symbol, SymbolKind, Target};
use std::collections::HashMap;

/// What a proof coordinate stands for.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Role {
    /// The error `state − reference` (or `state − equilibrium`) of a state.
    Error,
    /// The error of a controller state from what it settles at (an estimate minus the
    /// unknown it estimates, an integrator minus its equilibrium).
    MemoryError,
    /// A reference from the guidance filter.
    Reference,
    /// The rate of a reference.
    Rate,
    /// A measured or estimated signal.
    Signal,
    /// The error of an estimate: the plant's true value differs from what the law sees.
    Uncertainty,
    /// A run-time gain.
    Gain,
}

impl Role {
    /// Lower-case name for reports.
    pub fn name(self) -> &'static str {
        match self {
            Role::Error => "error",
            Role::MemoryError => "controller-state error",
            Role::Reference => "reference",
            Role::Rate => "rate",
            Role::Signal => "signal",
            Role::Uncertainty => "uncertainty",
            Role::Gain => "gain",
        }
    }
}

/// One coordinate of the proof domain.
#[derive(Clone, Debug)]
pub struct Variable {
    /// Name in proof expressions: `Δh` for the error of state `h`, else the symbol's name.
    /// The `Δ` cannot occur in a spec (identifiers are ASCII), so names never collide.
    pub name: String,
    /// The spec symbol it belongs to (the state, for an error).
    pub symbol: String,
    /// What it stands for.
    pub role: Role,
    /// Unit as written in the spec.
    pub unit: String,
    /// The range the spec declared (its ends as the decimals written).
    pub declared: Range,
    /// Lower end of the proof box: the largest f64 at or below the declared lower end.
    pub lo: f64,
    /// Upper end of the proof box: the smallest f64 at or above the declared upper end.
    pub hi: f64,
}

impl Variable {
    fn new(name: String, symbol: &str, role: Role, unit: String, declared: &Range) -> Variable {
        // rounded outward, so the box a proof covers always holds what the spec says (0.05
        // as an f64 is above 1/20: its nearest double would leave the corner 1/20 out)
        let (lo, hi) = declared.outward();
        Variable {
            name,
            symbol: symbol.to_string(),
            role,
            unit,
            declared: declared.clone(),
            lo,
            hi,
        }
    }

    /// The f64 points inside the declared range, `[lo, hi]` rounded inward: where a
    /// counterexample must lie to be one (None when no f64 is inside, e.g. `[0.1, 0.1]`).
    pub fn inner(&self) -> Option<(f64, f64)> {
        let (lo, hi) = self.declared.inward();
        (lo <= hi).then_some((lo, hi))
    }
}

/// A gain constraint in proof coordinates: `g < 0` (strict) or `g ≤ 0`.
#[derive(Clone, Debug)]
pub struct ProofConstraint {
    /// The constraint as written.
    pub text: String,
    /// `lhs − rhs` for `<`/`<=`, `rhs − lhs` for `>`/`>=`.
    pub g: ExprId,
    /// True for `<` and `>`.
    pub strict: bool,
}

/// The envelope and the expressions of one spec in proof coordinates.
#[derive(Clone, Debug)]
pub struct Problem {
    /// The expression arena (a copy of the spec's, grown by the rewriting).
    pub dag: Dag,
    /// The coordinates: errors, references, rates, signals, estimate errors, gains, in that
    /// order.
    pub variables: Vec<Variable>,
    /// Gain constraints, then each controller state's limits (`lo − x ≤ 0`, `x − hi ≤ 0`).
    pub constraints: Vec<ProofConstraint>,
    /// Parameters and their values, as written.
    pub parameters: Vec<(String, Decimal)>,
    /// States and what each tracks.
    states: Vec<(String, Target)>,
    /// Controller states and what each settles at.
    memory: Vec<(String, Settle)>,
    /// Uncertain quantities: the quantity, the name of its error, the estimate, the form, and
    /// the error when its range is a point (for reporting true values).
    uncertain: Vec<(String, String, String, ErrorForm, Option<Decimal>)>,
    to_proof: HashMap<String, ExprId>,
}

/// The name of the error coordinate of a state.
pub fn error_name(state: &str) -> String {
    format!("Δ{state}")
}

impl Problem {
    /// Builds the proof domain of a loaded spec. The spec's own arena is copied, so ids of
    /// `spec` and of a [`Derivation`] of it stay valid in [`Problem::dag`].
    pub fn new(spec: &Spec) -> Problem {
        let mut dag = spec.dag.clone();
        let mut variables = Vec::new();
        let mut to_proof = HashMap::new();
        let mut parameters = Vec::new();
        let mut states = Vec::new();
        for s in &spec.symbols {
            let Decl::State { target, error } = &s.decl else {
                continue;
            };
            let name = error_name(&s.name);
            variables.push(Variable::new(
                name.clone(),
                &s.name,
                Role::Error,
                s.unit.clone(),
                error,
            ));
            let delta = dag.sym(&name);
            let base = match target {
                Target::Reference(r) => dag.sym(r),
                Target::Equilibrium(eq) => dag.num(eq.exact().clone()),
            };
            let value = dag.add(vec![base, delta]);
            to_proof.insert(s.name.clone(), value);
            states.push((s.name.clone(), target.clone()));
        }
        // a controller state is what it settles at plus its error, whose box is its limits
        // less the range of what it settles at
        let mut memory = Vec::new();
        for s in spec.symbols_of(SymbolKind::Memory) {
            let (Decl::Memory { settle, .. }, Some(error)) = (&s.decl, spec.memory_error(s)) else {
                continue;
            };
            let name = error_name(&s.name);
            variables.push(Variable::new(
                name.clone(),
                &s.name,
                Role::MemoryError,
                s.unit.clone(),
                &error,
            ));
            let delta = dag.sym(&name);
            let base = match settle {
                Settle::Value(v) => dag.num(v.exact().clone()),
                Settle::Unknown(u) => dag.sym(u),
            };
            let value = dag.add(vec![base, delta]);
            to_proof.insert(s.name.clone(), value);
            memory.push((s.name.clone(), settle.clone()));
        }
        let mut uncertain = Vec::new();
        // the errors of uncertain quantities and the constant unknowns, in declaration order
        let unknown = |s: &Symbol| {
            matches!(
                s.decl,
                Decl::Uncertain { .. } | Decl::Unknown { of: None, .. }
            )
        };
        type Pick<'a> = &'a dyn Fn(&Symbol) -> bool;
        let kinds: [(Pick, Role); 5] = [
            (&|s| s.kind() == SymbolKind::Reference, Role::Reference),
            (&|s| s.kind() == SymbolKind::Rate, Role::Rate),
            (&|s| s.kind() == SymbolKind::Signal, Role::Signal),
            (&unknown, Role::Uncertainty),
            (&|s| s.kind() == SymbolKind::Gain, Role::Gain),
        ];
        for (pick, role) in kinds {
            for s in spec.symbols.iter().filter(|s| pick(s)) {
                let Some(range) = s.range() else {
                    continue;
                };
                let (name, unit) = match &s.decl {
                    Decl::Unknown { .. } => {
                        if range.is_point() {
                            // a known value is a constant, not a coordinate
                            let c = dag.num(range.lo.exact().clone());
                            to_proof.insert(s.name.clone(), c);
                            continue;
                        }
                        (s.name.clone(), s.unit.clone())
                    }
                    Decl::Uncertain {
                        estimate,
                        form,
                        delta,
                        ..
                    } => {
                        let known = range.is_point().then(|| range.lo.clone());
                        uncertain.push((
                            s.name.clone(),
                            delta.clone(),
                            estimate.clone(),
                            *form,
                            known.clone(),
                        ));
                        let name = delta.clone();
                        if let Some(k) = known {
                            // a known error is a constant, not a coordinate: with zero error
                            // the problem is exactly the one without the uncertainty
                            let c = dag.num(k.exact().clone());
                            to_proof.insert(name, c);
                            continue;
                        }
                        let unit = match form {
                            ErrorForm::Relative => "1".to_string(),
                            ErrorForm::Absolute => s.unit.clone(),
                        };
                        (name, unit)
                    }
                    _ => (s.name.clone(), s.unit.clone()),
                };
                variables.push(Variable::new(name, &s.name, role, unit, range));
            }
        }
        for s in &spec.symbols {
            if let Decl::Parameter { value } = &s.decl {
                parameters.push((s.name.clone(), value.clone()));
                let c = dag.num(value.exact().clone());
                to_proof.insert(s.name.clone(), c);
            }
        }
        let mut problem = Problem {
            dag,
            variables,
            constraints: Vec::new(),
            parameters,
            states,
            memory,
            uncertain,
            to_proof,
        };
        for c in &spec.constraints {
            let (a, b) = match c.op.as_str() {
                "<" | "<=" => (c.lhs, c.rhs),
                _ => (c.rhs, c.lhs),
            };
            let diff = problem.dag.sub(a, b);
            let (g, _) = problem.express(diff);
            problem.constraints.push(ProofConstraint {
                text: c.text.clone(),
                g,
                strict: c.op == "<" || c.op == ">",
            });
        }
        // a controller state never leaves its limits (the generated code keeps it in them):
        // points beyond them are no counterexample, and a box wholly beyond is excluded
        for s in spec.symbols_of(SymbolKind::Memory) {
            let Decl::Memory { limits, .. } = &s.decl else {
                continue;
            };
            let x = problem.dag.sym(&s.name);
            let lo = problem.dag.num(limits.lo.exact().clone());
            let hi = problem.dag.num(limits.hi.exact().clone());
            for (a, b, text) in [
                (lo, x, format!("{} >= {}", s.name, limits.lo.value())),
                (x, hi, format!("{} <= {}", s.name, limits.hi.value())),
            ] {
                let diff = problem.dag.sub(a, b);
                let (g, _) = problem.express(diff);
                problem.constraints.push(ProofConstraint {
                    text,
                    g,
                    strict: false,
                });
            }
        }
        problem
    }

    /// Rewrites an expression over base symbols into proof coordinates and simplifies it.
    /// Returns the side conditions the simplifier assumed (they must be proved too).
    pub fn express(&mut self, e: ExprId) -> (ExprId, Vec<(&'static str, Condition)>) {
        let sub = self.dag.substitute(e, &self.to_proof);
        let mut oracle = AssumeAll::default();
        let out = Simplifier::new(&mut self.dag, &mut oracle).simplify(&mut self.dag, sub);
        (out, oracle.assumed)
    }

    /// Rewrites an expression over base symbols into proof coordinates and simplifies it with
    /// no side condition granted: the result equals the expression wherever it is defined.
    pub fn express_plain(&mut self, e: ExprId) -> ExprId {
        let sub = self.dag.substitute(e, &self.to_proof);
        let mut none = lawsmith_expr::AssumeNothing;
        Simplifier::new(&mut self.dag, &mut none).simplify(&mut self.dag, sub)
    }

    /// Simplifies an expression already in proof coordinates, recording side conditions.
    pub fn simplify(&mut self, e: ExprId) -> (ExprId, Vec<(&'static str, Condition)>) {
        let mut oracle = AssumeAll::default();
        let out = Simplifier::new(&mut self.dag, &mut oracle).simplify(&mut self.dag, e);
        (out, oracle.assumed)
    }

    /// Index of the coordinate with this proof name.
    pub fn index_of(&self, name: &str) -> Option<usize> {
        self.variables.iter().position(|v| v.name == name)
    }

    /// Indices of the coordinates an expression depends on, in coordinate order. Symbols that
    /// are not coordinates (a guidance command, say) are returned by name as the error.
    pub fn coordinates_of(&self, e: ExprId) -> Result<Vec<usize>, String> {
        let mut out = Vec::new();
        for s in self.dag.symbols(e) {
            match self.index_of(&s) {
                Some(i) => out.push(i),
                None => return Err(s),
            }
        }
        out.sort_unstable();
        Ok(out)
    }

    /// The declared ranges as f64 intervals rounded inward (a range holding no f64 as its
    /// nearest point): where sample statistics and displayed points are taken.
    pub fn declared_box(&self) -> Vec<Interval> {
        self.variables
            .iter()
            .map(|v| {
                let (lo, hi) = v
                    .inner()
                    .unwrap_or((v.declared.lo.value(), v.declared.lo.value()));
                Interval::new(lo, hi)
            })
            .collect()
    }

    /// Indices of the error coordinates: the states' and the controller states'.
    pub fn errors(&self) -> Vec<usize> {
        (0..self.variables.len())
            .filter(|&i| matches!(self.variables[i].role, Role::Error | Role::MemoryError))
            .collect()
    }

    /// Indices of the error coordinates of these states and controller states.
    pub fn errors_of(&self, symbols: &[String]) -> Vec<usize> {
        self.errors()
            .into_iter()
            .filter(|&i| symbols.contains(&self.variables[i].symbol))
            .collect()
    }

    /// `dims` grown by every coordinate of every constraint that shares a coordinate with it,
    /// repeatedly, so a constraint can always be decided on a box over the result.
    pub fn close_over_constraints(&self, dims: &[usize]) -> Vec<usize> {
        let mut out: Vec<usize> = dims.to_vec();
        let cvars: Vec<Vec<usize>> = self
            .constraints
            .iter()
            .map(|c| self.coordinates_of(c.g).unwrap_or_default())
            .collect();
        loop {
            let before = out.len();
            for vs in &cvars {
                if vs.iter().any(|v| out.contains(v)) {
                    for v in vs {
                        if !out.contains(v) {
                            out.push(*v);
                        }
                    }
                }
            }
            if out.len() == before {
                break;
            }
        }
        out.sort_unstable();
        out
    }

    /// The value of every base symbol at a full point of the domain (one value per
    /// coordinate): states as reference (or equilibrium) plus error, then references, rates,
    /// signals, estimate errors, gains and parameters, then the true value of every uncertain
    /// quantity whose estimate is a signal.
    pub fn base_values(&self, point: &[f64]) -> Vec<(String, f64)> {
        let value = |name: &str| {
            self.index_of(name)
                .map(|i| point[i])
                .expect("a reference is a coordinate")
        };
        let mut out = Vec::new();
        for (s, target) in &self.states {
            let base = match target {
                Target::Reference(r) => value(r),
                Target::Equilibrium(eq) => eq.value(),
            };
            out.push((s.clone(), base + value(&error_name(s))));
        }
        for (m, settle) in &self.memory {
            let base = match settle {
                Settle::Value(v) => v.value(),
                Settle::Unknown(u) => self
                    .index_of(u)
                    .map_or_else(|| self.constant_of(u).unwrap_or(f64::NAN), |i| point[i]),
            };
            out.push((m.clone(), base + value(&error_name(m))));
        }
        for (v, x) in self.variables.iter().zip(point) {
            if !matches!(v.role, Role::Error | Role::MemoryError) {
                out.push((v.name.clone(), *x));
            }
        }
        out.extend(self.parameters.iter().map(|(n, v)| (n.clone(), v.value())));
        for (name, delta_name, estimate, form, known) in &self.uncertain {
            let delta = match (self.index_of(delta_name), known) {
                (Some(d), _) => point[d],
                (None, Some(c)) => c.value(),
                (None, None) => continue,
            };
            let Some(e) = self.index_of(estimate) else {
                continue;
            };
            let v = match form {
                ErrorForm::Relative => point[e] * (1.0 + delta),
                ErrorForm::Absolute => point[e] + delta,
            };
            out.push((name.clone(), v));
        }
        out
    }

    /// The value of a symbol the problem holds as a constant (a parameter, an unknown whose
    /// range is one point).
    fn constant_of(&self, name: &str) -> Option<f64> {
        let id = *self.to_proof.get(name)?;
        lawsmith_expr::eval(&self.dag, id, &HashMap::new()).ok()
    }

    /// The error coordinate of controller state `m` where it takes `value`, at a point given
    /// by name (what it settles at may be a coordinate there).
    pub fn memory_error_at(&self, m: &str, value: f64, point: &[(String, f64)]) -> Option<f64> {
        let (_, settle) = self.memory.iter().find(|(n, _)| n == m)?;
        let base = match settle {
            Settle::Value(v) => v.value(),
            Settle::Unknown(u) => match point.iter().find(|(n, _)| n == u) {
                Some((_, x)) => *x,
                None => self.constant_of(u)?,
            },
        };
        Some(value - base)
    }

    /// Indices of the estimate-error coordinates.
    pub fn uncertainties(&self) -> Vec<usize> {
        (0..self.variables.len())
            .filter(|&i| self.variables[i].role == Role::Uncertainty)
            .collect()
    }
}

/// The spec's derivation rewritten in proof coordinates.
#[derive(Debug, Clone)]
pub struct ProofForms {
    /// V.
    pub candidate: ExprId,
    /// V̇ along the closed loop.
    pub vdot: ExprId,
    /// Each actuator command.
    pub actuators: Vec<(String, ExprId)>,
    /// Each law.
    pub laws: Vec<(String, ExprId)>,
    /// Side conditions assumed while rewriting (in proof coordinates).
    pub assumed: Vec<(&'static str, Condition)>,
}

impl Problem {
    /// Rewrites V, V̇, the laws and the actuator commands of a derivation.
    pub fn forms(&mut self, d: &Derivation) -> ProofForms {
        let mut assumed = Vec::new();
        let mut go = |p: &mut Problem, e: ExprId| {
            let (out, a) = p.express(e);
            assumed.extend(a);
            out
        };
        let candidate = go(self, d.candidate);
        let vdot = go(self, d.vdot);
        let laws = d
            .laws
            .iter()
            .map(|(n, e)| (n.clone(), go(self, *e)))
            .collect();
        let actuators = d
            .actuators
            .iter()
            .map(|(n, e)| (n.clone(), go(self, *e)))
            .collect();
        ProofForms {
            candidate,
            vdot,
            actuators,
            laws,
            assumed,
        }
    }
}

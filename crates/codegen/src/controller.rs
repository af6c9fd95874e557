//! The controller a spec describes, as the generated code implements it: the envelope the
//! proof covers, the law and actuator program, the limits, the guidance filters, and the
//! reference interpreter ([`Controller::step`], [`Controller::update`]) every emitter follows
//! operation for operation.
//!
//! `step` evaluates the law at the nearest point of the proved envelope, in proof coordinates:
//! each state's error is measured against its reference as given and clamped to its box, each
//! reference, rate and signal is clamped to its declared range, and the state is then the
//! clamped reference plus the clamped error (a NaN becomes the range midpoint, or zero error;
//! a NaN reference therefore gives zero error at the midpoint). Gains outside their ranges or
//! constraints are replaced by the defaults; any of these raises the domain flag. The law is therefore only
//! ever evaluated where the proof holds, and its output is never NaN. Each command is then
//! saturated to its limits, with one flag bit per limit hit.

use crate::ir::{clamp, Builder, IrError, Program, Slot};
use crate::real::{ends, Real};
use lawsmith_expr::{ExprId, Func};
use lawsmith_spec::{Decl, Spec, SymbolKind, Target};
use std::collections::HashMap;

/// A reference, rate or signal: a value the law reads, with its proved range.
#[derive(Clone, Debug, PartialEq)]
pub struct Ranged {
    /// Name (a field of the inputs).
    pub name: String,
    /// Unit as written.
    pub unit: String,
    /// Proved range.
    pub range: (f64, f64),
}

/// A state: its reference (an input) or its equilibrium, and its proved error box.
#[derive(Clone, Debug, PartialEq)]
pub struct State {
    /// Name.
    pub name: String,
    /// Unit.
    pub unit: String,
    /// Index of what it tracks among the references then the rates ([`Controller::references`]
    /// chained with [`Controller::rates`]), if it tracks one.
    pub reference: Option<usize>,
    /// Its equilibrium when it tracks no reference.
    pub equilibrium: f64,
    /// The error box.
    pub error: (f64, f64),
}

/// A gain: range and default.
#[derive(Clone, Debug, PartialEq)]
pub struct Gain {
    /// Name.
    pub name: String,
    /// Unit.
    pub unit: String,
    /// Proved range.
    pub range: (f64, f64),
    /// Default (used when the given gains leave the proved set).
    pub default: f64,
}

/// An actuator command and its limits.
#[derive(Clone, Debug, PartialEq)]
pub struct Actuator {
    /// Name (a field of the outputs).
    pub name: String,
    /// Unit.
    pub unit: String,
    /// Position limits.
    pub limits: (f64, f64),
    /// The documented safe output: zero clamped into the limits.
    pub safe: f64,
}

/// A controller state: a value the law carries from one period to the next (an integrator,
/// an adaptive estimate), advanced by its update law and kept within its limits.
#[derive(Clone, Debug, PartialEq)]
pub struct Memory {
    /// Name (a field of the memory struct).
    pub name: String,
    /// Unit.
    pub unit: String,
    /// Its value at start and after a reset.
    pub initial: f64,
    /// The limits it is held in (its proof covers exactly them).
    pub limits: (f64, f64),
}

/// A first-order reference filter with rate limits.
#[derive(Clone, Debug, PartialEq)]
pub struct Filter {
    /// Index of the reference it produces among [`Controller::references`].
    pub reference: usize,
    /// Name of the reference's rate.
    pub rate: String,
    /// Name of the command it follows.
    pub command: String,
    /// Index of its gain among [`Controller::gains`].
    pub gain: usize,
    /// Rate limits (lower < 0 < upper).
    pub rate_limit: (f64, f64),
    /// Inputs `[r, c, k, dt]`, outputs `[r_next, rate_next]`: the exact discretisation.
    pub program: Program,
}

/// The controller of one spec.
#[derive(Clone, Debug, PartialEq)]
pub struct Controller {
    /// Spec name (an identifier: module and prefix of the generated code).
    pub name: String,
    /// States.
    pub states: Vec<State>,
    /// References.
    pub references: Vec<Ranged>,
    /// Reference rates.
    pub rates: Vec<Ranged>,
    /// Signals.
    pub signals: Vec<Ranged>,
    /// Gains.
    pub gains: Vec<Gain>,
    /// Constraints over the gains: `g < 0` (strict) or `g ≤ 0`; the program's outputs are
    /// the `g`s over the gains.
    pub constraints: (Program, Vec<bool>),
    /// Constraint texts, for comments.
    pub constraint_texts: Vec<String>,
    /// Inputs: states, references, rates, signals, controller states, then gains; outputs:
    /// the commands, then each controller state's update law (its rate).
    pub law: Program,
    /// Controller states.
    pub memory: Vec<Memory>,
    /// Actuators, in output order.
    pub actuators: Vec<Actuator>,
    /// Guidance filters.
    pub filters: Vec<Filter>,
}

/// What one control step produces.
#[derive(Clone, Debug, PartialEq)]
pub struct StepOutput<R = f64> {
    /// The saturated commands, in actuator order.
    pub commands: Vec<R>,
    /// Bit `2i` set: actuator `i` hit its lower limit; bit `2i+1`: its upper limit.
    pub limits: u32,
    /// Some input was NaN or outside the proved envelope (or the gains outside their set):
    /// any bit of `status`.
    pub domain: bool,
    /// What was repaired, the [`STATUS`] bits: a non-finite input, a finite input outside
    /// the envelope, gains rejected, a non-finite command, a controller state repaired.
    pub status: u32,
    /// Bit `2j` set: controller state `j` was held at its lower limit; bit `2j+1`: at its
    /// upper limit.
    pub memory_limits: u32,
}

impl<R> StepOutput<R> {
    /// The same output with each command converted (e.g. an f32 step's commands as the
    /// doubles they are exactly).
    pub fn map<S>(self, f: impl Fn(R) -> S) -> StepOutput<S> {
        StepOutput {
            commands: self.commands.into_iter().map(f).collect(),
            limits: self.limits,
            domain: self.domain,
            status: self.status,
            memory_limits: self.memory_limits,
        }
    }
}

/// The `status` bits, by name and meaning, in bit order: the emitters print them as
/// constants, the interpreter sets them (`GUIDANCE_REPAIRED` and `GAINS_REJECTED` in
/// `update`, the others in `step`).
pub const STATUS: [(&str, &str); 6] = [
    (
        "NONFINITE_INPUT",
        "an input was NaN or infinite: a NaN evaluated at its range's midpoint (or zero error), an infinity at its range's edge",
    ),
    (
        "OUTSIDE_ENVELOPE",
        "a finite input was outside the proved envelope: evaluated at the nearest envelope point",
    ),
    (
        "GAINS_REJECTED",
        "the gains were outside their proved set: the spec's defaults were used",
    ),
    (
        "NONFINITE_COMMAND",
        "a command was not finite (the proof rules this out): the safe value was sent",
    ),
    (
        "GUIDANCE_REPAIRED",
        "a reference of the guidance state was not finite: its filter restarted at rest at its command",
    ),
    (
        "MEMORY_REPAIRED",
        "a controller state was outside its limits (clamped into them) or not finite (restarted at its initial value), or its update was not finite (kept)",
    ),
];

/// The `status` bits of [`STATUS`], by name.
pub const STATUS_NONFINITE_INPUT: u32 = 1 << 0;
/// See [`STATUS`].
pub const STATUS_OUTSIDE_ENVELOPE: u32 = 1 << 1;
/// See [`STATUS`].
pub const STATUS_GAINS_REJECTED: u32 = 1 << 2;
/// See [`STATUS`].
pub const STATUS_NONFINITE_COMMAND: u32 = 1 << 3;
/// See [`STATUS`].
pub const STATUS_GUIDANCE_REPAIRED: u32 = 1 << 4;
/// See [`STATUS`].
pub const STATUS_MEMORY_REPAIRED: u32 = 1 << 5;

/// The `status` bit of a repaired input: non-finite, or finite and outside.
fn repaired<R: Real>(v: R) -> u32 {
    if v.is_finite() {
        STATUS_OUTSIDE_ENVELOPE
    } else {
        STATUS_NONFINITE_INPUT
    }
}

/// Why no controller can be generated.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct EmitError(pub String);

impl std::fmt::Display for EmitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for EmitError {}

impl From<IrError> for EmitError {
    fn from(e: IrError) -> Self {
        EmitError(e.0)
    }
}

/// Names the generated structs use for themselves; an actuator may not take them.
pub const OUTPUT_FIELDS: [&str; 4] = ["limits", "domain", "status", "memory_limits"];

/// Most actuators (two flag bits each in a 32-bit word); the same for controller states.
pub const MAX_ACTUATORS: usize = 16;

/// A command saturated to its limits, as `step` saturates it.
pub fn clamp_command(c: f64, (lo, hi): (f64, f64)) -> f64 {
    clamp(c, lo, hi)
}

/// A value held within its limits, the flag of the limit that acts set in `bits` (bit 2k at
/// the lower, 2k + 1 at the upper): a command's, a controller state's.
fn hold<R: Real>(x: R, (lo, hi): (R, R), bits: &mut u32, k: usize) -> R {
    if x < lo {
        *bits |= 1 << (2 * k);
        lo
    } else if x > hi {
        *bits |= 1 << (2 * k + 1);
        hi
    } else {
        x
    }
}

pub(crate) fn midpoint((lo, hi): (f64, f64)) -> f64 {
    0.5 * lo + 0.5 * hi
}

impl Controller {
    /// Builds the controller of a loaded spec. Parameters become constants.
    pub fn new(spec: &Spec) -> Result<Controller, EmitError> {
        let name = spec.name.clone();
        if name.is_empty()
            || !name.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
            || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
        {
            return Err(EmitError(format!(
                "the spec name `{name}` is not an identifier (letters, digits, `_`); it names the generated module and prefixes the C functions"
            )));
        }
        let ranged = |kind| -> Vec<Ranged> {
            spec.symbols_of(kind)
                .filter_map(|s| {
                    Some(Ranged {
                        name: s.name.clone(),
                        unit: s.unit.clone(),
                        range: s.range()?.nearest(),
                    })
                })
                .collect()
        };
        let references = ranged(SymbolKind::Reference);
        let rates = ranged(SymbolKind::Rate);
        let signals = ranged(SymbolKind::Signal);
        let states: Vec<State> = spec
            .symbols
            .iter()
            .filter_map(|s| {
                let Decl::State { target, error } = &s.decl else {
                    return None;
                };
                // a reference, or a reference's rate: its place among the ranged inputs
                let (reference, equilibrium) = match target {
                    Target::Reference(r) => (
                        references.iter().chain(&rates).position(|x| &x.name == r),
                        0.0,
                    ),
                    Target::Equilibrium(eq) => (None, eq.value()),
                };
                Some(State {
                    name: s.name.clone(),
                    unit: s.unit.clone(),
                    reference,
                    equilibrium,
                    error: error.nearest(),
                })
            })
            .collect();
        let gains: Vec<Gain> = spec
            .symbols
            .iter()
            .filter_map(|s| {
                let Decl::Gain { range, default } = &s.decl else {
                    return None;
                };
                let range = range.nearest();
                Some(Gain {
                    name: s.name.clone(),
                    unit: s.unit.clone(),
                    range,
                    // the midpoint when the spec gives no default (README)
                    default: default.unwrap_or_else(|| midpoint(range)),
                })
            })
            .collect();
        let actuators: Vec<Actuator> = spec
            .actuators
            .iter()
            .map(|a| Actuator {
                name: a.name.clone(),
                unit: a.unit.clone(),
                limits: a.limits.nearest(),
                safe: a
                    .safe
                    .unwrap_or_else(|| clamp(0.0, a.limits.lo.value(), a.limits.hi.value())),
            })
            .collect();
        if actuators.len() > MAX_ACTUATORS {
            return Err(EmitError(format!(
                "{} actuators; the limit flags hold {MAX_ACTUATORS}",
                actuators.len()
            )));
        }
        if let Some(a) = actuators
            .iter()
            .find(|a| OUTPUT_FIELDS.contains(&a.name.as_str()))
        {
            return Err(EmitError(format!(
                "actuator `{}` has the name of a field the generated outputs use themselves ({}); rename it",
                a.name,
                OUTPUT_FIELDS.join(", ")
            )));
        }

        let memory: Vec<Memory> = spec
            .symbols
            .iter()
            .filter_map(|s| {
                let Decl::Memory {
                    initial, limits, ..
                } = &s.decl
                else {
                    return None;
                };
                Some(Memory {
                    name: s.name.clone(),
                    unit: s.unit.clone(),
                    initial: initial.value(),
                    limits: limits.nearest(),
                })
            })
            .collect();
        if memory.len() > MAX_ACTUATORS {
            return Err(EmitError(format!(
                "{} controller states; their limit flags hold {MAX_ACTUATORS}",
                memory.len()
            )));
        }

        // parameters are constants: the decimals the spec wrote
        let mut dag = spec.dag.clone();
        let params: HashMap<String, ExprId> = spec
            .symbols
            .iter()
            .filter_map(|s| match &s.decl {
                Decl::Parameter { value } => Some((s.name.clone(), dag.num(value.exact().clone()))),
                _ => None,
            })
            .collect();

        let mut law_inputs: Vec<String> = states.iter().map(|s| s.name.clone()).collect();
        law_inputs.extend(references.iter().map(|s| s.name.clone()));
        law_inputs.extend(rates.iter().map(|s| s.name.clone()));
        law_inputs.extend(signals.iter().map(|s| s.name.clone()));
        law_inputs.extend(memory.iter().map(|s| s.name.clone()));
        law_inputs.extend(gains.iter().map(|s| s.name.clone()));
        let mut b = Builder::new(&law_inputs);
        for (input, e) in &spec.laws {
            let e = dag.substitute(*e, &params);
            let s = b.expr(&dag, e)?;
            b.define(input, s);
        }
        for a in &spec.actuators {
            let e = dag.substitute(a.law, &params);
            let s = b.expr(&dag, e)?;
            b.output(&a.name, s);
        }
        // the update laws read the laws' values as the code has them (defined above)
        for (m, u) in &spec.updates {
            let e = dag.substitute(*u, &params);
            let s = b.expr(&dag, e)?;
            b.output(m, s);
        }
        let law = b.finish();

        let gain_names: Vec<String> = gains.iter().map(|g| g.name.clone()).collect();
        let mut cb = Builder::new(&gain_names);
        let mut strict = Vec::new();
        for (i, c) in spec.constraints.iter().enumerate() {
            let (a, bb) = match c.op.as_str() {
                "<" | "<=" => (c.lhs, c.rhs),
                _ => (c.rhs, c.lhs),
            };
            let diff = dag.sub(a, bb);
            let diff = dag.substitute(diff, &params);
            let s = cb.expr(&dag, diff)?;
            cb.output(&format!("c{i}"), s);
            strict.push(c.op == "<" || c.op == ">");
        }
        let constraints = (cb.finish(), strict);
        let constraint_texts = spec.constraints.iter().map(|c| c.text.clone()).collect();

        let mut filters = Vec::new();
        for g in &spec.guidance {
            let reference = references
                .iter()
                .position(|r| r.name == g.reference)
                .ok_or_else(|| {
                    EmitError(format!("guidance for unknown reference `{}`", g.reference))
                })?;
            let gain = gains.iter().position(|k| k.name == g.gain).ok_or_else(|| {
                EmitError(format!(
                    "the gain `{}` of the `{}` filter is not a gain",
                    g.gain, g.reference
                ))
            })?;
            let (lo, hi) = g.rate_limit;
            if !(lo < 0.0 && hi > 0.0) {
                return Err(EmitError(format!(
                    "the rate limit [{lo}, {hi}] of the `{}` filter must hold zero inside",
                    g.reference
                )));
            }
            let lo_gain = gains[gain].range.0;
            if lo_gain.is_nan() || lo_gain <= 0.0 {
                return Err(EmitError(format!(
                    "the gain `{}` of the `{}` filter must be positive over its range",
                    g.gain, g.reference
                )));
            }
            let rate = spec
                .symbol(&g.reference)
                .and_then(|s| match &s.decl {
                    Decl::Reference { rate, .. } => Some(rate.clone()),
                    _ => None,
                })
                .ok_or_else(|| EmitError(format!("`{}` is not a reference", g.reference)))?;
            filters.push(Filter {
                reference,
                rate,
                command: g.command.clone(),
                gain,
                rate_limit: (lo, hi),
                program: filter_program(lo, hi),
            });
        }
        let c = Controller {
            name,
            states,
            references,
            rates,
            signals,
            gains,
            constraints,
            constraint_texts,
            law,
            memory,
            actuators,
            filters,
        };
        let defaults: Vec<f64> = c.gains.iter().map(|g| g.default).collect();
        if !c.gains_valid(&defaults) {
            return Err(EmitError(
                "the default gains do not meet the constraints; the generated code falls back to them, so they must".into(),
            ));
        }
        Ok(c)
    }

    /// The controller with each guidance filter's rate limits cut to `limits` (rate name →
    /// range, e.g. the proved guidance rates): the filter's limits become their intersection.
    /// A filter left no room to move (a limit of zero where it had one) is an error.
    pub fn with_rate_limits(
        &self,
        limits: &[(String, (f64, f64))],
    ) -> Result<Controller, EmitError> {
        let mut c = self.clone();
        for f in &mut c.filters {
            let Some((_, (lo, hi))) = limits.iter().find(|(n, _)| *n == f.rate) else {
                continue;
            };
            let (lo, hi) = (f.rate_limit.0.max(*lo), f.rate_limit.1.min(*hi));
            if !(lo < 0.0 && hi > 0.0) {
                return Err(EmitError(format!(
                    "the rate limits [{lo}, {hi}] left to the filter of `{}` do not hold zero inside: it could not move its reference both ways",
                    c.references[f.reference].name
                )));
            }
            f.rate_limit = (lo, hi);
            f.program = filter_program(lo, hi);
        }
        Ok(c)
    }

    /// Inputs of `step`, in order: states, references, rates, signals.
    pub fn input_names(&self) -> Vec<String> {
        let mut v: Vec<String> = self.states.iter().map(|s| s.name.clone()).collect();
        v.extend(self.references.iter().map(|s| s.name.clone()));
        v.extend(self.rates.iter().map(|s| s.name.clone()));
        v.extend(self.signals.iter().map(|s| s.name.clone()));
        v
    }

    /// The law's arithmetic operations (the figure `emit` prints).
    pub fn op_count(&self) -> usize {
        self.law.op_count()
    }

    /// Do these gains lie in their ranges and meet the constraints (computed in `R`, as the
    /// generated `check_gains` of that type computes it)?
    pub fn gains_valid<R: Real>(&self, gains: &[R]) -> bool {
        self.gains_valid_in(gains, &mut Workspace::default())
    }

    fn gains_valid_in<R: Real>(&self, gains: &[R], ws: &mut Workspace<R>) -> bool {
        let in_range = self.gains.iter().zip(gains).all(|(g, &v)| {
            let (lo, hi) = ends::<R>(g.range);
            v >= lo && v <= hi
        });
        if !in_range {
            return false;
        }
        let (p, strict) = &self.constraints;
        ws.out.resize(p.outputs.len(), R::default());
        p.run_into(gains, &mut ws.slots, &mut ws.out);
        let zero = R::lit(0.0);
        ws.out
            .iter()
            .zip(strict)
            .all(|(&v, &s)| if s { v < zero } else { v <= zero })
    }

    /// One control step, as the generated `compute_commands` of type `R` computes it, with
    /// the controller states (if any) at their initial values and not advanced. `inputs`
    /// follows [`Controller::input_names`], `gains` the gains.
    pub fn step<R: Real>(&self, inputs: &[R], gains: &[R]) -> StepOutput<R> {
        self.step_in(inputs, gains, &mut Workspace::default())
    }

    /// [`Controller::step`] with reusable buffers.
    pub fn step_in<R: Real>(
        &self,
        inputs: &[R],
        gains: &[R],
        ws: &mut Workspace<R>,
    ) -> StepOutput<R> {
        let mut memory = self.start_memory();
        self.run_in(inputs, gains, &mut memory, R::lit(0.0), ws)
    }

    /// The controller states at their initial values, in declaration order (as the generated
    /// `start_memory` sets them).
    pub fn start_memory<R: Real>(&self) -> Vec<R> {
        self.memory.iter().map(|m| R::lit(m.initial)).collect()
    }

    /// One control step, as the generated `compute_commands` of type `R` computes it: the
    /// commands from `inputs`, `gains` and the controller states `memory`, which are then
    /// advanced over `dt` seconds by forward Euler, `x + dt·u` with `u` the update law at this
    /// step's values, and held within their limits (a `dt` that is not positive advances
    /// nothing). Every constant is the literal the emitter of type `R` prints, every range end
    /// rounded inward ([`Float::inward`](crate::Float::inward)).
    pub fn run<R: Real>(
        &self,
        inputs: &[R],
        gains: &[R],
        memory: &mut [R],
        dt: R,
    ) -> StepOutput<R> {
        self.run_in(inputs, gains, memory, dt, &mut Workspace::default())
    }

    /// [`Controller::run`] with reusable buffers (for simulation loops).
    pub fn run_in<R: Real>(
        &self,
        inputs: &[R],
        gains: &[R],
        memory: &mut [R],
        dt: R,
        ws: &mut Workspace<R>,
    ) -> StepOutput<R> {
        let mut status = 0u32;
        let ns = self.states.len();
        let (nr, nt) = (self.references.len(), self.rates.len());
        let mut x = std::mem::take(&mut ws.x);
        x.clear();
        x.extend_from_slice(inputs);
        // each state's error against its reference as given, before the reference is
        // clamped: a reference outside its range moves to its edge with the error kept
        let mut raw = std::mem::take(&mut ws.bases);
        raw.clear();
        raw.extend(
            self.states
                .iter()
                .map(|s| s.reference.map_or(R::lit(s.equilibrium), |r| x[ns + r])),
        );
        let mut guard = |v: &mut R, range: (f64, f64)| {
            let (lo, hi) = ends::<R>(range);
            if !(*v >= lo && *v <= hi) {
                status |= repaired(*v);
                *v = if v.is_nan() {
                    R::lit(midpoint(range))
                } else {
                    clamp(*v, lo, hi)
                };
            }
        };
        for (i, r) in self.references.iter().enumerate() {
            guard(&mut x[ns + i], r.range);
        }
        for (i, r) in self.rates.iter().enumerate() {
            guard(&mut x[ns + nr + i], r.range);
        }
        for (i, r) in self.signals.iter().enumerate() {
            guard(&mut x[ns + nr + nt + i], r.range);
        }
        for (i, s) in self.states.iter().enumerate() {
            let base = match s.reference {
                Some(r) => x[ns + r],
                None => R::lit(s.equilibrium),
            };
            let e = x[i] - raw[i];
            let (lo, hi) = ends::<R>(s.error);
            if !(e >= lo && e <= hi) {
                status |= repaired(e);
                let e2 = if e.is_nan() {
                    R::lit(clamp(0.0, s.error.0, s.error.1))
                } else {
                    clamp(e, lo, hi)
                };
                x[i] = base + e2;
            } else if base != raw[i] {
                x[i] = base + e;
            }
        }
        ws.bases = raw;
        // a controller state outside its limits is clamped into them, a NaN restarts
        for (m, v) in self.memory.iter().zip(memory.iter_mut()) {
            let (lo, hi) = ends::<R>(m.limits);
            if !(*v >= lo && *v <= hi) {
                status |= STATUS_MEMORY_REPAIRED;
                *v = if v.is_nan() {
                    R::lit(m.initial)
                } else {
                    clamp(*v, lo, hi)
                };
            }
            x.push(*v);
        }
        if self.gains_valid_in(gains, ws) {
            x.extend_from_slice(gains);
        } else {
            status |= STATUS_GAINS_REJECTED;
            x.extend(self.gains.iter().map(|g| R::lit(g.default)));
        }
        let mut raw = std::mem::take(&mut ws.out);
        raw.resize(self.law.outputs.len(), R::default());
        self.law.run_into(&x, &mut ws.slots, &mut raw);
        ws.x = x;
        let mut limits = 0u32;
        let mut commands = Vec::with_capacity(raw.len());
        for (i, (a, &c)) in self.actuators.iter().zip(&raw).enumerate() {
            let mut c = c;
            if !c.is_finite() {
                status |= STATUS_NONFINITE_COMMAND;
                c = R::lit(a.safe);
            }
            commands.push(hold(c, ends(a.limits), &mut limits, i));
        }
        // the controller states over dt: forward Euler, held within their limits
        let mut memory_limits = 0u32;
        let rates = &raw[self.actuators.len()..];
        for (j, ((m, v), &u)) in self
            .memory
            .iter()
            .zip(memory.iter_mut())
            .zip(rates)
            .enumerate()
        {
            if dt > R::lit(0.0) {
                let mut next = *v + dt * u;
                if !next.is_finite() {
                    status |= STATUS_MEMORY_REPAIRED;
                    next = *v;
                }
                *v = hold(next, ends(m.limits), &mut memory_limits, j);
            }
        }
        ws.out = raw;
        StepOutput {
            commands,
            limits,
            domain: status != 0,
            status,
            memory_limits,
        }
    }

    /// One guidance update of every filter, as the generated `advance_references` of type
    /// `R` computes it: `refs[j]`/`rates[j]` are filter `j`'s reference and rate, advanced
    /// over `dt` towards `commands[j]`. A NaN command holds the reference; a reference that
    /// is not finite restarts at rest at its command ([`Controller::start`]); gains outside
    /// their sets are replaced by the defaults; a `dt` that is not positive changes nothing.
    /// Returns the `status` bits of what it repaired (`GUIDANCE_REPAIRED`, `GAINS_REJECTED`).
    pub fn update<R: Real>(
        &self,
        refs: &mut [R],
        rates: &mut [R],
        commands: &[R],
        gains: &[R],
        dt: R,
    ) -> u32 {
        self.update_in(refs, rates, commands, gains, dt, &mut Workspace::default())
    }

    /// [`Controller::update`] with reusable buffers.
    pub fn update_in<R: Real>(
        &self,
        refs: &mut [R],
        rates: &mut [R],
        commands: &[R],
        gains: &[R],
        dt: R,
        ws: &mut Workspace<R>,
    ) -> u32 {
        if dt.is_nan() || dt <= R::lit(0.0) {
            return 0;
        }
        let valid = self.gains_valid_in(gains, ws);
        let mut status = if valid { 0 } else { STATUS_GAINS_REJECTED };
        for (j, f) in self.filters.iter().enumerate() {
            if !refs[j].is_finite() {
                status |= STATUS_GUIDANCE_REPAIRED;
                refs[j] = self.start(j, commands[j]);
            }
            let k = if valid {
                gains[f.gain]
            } else {
                R::lit(self.gains[f.gain].default)
            };
            let c = if commands[j].is_nan() {
                refs[j]
            } else {
                commands[j]
            };
            let mut out = [R::default(); 2];
            f.program
                .run_into(&[refs[j], c, k, dt], &mut ws.slots, &mut out);
            refs[j] = out[0];
            rates[j] = out[1];
        }
        status
    }

    /// Filter `j`'s reference at rest at `command`: clamped into the reference's range, a
    /// NaN at the range's midpoint (as the emitted init and the repair in `update` set it).
    pub fn start<R: Real>(&self, j: usize, command: R) -> R {
        let range = self.references[self.filters[j].reference].range;
        if command.is_nan() {
            R::lit(midpoint(range))
        } else {
            let (lo, hi) = ends::<R>(range);
            clamp(command, lo, hi)
        }
    }
}

/// Reusable buffers of [`Controller::step_in`] and [`Controller::update_in`], for the float
/// type `R`.
#[derive(Clone, Debug, Default)]
pub struct Workspace<R = f64> {
    slots: Vec<R>,
    bases: Vec<R>,
    x: Vec<R>,
    out: Vec<R>,
}

/// The exact discretisation over `dt` of `ṙ = clamp(k·(c − r), lo, hi)` for a constant
/// command. With `e = c − r`: while `k·e` exceeds `hi`, `e` falls at the rate `hi` until it
/// reaches `hi/k` (after `t₁ = (e − hi/k)/hi`), then decays as `exp(−k·t)`; symmetrically
/// below with `lo`. Outputs the reference after `dt` and its rate there.
fn filter_program(lo: f64, hi: f64) -> Program {
    let names = ["r", "c", "k", "dt"].map(String::from);
    let mut b = Builder::new(&names);
    let (r, c, k, dt) = (0, 1, 2, 3);
    let e0 = b.sub(c, r);
    let zero = b.constant(0.0);
    let branch = |b: &mut Builder, limit: f64| -> Slot {
        let l = b.constant(limit);
        let sat = b.div(l, k); // the error below which the rate is unsaturated
        let over = b.sub(e0, sat);
        let t1 = b.div(over, l);
        let t1 = b.call2(Func::Max, t1, zero);
        let ldt = b.mul(l, dt);
        let linear = b.sub(e0, ldt);
        let edge = if limit > 0.0 {
            b.call2(Func::Min, e0, sat)
        } else {
            b.call2(Func::Max, e0, sat)
        };
        let rest = b.sub(dt, t1);
        let kr = b.mul(k, rest);
        let nkr = b.neg(kr);
        let decay = b.call1(Func::Exp, nkr);
        let exponential = b.mul(edge, decay);
        let cond = b.sub(t1, dt);
        b.select(cond, linear, exponential)
    };
    let up = branch(&mut b, hi);
    let down = branch(&mut b, lo);
    let e1 = b.select(e0, up, down);
    let r1 = b.sub(c, e1);
    let ke = b.mul(k, e1);
    let rate = b.clamp(ke, lo, hi);
    b.output("r", r1);
    b.output("rate", rate);
    b.finish()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ṙ = clamp(k·(c − r), lo, hi), integrated by classic RK4 with a step far below 1/k.
    fn rk4(r: f64, c: f64, k: f64, (lo, hi): (f64, f64), dt: f64) -> (f64, f64) {
        let f = |r: f64| clamp(k * (c - r), lo, hi);
        let n = 20_000;
        let h = dt / n as f64;
        let mut r = r;
        for _ in 0..n {
            let k1 = f(r);
            let k2 = f(r + 0.5 * h * k1);
            let k3 = f(r + 0.5 * h * k2);
            let k4 = f(r + h * k3);
            r += h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
        }
        (r, f(r))
    }

    #[test]
    fn the_filter_update_is_the_exact_solution() {
        // saturated then exponential, upwards and downwards, and unsaturated throughout
        // (reference: a fine RK4 integration of the same ODE, common practice)
        let limits = (-3.0, 2.0);
        let p = filter_program(limits.0, limits.1);
        let cases = [
            (100.0, 130.0, 0.3, 0.5),
            (100.0, 130.0, 0.3, 20.0),
            (130.0, 100.0, 0.3, 20.0),
            (100.0, 101.0, 0.8, 3.0),
            (100.0, 99.5, 1.0, 0.02),
            (0.0, 0.0, 0.5, 1.0),
        ];
        for (r, c, k, dt) in cases {
            let out = p.run(&[r, c, k, dt], &mut Vec::new());
            let (want_r, want_rate) = rk4(r, c, k, limits, dt);
            assert!(
                (out[0] - want_r).abs() < 1e-9,
                "{r} → {c}, k {k}, dt {dt}: {} vs {want_r}",
                out[0]
            );
            assert!(
                (out[1] - want_rate).abs() < 1e-9,
                "rate {} vs {want_rate}",
                out[1]
            );
        }
    }

    #[test]
    fn outside_the_envelope_the_law_is_evaluated_at_its_edge() {
        let spec =
            lawsmith_spec::load(include_str!("../../../specs/energy_longitudinal.yaml")).unwrap();
        let c = Controller::new(&spec).unwrap();
        let names = c.input_names();
        let at = |n: &str| names.iter().position(|x| x == n).unwrap();
        let gains = [0.25, 0.35, 0.3, 0.5];
        let mut x = vec![120.0, 22.0, 120.0, 22.0, 0.0, 0.0, 8.0, 0.05];
        let inside = c.step(&x, &gains);
        assert!(!inside.domain);
        // an altitude error of 40 m is outside the proved ±5 m: evaluated at +5 m
        x[at("h")] = 160.0;
        let far = c.step(&x, &gains);
        x[at("h")] = 125.0;
        let edge = c.step(&x, &gains);
        assert!(far.domain && !edge.domain);
        assert_eq!(far.commands, edge.commands);
        // each repair has its own status bit
        assert_eq!((inside.status, far.status, edge.status), (0, 1 << 1, 0));
        // NaN drag: evaluated at the middle of its range; gains outside: the defaults
        x[at("drag")] = f64::NAN;
        assert_eq!(c.step(&x, &gains).status, 1 << 0);
        let nan = c.step(&x, &[9.0, 0.35, 0.3, 0.5]);
        assert!(nan.domain && nan.commands.iter().all(|v| v.is_finite()));
        assert_eq!(nan.status, 1 << 0 | 1 << 2);
        x[at("drag")] = 8.0;
        assert_eq!(c.step(&x, &[9.0, 0.35, 0.3, 0.5]).status, 1 << 2);
        // an infinite altitude: non-finite, evaluated at the error box's edge
        x[at("h")] = f64::INFINITY;
        let inf = c.step(&x, &gains);
        assert_eq!((inf.status, &inf.commands), (1 << 0, &edge.commands));
    }
}

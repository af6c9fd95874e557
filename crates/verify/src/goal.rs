//! A goal: one inequality to prove over the domain, compiled for fast evaluation on boxes and
//! points.
//!
//! Every question the verifier asks is a goal: the Lyapunov claim (`V̇ < 0` away from zero
//! error), `V > 0` away from zero error, each well-posedness condition (`asin` argument in
//! [−1, 1], a denominator away from zero, …). A compiled goal holds flat tapes of the
//! expression, its gradient (for the centered form) and, where the origin needs closing, its
//! Hessian in the errors.

use crate::hessian::{self, Method};
use crate::interval::Interval;
use crate::problem::{Problem, Role};
use lawsmith_expr::{derivative, to_text, Arith, AssumeNothing, ExprId, Func, Node, Simplifier};
use lawsmith_expr::{Dag, Tape};
use std::collections::HashMap;

/// What must hold of the goal's expression `f` at every point of the domain.
#[derive(Copy, Clone, Debug, PartialEq)]
pub enum Test {
    /// `f < 0` (strict) or `f ≤ 0`.
    Negative {
        /// Strict inequality.
        strict: bool,
    },
    /// `lo ≤ f ≤ hi`.
    Within {
        /// Lower end.
        lo: f64,
        /// Upper end.
        hi: f64,
    },
    /// `f ≠ 0`, decided box by box as `f > 0` or `f < 0`.
    NonZero,
}

impl Test {
    /// Does an enclosure of `f` over a box prove the test there?
    pub fn proves(&self, f: Interval) -> bool {
        if f.is_empty() {
            return false;
        }
        match *self {
            Test::Negative { strict: true } => f.hi() < 0.0,
            Test::Negative { strict: false } => f.hi() <= 0.0,
            Test::Within { lo, hi } => f.lo() >= lo && f.hi() <= hi,
            Test::NonZero => f.lo() > 0.0 || f.hi() < 0.0,
        }
    }

    /// Does an enclosure of `f` at a single point prove the test *fails* there?
    pub fn refutes(&self, f: Interval) -> bool {
        if f.is_empty() {
            return false;
        }
        match *self {
            Test::Negative { strict: true } => f.lo() >= 0.0,
            Test::Negative { strict: false } => f.lo() > 0.0,
            Test::Within { lo, hi } => f.hi() < lo || f.lo() > hi,
            Test::NonZero => f.lo() == 0.0 && f.hi() == 0.0,
        }
    }

    /// Does an f64 value suggest the test fails (to be confirmed with intervals)?
    pub fn suspects(&self, v: f64) -> bool {
        match *self {
            Test::Negative { strict: true } => v >= 0.0,
            Test::Negative { strict: false } => v > 0.0,
            Test::Within { lo, hi } => v < lo || v > hi,
            Test::NonZero => v == 0.0,
        }
    }

    /// How far a value is from failing the test (positive while it holds).
    pub fn slack(&self, v: f64) -> f64 {
        match *self {
            Test::Negative { .. } => -v,
            Test::Within { lo, hi } => (v - lo).min(hi - v),
            Test::NonZero => v.abs(),
        }
    }
}

/// An inequality to prove, in proof coordinates.
#[derive(Clone, Debug)]
pub struct Goal {
    /// Human-readable statement, e.g. "V̇ < 0 for non-zero error".
    pub label: String,
    /// The expression `f` (proof coordinates, simplified).
    pub expr: ExprId,
    /// What must hold of it.
    pub test: Test,
    /// The test is exempt where every error is zero (Lyapunov statements).
    pub origin: bool,
    /// With `origin`: the problem coordinates whose joint zero is exempt (and in which the
    /// Hessian closes it); None for every error coordinate (the states' and the controller
    /// states').
    pub exempt: Option<Vec<usize>>,
    /// The goal is asked only where this expression (V, for an ultimate bound) is at least
    /// [`Compiled::level`]; elsewhere it holds vacuously.
    pub region: Option<ExprId>,
}

/// A goal compiled to tapes over its own coordinates (`dims`).
#[derive(Clone, Debug)]
pub struct Compiled {
    /// The goal.
    pub goal: Goal,
    /// Problem coordinates the search runs over, in problem order.
    pub dims: Vec<usize>,
    /// Their names.
    pub names: Vec<String>,
    /// Positions (in `dims`) of the error coordinates.
    pub errors: Vec<usize>,
    /// `f` in formula syntax.
    pub text: String,
    /// The region's expression in formula syntax, when the goal has one.
    pub region_text: Option<String>,
    /// The Hessian closes the origin: f, ∇ₑf vanish at zero error and f is smooth.
    pub origin_closable: bool,
    /// Positions (in `dims`) of the non-error coordinates `f` is affine in (∂²f/∂x² ≡ 0):
    /// bounds over them are taken at the vertices of their sub-box instead of by splitting.
    pub affine: Vec<usize>,
    /// With a region: the goal is asked only where the region's expression is at least this
    /// level (no restriction while it is 0 or below).
    pub level: f64,
    /// The f64 points inside each coordinate's declared range (None when some declared range
    /// holds none): a counterexample must lie there, while the box searched is the larger
    /// outward-rounded one.
    inner: Option<Vec<(f64, f64)>>,
    value: Tape,
    grad: Tape,
    hessian: Option<Tape>,
    constraints: Vec<(Tape, bool, usize)>,
    /// The region's expression with its gradient, and alone.
    region: Option<(Tape, Tape)>,
    /// Boxes the claim's proof covers (the saturated law's goal), when set.
    unclamped: Option<Unclamped>,
}

/// Where every command is within its limits, V̇ of the saturated law is the claim's V̇, which
/// the claim's proof shows negative away from the joint zero of the claim's exempt errors: a
/// box on which each command's enclosure lies inside its limits and one of those errors is
/// away from zero needs no proof of its own. Set on the saturated law's goal (a proven claim
/// of a strictly negative V̇ only).
#[derive(Clone, Debug)]
pub struct Unclamped {
    /// Every command over the goal's coordinates.
    commands: Tape,
    /// Each command's f64 ends inside its exact limits.
    limits: Vec<(f64, f64)>,
    /// Positions (in the goal's dims) of the claim's exempt errors that are among them.
    exempt: Vec<usize>,
}

/// How a box stands with respect to the gain constraints.
#[derive(Copy, Clone, Debug, PartialEq)]
pub enum Feasibility {
    /// Every point meets every constraint.
    All,
    /// Constraint `i` fails at every point.
    None(usize),
    /// The region's expression is below the level at every point (its enclosure).
    Below(Interval),
    /// Every constraint holds, but the box straddles the level of the region.
    Straddles,
    /// Undecided.
    Some,
}

/// Per-thread buffers for evaluation.
#[derive(Default)]
pub struct Scratch {
    iv: Vec<Interval>,
    f: Vec<f64>,
    batch: Vec<f64>,
    out_batch: Vec<f64>,
    out: Vec<Interval>,
    point: Vec<Interval>,
}

fn smooth(dag: &Dag, e: ExprId) -> bool {
    let mut stack = vec![e];
    let mut seen = std::collections::HashSet::new();
    while let Some(id) = stack.pop() {
        if !seen.insert(id) {
            continue;
        }
        let node = dag.node(id);
        if let Node::Call(Func::Abs | Func::Min | Func::Max | Func::Clamp, _) = node {
            return false;
        }
        stack.extend(node.children_vec());
    }
    true
}

/// Most affine coordinates handled by vertices (2⁶ = 64 evaluations per box); beyond, they
/// are split like the others.
pub const MAX_AFFINE: usize = 6;

/// True when position `k` is not an error coordinate.
fn problem_role(errors: &[usize], k: usize) -> bool {
    !errors.contains(&k)
}

fn simplify_plain(dag: &mut Dag, e: ExprId) -> ExprId {
    // derivatives are only bounded, never rewritten under an assumption: no side condition
    // is granted, so each form equals its source wherever the source is defined
    let mut none = AssumeNothing;
    Simplifier::new(dag, &mut none).simplify(dag, e)
}

impl Compiled {
    /// Compiles a goal over the problem's coordinates. Errors name a symbol of the goal that
    /// is not a coordinate of the domain.
    pub fn new(problem: &mut Problem, goal: Goal) -> Result<Compiled, String> {
        let mut dims = problem
            .coordinates_of(goal.expr)
            .map_err(|s| format!("`{s}` is not a coordinate of the proof domain"))?;
        if let Some(r) = goal.region {
            let more = problem
                .coordinates_of(r)
                .map_err(|s| format!("`{s}` is not a coordinate of the proof domain"))?;
            for d in more {
                if !dims.contains(&d) {
                    dims.push(d);
                }
            }
            dims.sort_unstable();
        }
        let exempt = match (&goal.exempt, goal.origin) {
            (_, false) => Vec::new(),
            (Some(e), true) => e.clone(),
            (None, true) => problem.errors(),
        };
        if goal.origin {
            for &e in &exempt {
                if !dims.contains(&e) {
                    dims.push(e);
                }
            }
            dims.sort_unstable();
        }
        let dims = problem.close_over_constraints(&dims);
        let names: Vec<String> = dims
            .iter()
            .map(|&i| problem.variables[i].name.clone())
            .collect();
        let name_refs: Vec<&str> = names.iter().map(String::as_str).collect();
        // the error coordinates: those exempt at zero for a Lyapunov goal, else every error
        // coordinate among the goal's (where sampling looks near zero)
        let errors: Vec<usize> = (0..dims.len())
            .filter(|&k| {
                if goal.origin {
                    exempt.contains(&dims[k])
                } else {
                    matches!(
                        problem.variables[dims[k]].role,
                        Role::Error | Role::MemoryError
                    )
                }
            })
            .collect();
        let dag = &mut problem.dag;
        let f = goal.expr;
        let grads: Vec<ExprId> = names
            .iter()
            .map(|n| {
                let d = derivative(dag, f, n);
                simplify_plain(dag, d)
            })
            .collect();
        let mut affine = Vec::new();
        for (k, n) in names.iter().enumerate() {
            if affine.len() < MAX_AFFINE && problem_role(&errors, k) && dag.symbols(f).contains(n) {
                let d2 = derivative(dag, grads[k], n);
                let d2 = simplify_plain(dag, d2);
                if dag.is_zero(d2) {
                    affine.push(k);
                }
            }
        }
        let mut roots = vec![f];
        roots.extend(&grads);
        let grad = Tape::compile(dag, &roots, &name_refs)?;
        let value = Tape::compile(dag, &[f], &name_refs)?;
        let mut origin_closable = false;
        let mut hessian = None;
        // the hull of a box and the origin stays in the domain only if the declared error
        // box holds zero error
        let zero_in_domain = errors.iter().all(|&k| {
            let v = &problem.variables[dims[k]];
            v.lo <= 0.0 && 0.0 <= v.hi
        });
        let dag = &mut problem.dag;
        if goal.origin && zero_in_domain && smooth(dag, f) && !errors.is_empty() {
            let zero = dag.int(0);
            let mut at_zero: HashMap<String, ExprId> =
                errors.iter().map(|&k| (names[k].clone(), zero)).collect();
            // a coordinate whose whole range is one double (a set-point's zero rate) takes
            // that value in every box: f and its gradient need vanish only there
            for (k, &d) in dims.iter().enumerate() {
                let v = &problem.variables[d];
                if !errors.contains(&k) && v.lo == v.hi {
                    if let Some(r) = lawsmith_expr::BigRational::from_float(v.lo) {
                        at_zero.insert(names[k].clone(), dag.num(r));
                    }
                }
            }
            let vanishes = |dag: &mut Dag, e: ExprId| {
                let s = dag.substitute(e, &at_zero);
                let s = simplify_plain(dag, s);
                dag.is_zero(s)
            };
            if vanishes(dag, f) && errors.iter().all(|&k| vanishes(dag, grads[k])) {
                let mut entries = Vec::new();
                for (a, &i) in errors.iter().enumerate() {
                    for &j in &errors[a..] {
                        let d = derivative(dag, grads[i], &names[j]);
                        entries.push(simplify_plain(dag, d));
                    }
                }
                hessian = Some(Tape::compile(dag, &entries, &name_refs)?);
                origin_closable = true;
            }
        }
        let mut constraints = Vec::new();
        for (ci, c) in problem.constraints.iter().enumerate() {
            let cv = problem.coordinates_of(c.g).unwrap_or_default();
            if !cv.is_empty() && cv.iter().all(|v| dims.contains(v)) {
                constraints.push((
                    Tape::compile(&problem.dag, &[c.g], &name_refs)?,
                    c.strict,
                    ci,
                ));
            }
        }
        let region = match goal.region {
            Some(r) => {
                let dag = &mut problem.dag;
                let mut roots = vec![r];
                for n in &names {
                    let d = derivative(dag, r, n);
                    roots.push(simplify_plain(dag, d));
                }
                Some((
                    Tape::compile(dag, &roots, &name_refs)?,
                    Tape::compile(dag, &[r], &name_refs)?,
                ))
            }
            None => None,
        };
        let inner = dims.iter().map(|&d| problem.variables[d].inner()).collect();
        Ok(Compiled {
            text: to_text(&problem.dag, f),
            region_text: goal.region.map(|r| to_text(&problem.dag, r)),
            level: 0.0,
            inner,
            region,
            goal,
            dims,
            names,
            errors,
            origin_closable,
            affine,
            value,
            grad,
            hessian,
            constraints,
            unclamped: None,
        })
    }

    /// Lets boxes where every command is within its limits rest on the claim's proof (see
    /// [`Unclamped`]): `commands` with their f64 ends inside the exact limits, `exempt` the
    /// problem coordinates of the claim's exempt errors. False (and nothing set) when a
    /// command reads a coordinate the goal does not have.
    pub(crate) fn set_unclamped(
        &mut self,
        problem: &Problem,
        commands: &[(ExprId, (f64, f64))],
        exempt: &[usize],
    ) -> Result<bool, String> {
        for (e, _) in commands {
            let used = problem.coordinates_of(*e).unwrap_or_default();
            if !used.iter().all(|d| self.dims.contains(d)) {
                return Ok(false);
            }
        }
        let names: Vec<&str> = self.names.iter().map(String::as_str).collect();
        let roots: Vec<ExprId> = commands.iter().map(|(e, _)| *e).collect();
        self.unclamped = Some(Unclamped {
            commands: Tape::compile(&problem.dag, &roots, &names)?,
            limits: commands.iter().map(|(_, l)| *l).collect(),
            exempt: (0..self.dims.len())
                .filter(|k| exempt.contains(&self.dims[*k]))
                .collect(),
        });
        Ok(true)
    }

    /// True when boxes may rest on the claim's proof.
    pub fn has_unclamped(&self) -> bool {
        self.unclamped.is_some()
    }

    /// True when a box rests on the claim's proof: each command's enclosure within its
    /// limits, and one exempt error away from zero.
    pub fn unclamped_on(&self, bx: &[Interval], s: &mut Scratch) -> bool {
        let Some(u) = self.unclamped.as_ref() else {
            return false;
        };
        if u.exempt.iter().all(|&k| bx[k].contains(0.0)) {
            return false;
        }
        let mut out = vec![Interval::point(0.0); u.limits.len()];
        u.commands.run(bx, &mut s.iv, &mut out);
        out.iter()
            .zip(&u.limits)
            .all(|(c, (lo, hi))| c.lo() >= *lo && c.hi() <= *hi)
    }

    /// Number of search dimensions.
    pub fn len(&self) -> usize {
        self.dims.len()
    }

    /// True for a goal over no coordinate (a constant).
    pub fn is_empty(&self) -> bool {
        self.dims.is_empty()
    }

    /// Size of the value tape (instructions), for reports and benchmarks.
    pub fn tape_len(&self) -> usize {
        self.value.len()
    }

    /// Enclosure of `f` over a box, tightened where `f` is monotone, and the gradient
    /// enclosure over the box (the search uses it to choose a split).
    ///
    /// First the natural interval extension intersected with the centered (mean-value) form
    /// `f(c) + Σ ∂f/∂xₖ(X)·(Xₖ − cₖ)`. Then, for every coordinate along which the gradient
    /// has one sign over the box, `f` takes its maximum on the face where that coordinate is at
    /// its increasing end (and its minimum on the opposite face): moving a point there one
    /// coordinate at a time never decreases `f`, since the sign holds on the whole box. The
    /// upper bound is recomputed on that thinner face box (the lower on the other) and the
    /// tighter of the two kept. Which sides are needed depends on the test.
    pub fn enclose(&self, bx: &[Interval], s: &mut Scratch) -> (Interval, Vec<Interval>) {
        let vertices = self.vertices(bx);
        if vertices.len() <= 1 {
            return self.enclose_monotone(bx, s);
        }
        // f is affine in each of these coordinates, so over their sub-box it lies between its
        // values at the vertices (multilinear interpolation has non-negative weights)
        let (whole, grad) = self.centered(bx, s);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in &vertices {
            let (f, _) = self.enclose_monotone(v, s);
            if f.is_empty() {
                return (whole, grad);
            }
            lo = lo.min(f.lo());
            hi = hi.max(f.hi());
        }
        let at_vertices = Interval::new(lo, hi);
        (whole.intersect(&at_vertices), grad)
    }

    /// The point `p` with its affine coordinates moved to the vertex of `bx` where the test is
    /// closest to failing (f64 evaluations): where a box's worst case lies, since `f` is
    /// multilinear in them. None when no affine coordinate has width.
    pub fn worst_vertex(&self, p: &[f64], bx: &[Interval], s: &mut Scratch) -> Option<Vec<f64>> {
        let free: Vec<usize> = self
            .affine
            .iter()
            .copied()
            .filter(|&k| bx[k].width() > 0.0)
            .collect();
        if free.is_empty() {
            return None;
        }
        let mut x = p.to_vec();
        let mut best: Option<(f64, u64)> = None;
        for mask in 0..1u64 << free.len() {
            for (bit, &k) in free.iter().enumerate() {
                x[k] = if mask & (1 << bit) != 0 {
                    bx[k].hi()
                } else {
                    bx[k].lo()
                };
            }
            let slack = self.goal.test.slack(self.value(&x, s));
            if slack.is_finite() && best.is_none_or(|(b, _)| slack < b) {
                best = Some((slack, mask));
            }
        }
        let (_, mask) = best?;
        for (bit, &k) in free.iter().enumerate() {
            x[k] = if mask & (1 << bit) != 0 {
                bx[k].hi()
            } else {
                bx[k].lo()
            };
        }
        Some(x)
    }

    /// The boxes with every affine coordinate of non-zero width at one end of its interval
    /// (just `bx` when there is none).
    fn vertices(&self, bx: &[Interval]) -> Vec<Vec<Interval>> {
        let free: Vec<usize> = self
            .affine
            .iter()
            .copied()
            .filter(|&k| bx[k].width() > 0.0)
            .collect();
        (0..1usize << free.len())
            .map(|mask| {
                let mut b = bx.to_vec();
                for (bit, &k) in free.iter().enumerate() {
                    let x = if mask & (1 << bit) != 0 {
                        bx[k].hi()
                    } else {
                        bx[k].lo()
                    };
                    b[k] = Interval::point(x);
                }
                b
            })
            .collect()
    }

    fn enclose_monotone(&self, bx: &[Interval], s: &mut Scratch) -> (Interval, Vec<Interval>) {
        let (f, grad) = self.centered(bx, s);
        if f.is_empty() || grad.iter().any(|g| !g.is_finite()) {
            return (f, grad);
        }
        let mono: Vec<(usize, bool)> = (0..bx.len())
            .filter(|&k| bx[k].width() > 0.0)
            .filter_map(|k| {
                if grad[k].lo() >= 0.0 {
                    Some((k, true))
                } else if grad[k].hi() <= 0.0 {
                    Some((k, false))
                } else {
                    None
                }
            })
            .collect();
        if mono.is_empty() {
            return (f, grad);
        }
        let face = |upper: bool| {
            let mut b = bx.to_vec();
            for &(k, increasing) in &mono {
                let at_hi = increasing == upper;
                let x = if at_hi { bx[k].hi() } else { bx[k].lo() };
                b[k] = Interval::point(x);
            }
            b
        };
        let need_lower = !matches!(self.goal.test, Test::Negative { .. });
        let mut hi = f.hi();
        let mut lo = f.lo();
        let (fu, _) = self.centered(&face(true), s);
        if !fu.is_empty() {
            hi = hi.min(fu.hi());
        }
        if need_lower {
            let (fl, _) = self.centered(&face(false), s);
            if !fl.is_empty() {
                lo = lo.max(fl.lo());
            }
        }
        if lo <= hi {
            (Interval::new(lo, hi), grad)
        } else {
            (f, grad)
        }
    }

    /// The natural extension intersected with the centered form, and the gradient.
    fn centered(&self, bx: &[Interval], s: &mut Scratch) -> (Interval, Vec<Interval>) {
        let n = self.dims.len();
        s.out.clear();
        s.out.resize(n + 1, Interval::point(0.0));
        self.grad.run(bx, &mut s.iv, &mut s.out);
        let natural = s.out[0];
        let grad: Vec<Interval> = s.out[1..].to_vec();
        if natural.is_empty() || grad.iter().any(|g| !g.is_finite()) {
            return (natural, grad);
        }
        s.point.clear();
        s.point.extend(bx.iter().map(|x| Interval::point(x.mid())));
        let mut fc = [Interval::point(0.0)];
        self.value.run(&s.point, &mut s.iv, &mut fc);
        let centered = mean_value(fc[0], &grad, bx);
        if centered.is_empty() || !centered.is_finite() {
            return (natural, grad);
        }
        (natural.intersect(&centered), grad)
    }

    /// Rigorous enclosure of `f` at a point.
    pub fn at_point(&self, x: &[f64], s: &mut Scratch) -> Interval {
        s.point.clear();
        s.point.extend(x.iter().map(|&v| Interval::point(v)));
        let mut out = [Interval::point(0.0)];
        self.value.run(&s.point, &mut s.iv, &mut out);
        out[0]
    }

    /// `f` in f64 at a point.
    pub fn value(&self, x: &[f64], s: &mut Scratch) -> f64 {
        let mut out = [0.0];
        self.value.eval_into(x, &mut s.f, &mut out);
        out[0]
    }

    /// How a box stands with respect to the constraints over these coordinates.
    pub fn feasibility(&self, bx: &[Interval], s: &mut Scratch) -> Feasibility {
        let mut all = true;
        for (tape, strict, index) in &self.constraints {
            let mut out = [Interval::point(0.0)];
            tape.run(bx, &mut s.iv, &mut out);
            let g = out[0];
            let surely_false = if *strict { g.lo() >= 0.0 } else { g.lo() > 0.0 };
            if surely_false {
                return Feasibility::None(*index);
            }
            let surely_true = if *strict { g.hi() < 0.0 } else { g.hi() <= 0.0 };
            all &= surely_true;
        }
        if let Some(v) = self.region_enclosure(bx, s) {
            if v.hi() < self.level {
                return Feasibility::Below(v);
            }
            if all && v.lo() < self.level {
                return Feasibility::Straddles;
            }
        }
        if all {
            Feasibility::All
        } else {
            Feasibility::Some
        }
    }

    /// The point with each coordinate clamped into its declared range: the nearest point a
    /// counterexample may be (None when a declared range holds no f64).
    pub fn declared_point(&self, p: &[f64]) -> Option<Vec<f64>> {
        let inner = self.inner.as_ref()?;
        Some(
            p.iter()
                .zip(inner)
                .map(|(&x, &(lo, hi))| x.clamp(lo, hi))
                .collect(),
        )
    }

    /// True when every coordinate of the point lies in its declared range.
    pub fn is_declared(&self, p: &[f64]) -> bool {
        self.declared_point(p).is_some_and(|q| q == p)
    }

    /// True when the goal is restricted to a region (a positive level is set).
    pub fn restricted(&self) -> bool {
        self.region.is_some() && self.level > 0.0
    }

    /// Enclosure of the region's expression over a box (natural extension intersected with
    /// the centered form), while the goal is restricted.
    pub fn region_enclosure(&self, bx: &[Interval], s: &mut Scratch) -> Option<Interval> {
        if !self.restricted() {
            return None;
        }
        let (tape, _) = self.region.as_ref()?;
        let n = self.dims.len();
        s.out.clear();
        s.out.resize(n + 1, Interval::point(0.0));
        tape.run(bx, &mut s.iv, &mut s.out);
        let natural = s.out[0];
        let grad: Vec<Interval> = s.out[1..].to_vec();
        if natural.is_empty() || grad.iter().any(|g| !g.is_finite()) {
            return Some(natural);
        }
        s.point.clear();
        s.point.extend(bx.iter().map(|x| Interval::point(x.mid())));
        let mut at_mid = vec![Interval::point(0.0); n + 1];
        tape.run(&s.point, &mut s.iv, &mut at_mid);
        let centered = mean_value(at_mid[0], &grad, bx);
        if centered.is_empty() || !centered.is_finite() {
            return Some(natural);
        }
        Some(natural.intersect(&centered))
    }

    /// The region's expression in f64 at a point (None when the goal has no region).
    pub fn region_value(&self, x: &[f64], s: &mut Scratch) -> Option<f64> {
        let (_, tape) = self.region.as_ref()?;
        let mut out = [0.0];
        tape.eval_into(x, &mut s.f, &mut out);
        Some(out[0])
    }

    /// Do the constraints provably hold at this point?
    pub fn feasible_point(&self, x: &[f64], s: &mut Scratch) -> bool {
        let bx: Vec<Interval> = x.iter().map(|&v| Interval::point(v)).collect();
        self.feasibility(&bx, s) == Feasibility::All
    }

    /// `f` in f64 at many points (batched evaluation), and whether each meets the constraints
    /// in f64 (a pre-filter; a counterexample is confirmed with intervals).
    /// `cols` holds `lanes` points column by column (coordinate `k` of point `j` at
    /// `cols[k * lanes + j]`).
    pub fn values_columns(
        &self,
        cols: &[f64],
        lanes: usize,
        s: &mut Scratch,
        values: &mut Vec<f64>,
        feasible: &mut Vec<bool>,
    ) {
        values.clear();
        values.resize(lanes, 0.0);
        self.value.eval_batch(cols, lanes, &mut s.batch, values);
        feasible.clear();
        feasible.resize(lanes, true);
        for (tape, strict, _) in &self.constraints {
            s.out_batch.clear();
            s.out_batch.resize(lanes, 0.0);
            tape.eval_batch(cols, lanes, &mut s.batch, &mut s.out_batch);
            for (ok, g) in feasible.iter_mut().zip(&s.out_batch) {
                *ok &= if *strict { *g < 0.0 } else { *g <= 0.0 };
            }
        }
        if let (true, Some((_, tape))) = (self.restricted(), &self.region) {
            s.out_batch.clear();
            s.out_batch.resize(lanes, 0.0);
            tape.eval_batch(cols, lanes, &mut s.batch, &mut s.out_batch);
            for (ok, v) in feasible.iter_mut().zip(&s.out_batch) {
                *ok &= *v >= self.level;
            }
        }
    }

    /// Does the f64 point meet the constraints (cheap pre-filter for sampling)?
    pub fn feasible_f64(&self, x: &[f64], s: &mut Scratch) -> bool {
        let constraints = self.constraints.iter().all(|(tape, strict, _)| {
            let mut out = [0.0];
            tape.eval_into(x, &mut s.f, &mut out);
            if *strict {
                out[0] < 0.0
            } else {
                out[0] <= 0.0
            }
        });
        constraints
            && (!self.restricted() || self.region_value(x, s).is_some_and(|v| v >= self.level))
    }

    /// True when every error coordinate of the box contains zero.
    pub fn holds_origin(&self, bx: &[Interval]) -> bool {
        self.goal.origin && self.errors.iter().all(|&k| bx[k].contains(0.0))
    }

    /// True when the point has zero error (the exempt point of a Lyapunov goal).
    pub fn at_origin(&self, x: &[f64]) -> bool {
        self.goal.origin && self.errors.iter().all(|&k| x[k] == 0.0)
    }

    /// The interval Hessian of `f` in the errors over a box, row-major, when the origin is
    /// closable.
    pub fn hessian(&self, bx: &[Interval], s: &mut Scratch) -> Option<Vec<Interval>> {
        let tape = self.hessian.as_ref()?;
        let n = self.errors.len();
        let mut upper = vec![Interval::point(0.0); n * (n + 1) / 2];
        tape.run(bx, &mut s.iv, &mut upper);
        let mut h = vec![Interval::point(0.0); n * n];
        let mut k = 0;
        for i in 0..n {
            for j in i..n {
                h[i * n + j] = upper[k];
                h[j * n + i] = upper[k];
                k += 1;
            }
        }
        Some(h)
    }

    /// The box with each error interval stretched to include zero: it holds the segment from
    /// zero error to every point of `bx` (the other coordinates unchanged).
    pub fn hull_with_origin(&self, bx: &[Interval]) -> Vec<Interval> {
        let mut h = bx.to_vec();
        for &k in &self.errors {
            h[k] = Interval::new(bx[k].lo().min(0.0), bx[k].hi().max(0.0));
        }
        h
    }

    /// Closes a box with Taylor's theorem: `f` and `∇ₑf` vanish at zero error (checked
    /// symbolically), so `f(e) = ½·eᵀ·H(ξ)·e` with `ξ` on the segment from 0 to `e`, which lies
    /// in the hull of the box and the origin. If the interval Hessian over that hull is
    /// negative definite (semidefinite), `f < 0` (`≤ 0`) at every non-zero error of the box.
    /// The box need not hold the origin itself.
    ///
    /// The Hessian is affine in the affine coordinates too, so over their sub-box it is a
    /// convex combination of its values at the vertices; a convex combination of negative
    /// definite matrices is negative definite, so the test runs at each vertex.
    pub fn close_origin(&self, bx: &[Interval], s: &mut Scratch) -> Option<(Method, f64)> {
        if !self.origin_closable {
            return None;
        }
        let strict = matches!(self.goal.test, Test::Negative { strict: true });
        let passes = |v: f64| if strict { v < 0.0 } else { v <= 0.0 };
        let mut methods = vec![Method::Gershgorin];
        if self.errors.len() <= hessian::MAX_MINORS_SIZE {
            methods.insert(0, Method::Minors);
        }
        for m in methods {
            let v = self.origin_measure(m, bx, s);
            if passes(v) {
                return Some((m, v));
            }
        }
        None
    }

    /// Recomputes one Hessian test of [`Compiled::close_origin`]: the largest value of the
    /// test over the vertices of the affine coordinates (NaN where it cannot apply).
    pub fn origin_measure(&self, method: Method, bx: &[Interval], s: &mut Scratch) -> f64 {
        if !self.origin_closable {
            return f64::NAN;
        }
        let strict = matches!(self.goal.test, Test::Negative { strict: true });
        let mut worst = f64::NEG_INFINITY;
        for v in self.vertices(&self.hull_with_origin(bx)) {
            match self.hessian(&v, s) {
                Some(h) => {
                    let m = hessian::measure(method, &h, self.errors.len(), strict);
                    if m.is_nan() {
                        return f64::NAN;
                    }
                    worst = worst.max(m);
                }
                None => return f64::NAN,
            }
        }
        worst
    }

    /// Squared norm of the error of a point, each error scaled by the largest magnitude of
    /// its declared range (so a margin is comparable across units).
    pub fn scaled_error_norm2(&self, x: &[f64], scale: &[f64]) -> f64 {
        self.errors
            .iter()
            .map(|&k| {
                let v = x[k] / scale[k];
                v * v
            })
            .sum()
    }
}

/// The centered (mean-value) form: `f(mid) + Σ ∂f/∂x_k(box) · (x_k − mid_k)` over the box,
/// from the enclosure of `f` at the midpoint and of the gradient over the box.
fn mean_value(at_mid: Interval, grad: &[Interval], bx: &[Interval]) -> Interval {
    let mut centered = at_mid;
    for (g, x) in grad.iter().zip(bx) {
        if x.width() > 0.0 {
            let dx = x.add(&Interval::point(-x.mid()));
            centered = centered.add(&g.mul(&dx));
        }
    }
    centered
}

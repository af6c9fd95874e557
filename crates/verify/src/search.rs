//! Branch and bound: split the domain until every box is proved, or a box's point is a
//! counterexample, or the budget runs out.
//!
//! Each box is first checked against the gain constraints (a box where one surely fails is
//! dropped). Then `f` is bounded with the centered form; if the bound proves the test, the box
//! is a leaf. A box holding zero error is closed by the Hessian test when the goal allows it.
//! Otherwise the box's midpoint (and the midpoint with the errors that can be zero set to
//! zero) is tried as a counterexample, confirmed with point intervals; failing that, the box
//! is split in two.
//!
//! **Determinism:** boxes are taken from a stack in batches of fixed size, evaluated in
//! parallel, and the results applied in batch order, so the tree, the counts and the
//! certificate are the same on any number of threads. Only a time limit, when it is hit,
//! depends on the machine.

use crate::goal::{Compiled, Feasibility, Scratch, Test};
use crate::hessian::Method;
use crate::interval::Interval;
use crate::settings::Budget;
use rayon::prelude::*;
use std::time::Instant;

/// Why a box is proved.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Evidence {
    /// The enclosure of `f` over the box proves the test.
    Bound(Interval),
    /// The box holds zero error and the Hessian test passed with this value.
    Hessian(Method, f64),
    /// Gain constraint `i` fails everywhere on the box.
    Excluded(usize),
    /// The goal's region expression (V) is below the level on the whole box: this enclosure.
    BelowLevel(Interval),
    /// Every command lies within its limits on the box and the box holds no exempt zero of
    /// the claim: the claim's proof covers it ([`crate::goal::Unclamped`]).
    Unclamped,
}

/// A point where the goal provably fails.
#[derive(Clone, Debug)]
pub struct Counter {
    /// Coordinates over the goal's dims.
    pub point: Vec<f64>,
    /// `f` there in f64.
    pub value: f64,
    /// Rigorous enclosure of `f` there.
    pub enclosure: Interval,
    /// For a `≠ 0` goal refuted by a sign change: two feasible points, a few ulps apart, where
    /// `f` is provably positive and provably negative; `f` (continuous where the goal's own
    /// conditions hold) vanishes between them. `point` is their midpoint.
    pub bracket: Option<[Vec<f64>; 2]>,
}

/// How a search ended.
#[derive(Clone, Debug)]
pub enum Outcome {
    /// Every box is a leaf with evidence.
    Proven,
    /// A counterexample.
    Refuted(Counter),
    /// A budget ran out or a box could not be split further; the reason names the setting.
    Inconclusive(String),
}

/// The split tree of a finished proof: the shape in preorder (`dim` of a split, `-1` for a
/// leaf) and the leaves in the same order. Children of a split on `dim` are the lower and the
/// upper half of the box at `Interval::mid`.
#[derive(Clone, Debug, Default)]
pub struct Tree {
    /// Preorder shape.
    pub shape: Vec<i32>,
    /// Leaf boxes and their evidence, in preorder.
    pub leaves: Vec<(Vec<Interval>, Evidence)>,
}

/// What a search found.
#[derive(Clone, Debug)]
pub struct Report {
    /// The outcome.
    pub outcome: Outcome,
    /// Boxes evaluated.
    pub boxes: usize,
    /// Leaves proved by the bound.
    pub by_bound: usize,
    /// Leaves proved by the Hessian test.
    pub by_hessian: usize,
    /// Boxes dropped by a constraint (or lying below the level of an ultimate bound).
    pub excluded: usize,
    /// The proof tree (when proven).
    pub tree: Option<Tree>,
    /// For an inconclusive search: the open boxes with the largest bound of `f`.
    pub worst: Vec<(Vec<Interval>, f64)>,
    /// Wall time.
    pub seconds: f64,
}

enum State {
    Open(f64),
    Split(usize, u32, u32),
    Leaf(Evidence),
}

struct NodeRec {
    bx: Vec<Interval>,
    state: State,
}

enum Step {
    Leaf(Evidence),
    Counter(Counter),
    Split(usize, f64),
    Stuck(usize, f64),
}

/// Boxes evaluated in one parallel batch. Large enough to amortise the fork/join, small
/// enough that the search stays depth-first and the queue small.
const BATCH: usize = 256;

/// Below this share of its root width a coordinate is no longer split by smear.
const MIN_SHARE: f64 = 1e-9;

/// The scale of each dimension: its width in the root box (1 for a point range).
pub fn scales(root: &[Interval]) -> Vec<f64> {
    root.iter()
        .map(|x| {
            let w = x.width();
            if w > 0.0 && w.is_finite() {
                w
            } else {
                1.0
            }
        })
        .collect()
}

/// The midpoint of a box.
pub fn midpoint(bx: &[Interval]) -> Vec<f64> {
    bx.iter().map(Interval::mid).collect()
}

/// Splits a box in two at the midpoint of `dim`.
pub fn halves(bx: &[Interval], dim: usize) -> (Vec<Interval>, Vec<Interval>) {
    let m = bx[dim].mid();
    let mut lo = bx.to_vec();
    let mut hi = bx.to_vec();
    lo[dim] = Interval::new(bx[dim].lo(), m);
    hi[dim] = Interval::new(m, bx[dim].hi());
    (lo, hi)
}

/// Runs branch and bound for one compiled goal over `root`. `progress(boxes, open)` is called
/// after every batch.
pub fn search(
    goal: &Compiled,
    root: &[Interval],
    budget: &Budget,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Report {
    let start = Instant::now();
    let scale = scales(root);
    let mut nodes = vec![NodeRec {
        bx: root.to_vec(),
        state: State::Open(f64::INFINITY),
    }];
    let mut stack: Vec<u32> = vec![0];
    let mut report = Report {
        outcome: Outcome::Proven,
        boxes: 0,
        by_bound: 0,
        by_hessian: 0,
        excluded: 0,
        tree: None,
        worst: Vec::new(),
        seconds: 0.0,
    };
    while !stack.is_empty() {
        let over = if report.boxes >= budget.max_boxes {
            Some(format!(
                "box budget of {} reached (raise --max-boxes)",
                budget.max_boxes
            ))
        } else if start.elapsed() >= budget.time_limit {
            Some(format!(
                "time limit of {:.0} s reached (raise --time-limit)",
                budget.time_limit.as_secs_f64()
            ))
        } else if stack.len() > budget.max_queue {
            Some(format!(
                "queue of {} open boxes reached (raise --max-queue)",
                budget.max_queue
            ))
        } else {
            None
        };
        if let Some(reason) = over {
            report.worst = worst_open(&nodes, &stack);
            report.outcome = Outcome::Inconclusive(reason);
            break;
        }
        let take = BATCH.min(stack.len());
        let batch = stack.split_off(stack.len() - take);
        let steps: Vec<Step> = batch
            .par_iter()
            .map_init(Scratch::default, |s, &id| {
                step(goal, &nodes[id as usize].bx, &scale, s)
            })
            .collect();
        let mut finished = None;
        for (&id, st) in batch.iter().zip(steps) {
            report.boxes += 1;
            match st {
                Step::Leaf(ev) => {
                    match ev {
                        Evidence::Bound(_) => report.by_bound += 1,
                        Evidence::Hessian(..) => report.by_hessian += 1,
                        Evidence::Excluded(_) | Evidence::BelowLevel(_) | Evidence::Unclamped => {
                            report.excluded += 1
                        }
                    }
                    nodes[id as usize].state = State::Leaf(ev);
                }
                Step::Counter(c) => {
                    if finished.is_none() {
                        finished = Some(Outcome::Refuted(c));
                    }
                }
                Step::Stuck(dim, bound) => {
                    if finished.is_none() {
                        finished = Some(Outcome::Inconclusive(format!(
                            "a box became too narrow to split along `{}` without being decided",
                            goal.names.get(dim).map_or("-", String::as_str)
                        )));
                        report.worst = vec![(nodes[id as usize].bx.clone(), bound)];
                    }
                }
                Step::Split(dim, bound) => {
                    let (lo, hi) = halves(&nodes[id as usize].bx, dim);
                    let l = nodes.len() as u32;
                    nodes.push(NodeRec {
                        bx: lo,
                        state: State::Open(bound),
                    });
                    nodes.push(NodeRec {
                        bx: hi,
                        state: State::Open(bound),
                    });
                    let node = &mut nodes[id as usize];
                    node.state = State::Split(dim, l, l + 1);
                    node.bx = Vec::new();
                    // lower half on top: it is taken first
                    stack.push(l + 1);
                    stack.push(l);
                }
            }
        }
        progress(report.boxes, stack.len());
        if let Some(o) = finished {
            report.outcome = o;
            break;
        }
    }
    if matches!(report.outcome, Outcome::Proven) {
        report.tree = Some(flatten(&nodes));
    }
    report.seconds = start.elapsed().as_secs_f64();
    report
}

fn worst_open(nodes: &[NodeRec], open: &[u32]) -> Vec<(Vec<Interval>, f64)> {
    let mut v: Vec<(Vec<Interval>, f64)> = open
        .iter()
        .filter_map(|&i| match nodes[i as usize].state {
            State::Open(b) => Some((nodes[i as usize].bx.clone(), b)),
            _ => None,
        })
        .collect();
    v.sort_by(|a, b| b.1.total_cmp(&a.1));
    v.truncate(5);
    v
}

fn flatten(nodes: &[NodeRec]) -> Tree {
    let mut tree = Tree::default();
    let mut stack = vec![0u32];
    while let Some(i) = stack.pop() {
        let n = &nodes[i as usize];
        match n.state {
            State::Split(dim, l, r) => {
                tree.shape.push(dim as i32);
                stack.push(r);
                stack.push(l);
            }
            State::Leaf(ev) => {
                tree.shape.push(-1);
                tree.leaves.push((n.bx.clone(), ev));
            }
            State::Open(_) => unreachable!("a proven tree has no open box"),
        }
    }
    tree
}

/// The points of a box tried as counterexamples: its midpoint, and for a Lyapunov goal the
/// midpoint with the errors whose range holds zero set to zero (together and one at a time),
/// since a semidefinite `V̇` vanishes on such coordinate planes.
pub fn candidates(goal: &Compiled, bx: &[Interval]) -> Vec<Vec<f64>> {
    let mid = midpoint(bx);
    let mut out = vec![mid.clone()];
    if goal.goal.origin {
        let zeroable: Vec<usize> = goal
            .errors
            .iter()
            .copied()
            .filter(|&k| bx[k].contains(0.0) && mid[k] != 0.0)
            .collect();
        if !zeroable.is_empty() {
            let mut all = mid.clone();
            for &k in &zeroable {
                all[k] = 0.0;
            }
            out.push(all);
            if zeroable.len() > 1 {
                for &k in &zeroable {
                    let mut one = mid.clone();
                    one[k] = 0.0;
                    out.push(one);
                }
            }
        }
    }
    out.retain(|p| !goal.at_origin(p));
    out
}

/// Confirms a point, moved into the declared ranges, as a counterexample: constraints
/// provably met, `f` provably failing.
pub fn confirm(goal: &Compiled, p: &[f64], s: &mut Scratch) -> Option<Counter> {
    let p = &goal.declared_point(p)?[..];
    if goal.at_origin(p) {
        return None;
    }
    let v = goal.value(p, s);
    if !goal.goal.test.suspects(v) || !goal.feasible_point(p, s) {
        return None;
    }
    let enc = goal.at_point(p, s);
    goal.goal.test.refutes(enc).then(|| Counter {
        point: p.to_vec(),
        value: v,
        enclosure: enc,
        bracket: None,
    })
}

/// The sign of `f` at a feasible point of the declared ranges, when an enclosure proves it
/// (+1, −1), else 0.
pub fn proved_sign(goal: &Compiled, p: &[f64], s: &mut Scratch) -> i32 {
    if !goal.is_declared(p) || !goal.feasible_point(p, s) {
        return 0;
    }
    let e = goal.at_point(p, s);
    if e.is_empty() {
        0
    } else if e.lo() > 0.0 {
        1
    } else if e.hi() < 0.0 {
        -1
    } else {
        0
    }
}

/// Bisects the segment between a point where `f > 0` and one where `f < 0` (both proved) down
/// to a few ulps, keeping ends of proved opposite signs and feasible: a sign change of a
/// continuous function, located.
pub fn bracket_zero(goal: &Compiled, pos: &[f64], neg: &[f64], s: &mut Scratch) -> Option<Counter> {
    let (pos, neg) = (
        &goal.declared_point(pos)?[..],
        &goal.declared_point(neg)?[..],
    );
    if proved_sign(goal, pos, s) != 1 || proved_sign(goal, neg, s) != -1 {
        return None;
    }
    let (mut a, mut b) = (pos.to_vec(), neg.to_vec());
    for _ in 0..200 {
        let m: Vec<f64> = a.iter().zip(&b).map(|(x, y)| 0.5 * x + 0.5 * y).collect();
        if m == a || m == b {
            break;
        }
        match proved_sign(goal, &m, s) {
            1 => a = m,
            -1 => b = m,
            _ => break,
        }
    }
    let mid: Vec<f64> = a.iter().zip(&b).map(|(x, y)| 0.5 * x + 0.5 * y).collect();
    Some(Counter {
        value: goal.value(&mid, s),
        enclosure: goal.at_point(&mid, s),
        point: mid,
        bracket: Some([a, b]),
    })
}

/// Re-confirms a counterexample: a refuting point, or a bracket of a sign change.
pub fn reconfirm(goal: &Compiled, cx: &Counter, s: &mut Scratch) -> bool {
    match &cx.bracket {
        Some([a, b]) => {
            goal.goal.test == Test::NonZero
                && a.len() == goal.len()
                && b.len() == goal.len()
                && proved_sign(goal, a, s) == 1
                && proved_sign(goal, b, s) == -1
        }
        None => goal.is_declared(&cx.point) && confirm(goal, &cx.point, s).is_some(),
    }
}

fn step(goal: &Compiled, bx: &[Interval], scale: &[f64], s: &mut Scratch) -> Step {
    let feas = goal.feasibility(bx, s);
    match feas {
        Feasibility::None(i) => return Step::Leaf(Evidence::Excluded(i)),
        Feasibility::Below(v) => return Step::Leaf(Evidence::BelowLevel(v)),
        _ => {}
    }
    if goal.unclamped_on(bx, s) {
        return Step::Leaf(Evidence::Unclamped);
    }
    let (f, grad) = goal.enclose(bx, s);
    let test = goal.goal.test;
    let origin = goal.holds_origin(bx);
    let exempt = origin && matches!(test, Test::Negative { strict: true });
    if !exempt && test.proves(f) {
        return Step::Leaf(Evidence::Bound(f));
    }
    if let Some((m, v)) = goal.close_origin(bx, s) {
        return Step::Leaf(Evidence::Hessian(m, v));
    }
    for p in candidates(goal, bx) {
        if let Some(c) = confirm(goal, &p, s) {
            return Step::Counter(c);
        }
        // affine coordinates are never split: their worst case is at a vertex
        if let Some(v) = goal.worst_vertex(&p, bx, s) {
            if let Some(c) = confirm(goal, &v, s) {
                return Step::Counter(c);
            }
        }
    }
    let rank = match test {
        Test::Negative { .. } => f.hi(),
        Test::Within { lo, hi } => (lo - f.lo()).max(f.hi() - hi),
        Test::NonZero => f.lo().abs().min(f.hi().abs()),
    };
    if bx.is_empty() {
        return Step::Stuck(0, rank);
    }
    let dim = choose(
        bx,
        &grad,
        scale,
        &goal.affine,
        origin,
        feas == Feasibility::Some,
    );
    let m = bx[dim].mid();
    if !(m > bx[dim].lo() && m < bx[dim].hi()) {
        return Step::Stuck(dim, rank);
    }
    Step::Split(dim, rank)
}

/// The dimension to split: the largest smear `|∂f/∂xₖ|·wₖ` (the share of the bound's width
/// due to that coordinate), or the widest scaled dimension when the gradient is no guide (a
/// box holding the origin, an undecided constraint, an unbounded gradient). Coordinates the
/// goal is affine in are bounded at vertices, so splitting them helps only a constraint or
/// the Hessian: they are chosen by width only then.
fn choose(
    bx: &[Interval],
    grad: &[Interval],
    scale: &[f64],
    affine: &[usize],
    by_width: bool,
    constrained: bool,
) -> usize {
    let widest = |skip_affine: bool| {
        (0..bx.len())
            .filter(|k| !(skip_affine && affine.contains(k)))
            .max_by(|&a, &b| (bx[a].width() / scale[a]).total_cmp(&(bx[b].width() / scale[b])))
            .unwrap_or(0)
    };
    if constrained {
        // a constraint is decided by splitting its own coordinates, affine or not
        return widest(false);
    }
    if by_width {
        // affine coordinates are bounded at their vertices, never by splitting
        let k = widest(true);
        return if bx[k].width() > MIN_SHARE * scale[k] && !affine.contains(&k) {
            k
        } else {
            widest(false)
        };
    }
    if grad.iter().any(|g| !g.is_finite()) {
        return widest(true);
    }
    let smear = |k: usize| {
        // a coordinate already split to a negligible share of its range cannot help any more
        if affine.contains(&k) || bx[k].width() < MIN_SHARE * scale[k] {
            0.0
        } else {
            grad[k].mag() * bx[k].width()
        }
    };
    let best = (0..bx.len())
        .max_by(|&a, &b| smear(a).total_cmp(&smear(b)))
        .unwrap_or(0);
    if smear(best) > 0.0 {
        best
    } else {
        widest(false)
    }
}

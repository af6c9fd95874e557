//! Random expressions for property tests and fuzzing (deterministic, seedable).

use crate::dag::{Dag, ExprId, Func};
use crate::lower::parse_expr;

/// A small deterministic generator (splitmix64), so failures reproduce from the seed.
pub struct Rng(pub u64);

impl Rng {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        // splitmix64
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in `0..n`.
    pub fn below(&mut self, n: u64) -> u64 {
        self.next_u64() % n
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// The variables random expressions use.
pub const VARS: [&str; 4] = ["a", "b", "x", "y"];

/// What kinds of node a random expression may contain.
#[derive(Clone, Copy)]
pub struct Gen {
    /// Only differentiable functions (no `abs`, `max`).
    pub smooth_only: bool,
    /// Only `+ - * /` and integer powers.
    pub rational_only: bool,
    /// Every function of the formula language, with arguments that often (not always) stay
    /// inside their domains; for interval-soundness tests.
    pub all_functions: bool,
}

/// A random expression of at most `depth` levels over [`VARS`]. Denominators are kept away
/// from zero (`1 + u²`) so values stay finite on most points.
pub fn random_expr(dag: &mut Dag, rng: &mut Rng, depth: u32, g: Gen) -> ExprId {
    if depth == 0 || rng.below(4) == 0 {
        return if rng.below(3) == 0 {
            let choices = ["2", "3", "0.5", "1.25", "7", "9.80665"];
            parse_expr(dag, choices[rng.below(choices.len() as u64) as usize]).unwrap()
        } else {
            dag.sym(VARS[rng.below(VARS.len() as u64) as usize])
        };
    }
    let kinds = if g.rational_only { 6 } else { 8 };
    match rng.below(kinds) {
        // sums are drawn twice as often as products
        k @ 0..=2 => {
            let n = 2 + rng.below(if k == 2 { 2 } else { 3 }) as usize;
            let xs = (0..n)
                .map(|_| random_expr(dag, rng, depth - 1, g))
                .collect();
            if k == 2 {
                dag.mul(xs)
            } else {
                dag.add(xs)
            }
        }
        3 => {
            let a = random_expr(dag, rng, depth - 1, g);
            dag.neg(a)
        }
        4 => {
            // keep denominators away from zero: 1 + u²
            let a = random_expr(dag, rng, depth - 1, g);
            // (the term inside the square is kept small: laws have modest denominators, and
            // nested random ones produce degree-20 polynomials no control law has)
            let u = random_expr(dag, rng, depth.min(2) - 1, g);
            let one = dag.int(1);
            let u2 = dag.powi(u, 2);
            let den = dag.add(vec![one, u2]);
            dag.div(a, den)
        }
        5 => {
            let a = random_expr(dag, rng, depth - 1, g);
            let n = rng.below(3) as i64;
            dag.powi(a, n)
        }
        _ if g.all_functions => {
            let f = Func::ALL[rng.below(Func::ALL.len() as u64) as usize];
            let args: Vec<ExprId> = (0..f.arity())
                .map(|_| random_expr(dag, rng, depth - 1, g))
                .collect();
            if rng.below(3) == 0 && f.arity() == 2 {
                // a real (non-integer) power, base kept positive
                let one = dag.int(1);
                let sq = dag.powi(args[0], 2);
                let base = dag.add(vec![one, sq]);
                let half = parse_expr(dag, "0.5").expect("literal");
                let e = dag.mul(vec![half, args[1]]);
                let ten = dag.int(10);
                let e = dag.div(e, ten);
                return dag.pow(base, e);
            }
            dag.call(f, args)
        }
        _ => {
            let fs: &[Func] = if g.smooth_only {
                &[Func::Sin, Func::Cos, Func::Atan, Func::Exp]
            } else {
                &[
                    Func::Sin,
                    Func::Cos,
                    Func::Atan,
                    Func::Exp,
                    Func::Abs,
                    Func::Max,
                ]
            };
            let f = fs[rng.below(fs.len() as u64) as usize];
            let a = random_expr(dag, rng, depth - 1, g);
            // exp of a large argument overflows; damp it
            let a = if f == Func::Exp {
                let ten = dag.int(10);
                dag.div(a, ten)
            } else {
                a
            };
            if f.arity() == 2 {
                let b = random_expr(dag, rng, depth - 1, g);
                dag.call(f, vec![a, b])
            } else {
                dag.call(f, vec![a])
            }
        }
    }
}

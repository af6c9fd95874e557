//! Translation validation of the generated code.
//!
//! For every spec in `specs/`: the committed generated Rust (this crate) and the generated C
//! (compiled here with `-std=c99 -Wall -Wextra -Wpedantic -Werror -Wconversion -Wshadow`, by
//! gcc and by clang where installed) are run on 100,000 random points of the proved envelope
//! and 20,000 points outside it or with NaN inputs, and compared with lawsmith's reference
//! interpreter (`Controller::step`, `Controller::update`):
//!
//! - Rust must equal the interpreter bit for bit (same operations, same `libm`);
//! - C must agree to 1e-12 relative (its `<math.h>` may differ from `libm` in the last ulp);
//! - limit bits and the domain flag must be identical;
//! - outside the envelope the domain flag is raised and no output is NaN.
//!
//! A law with controller states is validated step by step (random states, some broken, and
//! random `dt`, some not positive or not finite) and over 40 sequences of 250 steps each,
//! the states carried from one step to the next from the values `start_memory` sets, by the
//! interpreter, the Rust and the C alike.
//!
//! Independently of the code generator, the commands are also compared with the spec's laws
//! in the prover's canonical (expanded) form, evaluated by the expression engine: the two
//! are the same rational functions, so they may differ only by rounding.

mod common;

use common::*;
use lawsmith_codegen::{Controller, Float, Lang, Provenance};
use lawsmith_expr::random::Rng;
use lawsmith_expr::Tape;
use std::process::Command;

const INSIDE: usize = 100_000;
const OUTSIDE: usize = 20_000;

/// A point with some inputs or gains outside their ranges, infinite, or NaN.
fn outside(c: &Controller, rng: &mut Rng) -> (Vec<f64>, Vec<f64>) {
    let (mut x, mut g) = inside(c, rng);
    let n = x.len() + g.len();
    let hits = 1 + rng.below(3) as usize;
    for _ in 0..hits {
        let i = rng.below(n as u64) as usize;
        let v = match rng.below(4) {
            0 => f64::NAN,
            1 => f64::INFINITY * if rng.below(2) == 0 { 1.0 } else { -1.0 },
            _ => (rng.unit() - 0.5) * 1e4,
        };
        if i < x.len() {
            x[i] = v;
        } else {
            g[i - x.len()] = v;
        }
    }
    (x, g)
}

fn rel(a: f64, b: f64) -> f64 {
    if a == b {
        return 0.0;
    }
    (a - b).abs() / a.abs().max(b.abs()).max(1e-300)
}

/// A harness output row against the interpreter's step: the flags exactly; returns the worst
/// difference of the commands (relative) and the controller states (as a share of their
/// limits' width).
fn compare_row(
    c: &Controller,
    row: &[f64],
    want: &lawsmith_codegen::StepOutput,
    memory: &[f64],
    at: &str,
) -> f64 {
    let na = c.actuators.len();
    let mut worst: f64 = 0.0;
    for ((a, b), act) in row.iter().zip(&want.commands).zip(&c.actuators) {
        // relative, but a command within a thousandth of its range of zero (where the law's
        // terms cancel) against that thousandth
        let floor = 1e-3 * (act.limits.1 - act.limits.0);
        worst = worst.max((a - b).abs() / a.abs().max(b.abs()).max(floor));
    }
    assert_eq!(row[na] as u32, want.limits, "{at}: limit bits");
    assert_eq!(row[na + 1] != 0.0, want.domain, "{at}: domain flag");
    assert_eq!(row[na + 2] as u32, want.status, "{at}: status bits");
    if !c.memory.is_empty() {
        assert_eq!(
            row[na + 3] as u32,
            want.memory_limits,
            "{at}: memory limit bits"
        );
        // a state near zero after cancelling terms: measured against its limits' width
        for ((a, b), m) in row[na + 4..].iter().zip(memory).zip(&c.memory) {
            worst = worst.max((a - b).abs() / (m.limits.1 - m.limits.0));
        }
    }
    worst
}

struct Case {
    inputs: Vec<f64>,
    gains: Vec<f64>,
    /// The controller states the step starts from (empty without).
    memory: Vec<f64>,
    dt: f64,
    inside: bool,
}

/// Controller states within their limits; `broken` now and then NaN or beyond a limit.
fn memory_at(c: &Controller, rng: &mut Rng, broken: bool) -> Vec<f64> {
    c.memory
        .iter()
        .map(|m| {
            let v = uniform(rng, m.limits);
            match (broken, rng.below(4)) {
                (true, 0) => f64::NAN,
                (true, 1) => m.limits.1 + (m.limits.1 - m.limits.0) * rng.unit(),
                _ => v,
            }
        })
        .collect()
}

/// Guidance points: (state [r, rate, …], commands, gains, dt).
type GuidancePoint = (Vec<f64>, Vec<f64>, Vec<f64>, f64);

fn guidance_points(c: &Controller, rng: &mut Rng, n: usize) -> Vec<GuidancePoint> {
    (0..n)
        .map(|i| {
            let (_, g) = if i % 10 == 9 {
                outside(c, rng)
            } else {
                inside(c, rng)
            };
            let mut st = Vec::new();
            let mut cm = Vec::new();
            for f in &c.filters {
                let r = &c.references[f.reference];
                // now and then a reference that is not finite, which update must repair
                st.push(match i % 97 {
                    13 => f64::NAN,
                    29 => f64::INFINITY,
                    _ => uniform(rng, r.range),
                });
                st.push(uniform(rng, f.rate_limit));
                // commands near and far, sometimes NaN
                let far = (r.range.1 - r.range.0) * (rng.unit() - 0.5) * 2.0;
                cm.push(if i % 50 == 7 {
                    f64::NAN
                } else {
                    r.range.0.max(st[st.len() - 2].min(r.range.1)) + far * rng.unit().powi(3)
                });
            }
            let dt = [0.02, 0.01, 0.1, 1.0, 0.0, -0.02][i % 6];
            (st, cm, g, dt)
        })
        .collect()
}

/// A case as the C harness reads it: inputs, gains, controller states, dt.
type HarnessCase = (Vec<f64>, Vec<f64>, Vec<f64>, f64);

/// What the C harness reads: the cases (inputs, gains, controller states, dt), the guidance
/// points, then for a law with controller states the sequences (`count` of `length` steps,
/// the cases of their steps in order).
fn harness_input(
    c: &Controller,
    cases: &[HarnessCase],
    gpoints: &[GuidancePoint],
    (count, length): (usize, usize),
    steps: &[(Vec<f64>, Vec<f64>)],
) -> Vec<f64> {
    let mut input = vec![cases.len() as f64];
    for (x, g, m, dt) in cases {
        input.extend(case_values(c, x, g, Some(m), *dt));
    }
    input.push(gpoints.len() as f64);
    for (st, cm, g, dt) in gpoints {
        input.extend(st);
        input.extend(cm);
        input.extend(g);
        input.push(*dt);
    }
    if !c.memory.is_empty() {
        input.extend([count as f64, length as f64]);
        for (x, g) in steps {
            input.extend(case_values(c, x, g, None, 0.02));
        }
    }
    input
}

/// The interpreter's guidance update at a point: the state [reference, rate, …] after it, and
/// the status bits.
fn interpreted_update<R: lawsmith_codegen::Real>(
    c: &Controller,
    st: &[R],
    cm: &[R],
    g: &[R],
    dt: R,
) -> (Vec<R>, u32) {
    let mut refs: Vec<R> = st.iter().step_by(2).copied().collect();
    let mut rates: Vec<R> = st.iter().skip(1).step_by(2).copied().collect();
    let status = c.update(&mut refs, &mut rates, cm, g, dt);
    let state = refs
        .iter()
        .zip(&rates)
        .flat_map(|(r, q)| [*r, *q])
        .collect();
    (state, status)
}

#[test]
fn generated_rust_and_c_agree_with_the_interpreter() {
    let mut rng = Rng(20261202);
    let dir = std::env::temp_dir().join(format!("lawsmith-translation-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    assert!(!lawsmith_emitted::SPECS.is_empty());
    let mut laws_with_memory = 0;
    for &name in lawsmith_emitted::SPECS {
        let spec = load(name);
        let c = Controller::new(&spec).unwrap();
        let gen = root().join("generated").join(name);
        let cases: Vec<Case> = (0..INSIDE + OUTSIDE)
            .map(|i| {
                let inside_pt = i < INSIDE;
                let (inputs, gains) = if inside_pt {
                    inside(&c, &mut rng)
                } else {
                    outside(&c, &mut rng)
                };
                let memory = memory_at(&c, &mut rng, !inside_pt);
                let dt = if inside_pt {
                    [0.02, 0.01, 0.1, 0.0][i % 4]
                } else {
                    [0.02, -0.02, f64::NAN, 1e300][i % 4]
                };
                Case {
                    inputs,
                    gains,
                    memory,
                    dt,
                    inside: inside_pt,
                }
            })
            .collect();
        let gpoints = guidance_points(&c, &mut rng, 20_000);

        // the interpreter and the generated Rust
        let mut expected = Vec::new();
        for case in &cases {
            let mut mine = case.memory.clone();
            let want = c.run(&case.inputs, &case.gains, &mut mine, case.dt);
            let mut theirs = case.memory.clone();
            let (cmds, limits, domain, status, memory_limits) =
                lawsmith_emitted::step(name, &case.inputs, &case.gains, &mut theirs, case.dt)
                    .expect("a generated module");
            assert_eq!(
                status, want.status,
                "{name}: status bits at {:?}",
                case.inputs
            );
            assert_eq!(domain, status != 0, "{name}: domain is any status bit");
            assert_eq!(
                (limits, memory_limits),
                (want.limits, want.memory_limits),
                "{name}: limit bits at {:?}",
                case.inputs
            );
            assert_eq!(
                domain, want.domain,
                "{name}: domain flag at {:?}",
                case.inputs
            );
            for (a, b) in cmds
                .iter()
                .zip(&want.commands)
                .chain(theirs.iter().zip(&mine))
            {
                assert_eq!(
                    a.to_bits(),
                    b.to_bits(),
                    "{name}: Rust differs at {:?} {:?}",
                    case.inputs,
                    case.memory
                );
                assert!(
                    b.is_finite(),
                    "{name}: non-finite command or state at {:?}",
                    case.inputs
                );
            }
            // every state within its limits after the step
            for (m, v) in c.memory.iter().zip(&mine) {
                assert!(*v >= m.limits.0 && *v <= m.limits.1, "{name}: {v} escapes");
            }
            if case.inside {
                assert!(
                    !want.domain,
                    "{name}: domain flag inside the envelope at {:?}",
                    case.inputs
                );
            } else if case
                .inputs
                .iter()
                .chain(&case.gains)
                .chain(&case.memory)
                .any(|v| !v.is_finite())
            {
                assert!(
                    want.domain,
                    "{name}: no domain flag for {:?} {:?}",
                    case.inputs, case.gains
                );
            }
            expected.push((want, mine));
        }
        // sequences of steps, the controller states carried from one to the next from the
        // values start_memory sets: every reader stays on the same trajectory
        let (sequences, length) = if c.memory.is_empty() {
            (0, 0)
        } else {
            (40, 250)
        };
        let mut seq_cases = Vec::new();
        let mut seq_expected = Vec::new();
        for _ in 0..sequences {
            let (mut mine, mut theirs) = (c.start_memory(), c.start_memory());
            for k in 0..length {
                let (inputs, gains) = if k % 50 == 49 {
                    outside(&c, &mut rng)
                } else {
                    inside(&c, &mut rng)
                };
                let want = c.run(&inputs, &gains, &mut mine, 0.02);
                let (cmds, _, _, status, _) =
                    lawsmith_emitted::step(name, &inputs, &gains, &mut theirs, 0.02).unwrap();
                assert_eq!(status, want.status, "{name}: sequence status");
                for (a, b) in cmds
                    .iter()
                    .zip(&want.commands)
                    .chain(theirs.iter().zip(&mine))
                {
                    assert_eq!(a.to_bits(), b.to_bits(), "{name}: Rust leaves the sequence");
                }
                seq_cases.push((inputs, gains));
                seq_expected.push((want, mine.clone()));
            }
        }
        laws_with_memory += usize::from(sequences > 0);
        let mut gexpected = Vec::new();
        let mut repaired = 0;
        for (st, cm, g, dt) in &gpoints {
            let (mine, status) = interpreted_update(&c, st, cm, g, *dt);
            if !c.filters.is_empty() {
                let mut s = st.clone();
                let rust_status = lawsmith_emitted::update(name, &mut s, cm, g, *dt).unwrap();
                assert_eq!(rust_status, status, "{name}: Rust update status at {st:?}");
                for (a, b) in s.iter().zip(&mine) {
                    assert_eq!(a.to_bits(), b.to_bits(), "{name}: Rust update differs");
                    // a dt that is not positive changes nothing, a broken state included
                    assert!(
                        b.is_finite() || *dt <= 0.0,
                        "{name}: non-finite guidance state"
                    );
                }
                if st.iter().step_by(2).any(|r| !r.is_finite()) && *dt > 0.0 {
                    assert!(
                        status & 1 << 4 != 0,
                        "{name}: repair not reported at {st:?}"
                    );
                    repaired += 1;
                }
            }
            gexpected.push((mine, status));
        }

        assert!(
            c.filters.is_empty() || repaired > 100,
            "{name}: {repaired} repairs"
        );

        // the generated C, through each compiler
        let rows: Vec<_> = cases
            .iter()
            .map(|k| (k.inputs.clone(), k.gains.clone(), k.memory.clone(), k.dt))
            .collect();
        let input = harness_input(&c, &rows, &gpoints, (sequences, length), &seq_cases);
        for cc in compilers() {
            let exe = build_c(&cc, &dir, &gen, &c, &[]);
            let out = run_c(&exe, &input);
            let per = per_case(&c);
            let mut worst: f64 = 0.0;
            for (k, (want, mine)) in expected.iter().enumerate() {
                let row = &out[k * per..(k + 1) * per];
                worst = worst.max(compare_row(&c, row, want, mine, &format!("{name}/{cc}")));
            }
            let mut gworst: f64 = 0.0;
            let goff = expected.len() * per;
            let gper = 2 * c.filters.len() + 1;
            if gper > 1 {
                for (k, (want, status)) in gexpected.iter().enumerate() {
                    let row = &out[goff + k * gper..goff + (k + 1) * gper];
                    for (a, b) in row.iter().zip(want) {
                        gworst = gworst.max(rel(*a, *b));
                    }
                    assert_eq!(row[gper - 1] as u32, *status, "{name}/{cc}: update status");
                }
            }
            // the sequences, whose states the C carries itself from start_memory
            let soff = goff + if gper > 1 { gexpected.len() * gper } else { 0 };
            let mut sworst: f64 = 0.0;
            for (k, (want, mine)) in seq_expected.iter().enumerate() {
                let row = &out[soff + k * per..soff + (k + 1) * per];
                let at = format!("{name}/{cc}: sequence step {k}");
                sworst = sworst.max(compare_row(&c, row, want, mine, &at));
            }
            assert_eq!(out.len(), soff + seq_expected.len() * per, "{name}/{cc}");
            println!(
                "{name}: C ({cc}) vs interpreter over {} points: max relative difference {worst:.3e} (step), {gworst:.3e} (guidance update), {sworst:.3e} over {} sequence steps; Rust: bit for bit",
                expected.len(),
                seq_expected.len()
            );
            assert!(
                worst <= 1e-12 && gworst <= 1e-12 && sworst <= 1e-12,
                "{name}/{cc}: {worst:e} {gworst:e} {sworst:e}"
            );
        }

        // independently of the code generator: the canonical laws of the prover
        let mut spec = spec;
        let d = lawsmith_spec::derive(&mut spec).unwrap();
        let mut params = std::collections::HashMap::new();
        let values: Vec<(String, lawsmith_expr::BigRational)> = spec
            .symbols
            .iter()
            .filter_map(|s| match &s.decl {
                lawsmith_spec::Decl::Parameter { value } => {
                    Some((s.name.clone(), value.exact().clone()))
                }
                _ => None,
            })
            .collect();
        for (n, v) in values {
            let v = spec.dag.num(v);
            params.insert(n, v);
        }
        let roots: Vec<_> = d
            .actuators
            .iter()
            .map(|(_, e)| spec.dag.substitute(*e, &params))
            .collect();
        let mut vars = c.input_names();
        vars.extend(c.memory.iter().map(|m| m.name.clone()));
        vars.extend(c.gains.iter().map(|g| g.name.clone()));
        let refs: Vec<&str> = vars.iter().map(String::as_str).collect();
        let tape = Tape::compile(&spec.dag, &roots, &refs).unwrap();
        // the expanded form cancels large terms, and a command near zero makes a relative
        // difference meaningless: the figure that matters is the difference as a share of
        // the command's range
        let (mut worst, mut worst_rel): (f64, f64) = (0.0, 0.0);
        let mut scratch = Vec::new();
        let mut out = vec![0.0; roots.len()];
        for (case, (want, _)) in cases.iter().zip(&expected).filter(|(c, _)| c.inside) {
            let mut x = case.inputs.clone();
            x.extend(&case.memory);
            x.extend(&case.gains);
            tape.eval_into(&x, &mut scratch, &mut out);
            for ((v, a), w) in out.iter().zip(&c.actuators).zip(&want.commands) {
                let v = lawsmith_codegen::clamp_command(*v, a.limits);
                worst = worst.max((v - w).abs() / (a.limits.1 - a.limits.0));
                worst_rel = worst_rel.max(rel(v, *w));
            }
        }
        println!("{name}: generated law vs the prover's canonical form over {INSIDE} points: max difference {worst:.3e} of the command range ({worst_rel:.3e} relative)");
        assert!(worst <= 1e-12, "{name}: {worst:e}");
    }
    // the adaptive and the integral example carry controller states
    assert!(laws_with_memory >= 2, "{laws_with_memory} laws with states");
    std::fs::remove_dir_all(&dir).unwrap();
}

/// The f32 code of spec `name` under a test header.
fn f32_files(c: &Controller, name: &str, lang: Lang) -> Vec<(String, String)> {
    let prov = Provenance {
        spec_file: format!("specs/{name}.yaml"),
        spec_sha256: "0".repeat(64),
        tool_version: "test".into(),
        claim: "negative_definite".into(),
        verdict: "proven".into(),
        figures: Vec::new(),
    };
    lawsmith_codegen::generate(c, &prov, lang, Float::F32).unwrap()
}

/// f32 with the C library's functions: Rust's `f32::asin` and the like call the platform's
/// `asinf` (glibc's here), so the interpreter at this type computes what the compiled C
/// computes. The `libm` crate the generated Rust uses (a port of musl) and glibc differ by an
/// ulp at some points (asinf at 0.34% of the floats in [0, 1), measured when this was
/// written): the C is the same computation, on another library.
#[derive(Clone, Copy, Debug, Default, PartialEq, PartialOrd)]
struct SysF32(f32);

macro_rules! sys_op {
    ($tr:ident, $f:ident, $op:tt) => {
        impl std::ops::$tr for SysF32 {
            type Output = SysF32;
            fn $f(self, b: SysF32) -> SysF32 {
                SysF32(self.0 $op b.0)
            }
        }
    };
}
sys_op!(Add, add, +);
sys_op!(Sub, sub, -);
sys_op!(Mul, mul, *);
sys_op!(Div, div, /);

impl std::ops::Neg for SysF32 {
    type Output = SysF32;
    fn neg(self) -> SysF32 {
        SysF32(-self.0)
    }
}

impl lawsmith_codegen::Real for SysF32 {
    const FLOAT: Float = Float::F32;
    fn lit(x: f64) -> Self {
        SysF32(x as f32)
    }
    fn to_f64(self) -> f64 {
        f64::from(self.0)
    }
    fn is_nan(self) -> bool {
        self.0.is_nan()
    }
    fn is_finite(self) -> bool {
        self.0.is_finite()
    }
    fn call(f: lawsmith_expr::Func, a: Self, b: Self) -> Self {
        use lawsmith_expr::Func;
        let (a, b) = (a.0, b.0);
        SysF32(match f {
            Func::Sin => a.sin(),
            Func::Cos => a.cos(),
            Func::Tan => a.tan(),
            Func::Asin => a.asin(),
            Func::Acos => a.acos(),
            Func::Atan => a.atan(),
            Func::Atan2 => a.atan2(b),
            Func::Sqrt => a.sqrt(),
            Func::Exp => a.exp(),
            Func::Ln => a.ln(),
            Func::Abs => a.abs(),
            Func::Min => a.min(b),
            Func::Max => a.max(b),
            Func::Clamp => unreachable!("lowered to min and max"),
        })
    }
    fn pow(a: Self, b: Self) -> Self {
        SysF32(a.0.powf(b.0))
    }
}

/// A case in single precision: inputs, gains, controller states, dt (or a guidance point:
/// state, commands, gains, dt).
type SingleCase = (Vec<f32>, Vec<f32>, Vec<f32>, f32);

/// A point of `xs` as single precision (each value to its nearest f32).
fn single(xs: &[f64]) -> Vec<f32> {
    xs.iter().map(|&v| v as f32).collect()
}

/// An f32 output of the interpreter beside the same output of the generated code, as bits.
fn same_bits(a: f32, b: f64, what: &str) {
    assert_eq!(
        f64::from(a).to_bits(),
        b.to_bits(),
        "{what}: interpreter {a:e} vs code {b:e}"
    );
}

#[test]
fn f32_code_is_the_f32_interpreter_bit_for_bit() {
    // The single-precision code (generated/<spec>/f32/, committed, kept fresh by
    // `emit --check`) against `Controller::run`/`update` at f32: the Rust bit for bit, and
    // the C, built strict by each compiler with -ffp-contract=off (gcc's default under
    // -std=c99; clang fuses only within one expression and the code computes one operation
    // per statement), bit for bit as well: the same IEEE 754 binary32 operations, and the
    // laws call only functions (asinf, expf, fminf, fmaxf) on which the C library and the
    // `libm` crate agree on every point tried here.
    let dir = std::env::temp_dir().join(format!("lawsmith-f32-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut rng = Rng(20261205);
    assert_eq!(lawsmith_emitted::SPECS_F32, lawsmith_emitted::SPECS);
    let n_inside = INSIDE / 10;
    let n_outside = OUTSIDE / 10;
    for &name in lawsmith_emitted::SPECS_F32 {
        let c = Controller::new(&load(name)).unwrap();
        let gen = root().join("generated").join(name).join("f32");
        // cases as f32 (a point of the envelope rounded to f32 may lie just outside it:
        // both readers must then agree on the flag as well)
        let mut cases: Vec<SingleCase> = Vec::new();
        for i in 0..n_inside + n_outside {
            let inside_pt = i < n_inside;
            let (x, g) = if inside_pt {
                inside(&c, &mut rng)
            } else {
                outside(&c, &mut rng)
            };
            let m = memory_at(&c, &mut rng, !inside_pt);
            let dt = [0.02f32, 0.01, 0.1, 0.0, -0.02, f32::NAN][i % if inside_pt { 4 } else { 6 }];
            cases.push((single(&x), single(&g), single(&m), dt));
        }
        let mut expected = Vec::new();
        for (x, g, m, dt) in &cases {
            let mut mine = m.clone();
            let want = c.run(x, g, &mut mine, *dt);
            let mut theirs = m.clone();
            let (cmds, limits, domain, status, memory_limits) =
                lawsmith_emitted::step_f32(name, x, g, &mut theirs, *dt).expect("a module");
            assert_eq!(
                (limits, domain, status, memory_limits),
                (want.limits, want.domain, want.status, want.memory_limits),
                "{name}: f32 Rust flags at {x:?}"
            );
            for (a, b) in want
                .commands
                .iter()
                .zip(&cmds)
                .chain(mine.iter().zip(&theirs))
            {
                same_bits(*a, f64::from(*b), &format!("{name}: f32 Rust at {x:?}"));
            }
            expected.push((want, mine));
        }
        // sequences from start_memory, as in the f64 validation
        let (sequences, length) = if c.memory.is_empty() {
            (0, 0)
        } else {
            (10, 200)
        };
        let mut seq_cases = Vec::new();
        let mut seq_expected = Vec::new();
        for _ in 0..sequences {
            let (mut mine, mut theirs) = (c.start_memory::<f32>(), c.start_memory::<f32>());
            for k in 0..length {
                let (x, g) = if k % 50 == 49 {
                    outside(&c, &mut rng)
                } else {
                    inside(&c, &mut rng)
                };
                let (x, g) = (single(&x), single(&g));
                let want = c.run(&x, &g, &mut mine, 0.02);
                let (cmds, ..) =
                    lawsmith_emitted::step_f32(name, &x, &g, &mut theirs, 0.02).unwrap();
                for (a, b) in want
                    .commands
                    .iter()
                    .zip(&cmds)
                    .chain(mine.iter().zip(&theirs))
                {
                    same_bits(*a, f64::from(*b), &format!("{name}: f32 Rust sequence"));
                }
                seq_cases.push((x, g));
                seq_expected.push((want, mine.clone()));
            }
        }
        // guidance updates
        let gpoints: Vec<SingleCase> = guidance_points(&c, &mut rng, 2000)
            .into_iter()
            .map(|(st, cm, g, dt)| (single(&st), single(&cm), single(&g), dt as f32))
            .collect();
        let mut gexpected = Vec::new();
        for (st, cm, g, dt) in &gpoints {
            let (mine, status) = interpreted_update(&c, st, cm, g, *dt);
            if !c.filters.is_empty() {
                let mut s = st.clone();
                let theirs = lawsmith_emitted::update_f32(name, &mut s, cm, g, *dt).unwrap();
                assert_eq!(theirs, status, "{name}: f32 Rust update status");
                for (a, b) in mine.iter().zip(&s) {
                    same_bits(
                        *a,
                        f64::from(*b),
                        &format!("{name}: f32 Rust update at {st:?}"),
                    );
                }
            }
            gexpected.push((mine, status));
        }

        // the C, read and written as doubles (every f32 is one)
        let wide = |v: &[f32]| v.iter().map(|&x| f64::from(x)).collect::<Vec<f64>>();
        let rows: Vec<_> = cases
            .iter()
            .map(|(x, g, m, dt)| (wide(x), wide(g), wide(m), f64::from(*dt)))
            .collect();
        let wide_points: Vec<GuidancePoint> = gpoints
            .iter()
            .map(|(st, cm, g, dt)| (wide(st), wide(cm), wide(g), f64::from(*dt)))
            .collect();
        let wide_steps: Vec<_> = seq_cases.iter().map(|(x, g)| (wide(x), wide(g))).collect();
        let input = harness_input(&c, &rows, &wide_points, (sequences, length), &wide_steps);
        // what the C computes: the f32 interpreter on the C library's functions
        let sys = |v: &[f32]| v.iter().map(|&x| SysF32(x)).collect::<Vec<SysF32>>();
        let plain = |v: &[SysF32]| v.iter().map(|x| x.0).collect::<Vec<f32>>();
        let as_c = |want: lawsmith_codegen::StepOutput<SysF32>, m: Vec<SysF32>| {
            (want.map(|x| x.0), plain(&m))
        };
        let mut expected = Vec::new();
        for (x, g, m, dt) in &cases {
            let mut mine = sys(m);
            let want = c.run(&sys(x), &sys(g), &mut mine, SysF32(*dt));
            expected.push(as_c(want, mine));
        }
        let mut seq_expected = Vec::new();
        for chunk in seq_cases.chunks(length.max(1)) {
            let mut mine = c.start_memory::<SysF32>();
            for (x, g) in chunk {
                let want = c.run(&sys(x), &sys(g), &mut mine, SysF32(0.02));
                seq_expected.push(as_c(want, mine.clone()));
            }
        }
        let mut gexpected = Vec::new();
        for (st, cm, g, dt) in &gpoints {
            let (mine, status) = interpreted_update(&c, &sys(st), &sys(cm), &sys(g), SysF32(*dt));
            gexpected.push((plain(&mine), status));
        }
        let per = per_case(&c);
        let na = c.actuators.len();
        for cc in compilers() {
            let exe = build_c(&cc, &dir, &gen, &c, &[]);
            let out = run_c(&exe, &input);
            let rows = expected.iter().chain(&seq_expected);
            let goff = expected.len() * per;
            let gper = 2 * c.filters.len() + 1;
            let soff = goff + if gper > 1 { gexpected.len() * gper } else { 0 };
            for (k, (want, mine)) in rows.enumerate() {
                let at = if k < expected.len() {
                    k * per
                } else {
                    soff + (k - expected.len()) * per
                };
                let row = &out[at..at + per];
                let what = format!("{name}/{cc}: f32 C row {k}");
                for (a, b) in want.commands.iter().zip(row) {
                    same_bits(*a, *b, &what);
                }
                assert_eq!(
                    (row[na] as u32, row[na + 1] != 0.0, row[na + 2] as u32),
                    (want.limits, want.domain, want.status),
                    "{what}: flags"
                );
                if !c.memory.is_empty() {
                    assert_eq!(row[na + 3] as u32, want.memory_limits, "{what}");
                    for (a, b) in mine.iter().zip(&row[na + 4..]) {
                        same_bits(*a, *b, &what);
                    }
                }
            }
            if gper > 1 {
                for (k, (want, status)) in gexpected.iter().enumerate() {
                    let row = &out[goff + k * gper..goff + (k + 1) * gper];
                    for (a, b) in want.iter().zip(row) {
                        same_bits(*a, *b, &format!("{name}/{cc}: f32 C update {k}"));
                    }
                    assert_eq!(row[gper - 1] as u32, *status, "{name}/{cc}: update status");
                }
            }
            assert_eq!(out.len(), soff + seq_expected.len() * per, "{name}/{cc}");
            println!(
                "{name}: f32 Rust and C ({cc}) equal the f32 interpreter bit for bit over {} steps, {} sequence steps and {} guidance updates",
                expected.len(),
                seq_expected.len(),
                gexpected.len()
            );
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn outside_the_envelope_every_reader_evaluates_the_nearest_envelope_point() {
    // The proof's coordinates are each state's error and the references, so the nearest
    // envelope point clamps each of them on its own: an out-of-range reference with zero
    // tracking error stays at zero error (common practice for a box in these coordinates).
    let name = "energy_longitudinal";
    let c = Controller::new(&load(name)).unwrap();
    let names = c.input_names();
    let gains: Vec<f64> = c.gains.iter().map(|g| g.default).collect();
    // a trimmed cruise at 120 m and 22 m/s, inside the envelope
    let cruise = [
        ("h", 120.0),
        ("va", 22.0),
        ("h_r", 120.0),
        ("va_r", 22.0),
        ("hdot_r", 0.0),
        ("vadot_r", 0.0),
        ("drag", 8.0),
        ("alpha", 0.05),
    ];
    let point = |set: &[(&str, f64)]| -> Vec<f64> {
        names
            .iter()
            .map(|n| {
                let find = |l: &[(&str, f64)]| l.iter().find(|(m, _)| m == n).map(|p| p.1);
                find(set).or(find(&cruise)).unwrap()
            })
            .collect()
    };
    let cases = [
        // h = h_r = 20 m, below the 30 m range: zero error at h_r = 30 m (not a 10 m error,
        // clamped to the 5 m box, as if 5 m low)
        (
            point(&[("h", 20.0), ("h_r", 20.0)]),
            point(&[("h", 30.0), ("h_r", 30.0)]),
            point(&[("h", 25.0), ("h_r", 30.0)]),
        ),
        // va = va_r = 40 m/s, above the 30 m/s range: zero error at va_r = 30 m/s
        (
            point(&[("va", 40.0), ("va_r", 40.0)]),
            point(&[("va", 30.0), ("va_r", 30.0)]),
            point(&[("va", 32.0), ("va_r", 30.0)]),
        ),
        // a NaN altitude reference: zero error at the middle of its range, 315 m
        (
            point(&[("h_r", f64::NAN)]),
            point(&[("h", 315.0), ("h_r", 315.0)]),
            point(&[("h", 310.0), ("h_r", 315.0)]),
        ),
    ];
    let dir = std::env::temp_dir().join(format!("lawsmith-nearest-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut input = vec![cases.len() as f64];
    for (given, nearest, full_box) in &cases {
        let got = c.step(given, &gains);
        let want = c.step(nearest, &gains);
        assert!(got.domain && !want.domain, "{given:?}");
        assert_eq!(got.commands, want.commands, "{given:?}");
        // the test tells the two readings apart: a full-box error commands something else
        assert_ne!(c.step(full_box, &gains).commands, want.commands);
        let (cmds, _, domain, status, _) =
            lawsmith_emitted::step(name, given, &gains, &mut [], 0.0).unwrap();
        assert!(domain);
        assert_eq!(status, got.status);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&cmds), bits(&want.commands), "Rust at {given:?}");
        input.extend(given);
        input.extend(&gains);
    }
    input.push(0.0);
    let gen = root().join("generated").join(name);
    for cc in compilers() {
        let out = run_c(&build_c(&cc, &dir, &gen, &c, &[]), &input);
        let per = c.actuators.len() + 3;
        for (k, (given, nearest, _)) in cases.iter().enumerate() {
            let want = c.step(nearest, &gains);
            let row = &out[k * per..(k + 1) * per];
            for (a, b) in row.iter().zip(&want.commands) {
                assert!(rel(*a, *b) <= 1e-12, "{cc}: case {k}: {a} vs {b}");
            }
            assert!(row[per - 2] != 0.0, "{cc}: case {k}: no domain flag");
            assert_eq!(
                row[per - 1] as u32,
                c.step(given, &gains).status,
                "{cc}: case {k}"
            );
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn fast_math_builds_stop_at_the_guard() {
    // -ffast-math and -Ofast let gcc and clang assume that no value is NaN (GCC manual,
    // "Optimize Options": -ffinite-math-only), which removes the NaN guards; both define
    // __FAST_MATH__ then, and the generated C refuses to build
    let dir = std::env::temp_dir().join(format!("lawsmith-fastmath-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for &name in lawsmith_emitted::SPECS {
        let gen = root().join("generated").join(name);
        for cc in compilers() {
            for flag in ["-Ofast", "-ffast-math"] {
                let out = Command::new(&cc)
                    .args(["-std=c99", flag, "-c"])
                    .arg(gen.join(format!("{name}.c")))
                    .arg("-I")
                    .arg(&gen)
                    .arg("-o")
                    .arg(dir.join(format!("{name}.o")))
                    .output()
                    .unwrap();
                let err = String::from_utf8_lossy(&out.stderr);
                assert!(!out.status.success(), "{cc} {flag} built {name}");
                assert!(err.contains("without -ffast-math"), "{cc} {flag}: {err}");
            }
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn f32_code_accepts_no_point_outside_the_declared_ranges() {
    // IEEE 754 binary32 (common practice): the float nearest to a decimal end may lie beyond
    // it (0.2f is 2.98e-9 above 0.2), so the range checks must use ends rounded inward. At
    // each end of every ranged input, the float nearest to the end and its two neighbours
    // must raise the domain flag exactly when they lie outside the declared range.
    let dir = std::env::temp_dir().join(format!("lawsmith-f32ends-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let name = "energy_longitudinal";
    let c = Controller::new(&load(name)).unwrap();
    for (n, t) in f32_files(&c, name, Lang::C) {
        std::fs::write(dir.join(n), t).unwrap();
    }
    let exe = build_c(&compilers()[0], &dir, &dir, &c, &[]);
    let ns = c.states.len();
    let ranged: Vec<(f64, f64)> = c
        .references
        .iter()
        .chain(&c.rates)
        .chain(&c.signals)
        .map(|r| r.range)
        .collect();
    // the middle of every range, zero error
    let mut centre = vec![0.0; ns];
    centre.extend(ranged.iter().map(|&(lo, hi)| 0.5 * lo + 0.5 * hi));
    for (i, s) in c.states.iter().enumerate() {
        centre[i] = s.reference.map_or(s.equilibrium, |r| centre[ns + r]);
    }
    let gains: Vec<f64> = c.gains.iter().map(|g| g.default).collect();
    let mut cases = Vec::new();
    for (j, &(lo, hi)) in ranged.iter().enumerate() {
        for end in [lo, hi] {
            let near = end as f32;
            for v in [near.next_down(), near, near.next_up()] {
                let mut x = centre.clone();
                x[ns + j] = f64::from(v);
                // a reference moves its state along, so only the reference is off-centre
                for (i, s) in c.states.iter().enumerate() {
                    if s.reference == Some(j) {
                        x[i] = f64::from(v);
                    }
                }
                let outside = f64::from(v) < lo || f64::from(v) > hi;
                cases.push((x, outside));
            }
        }
    }
    let mut input = vec![cases.len() as f64];
    for (x, _) in &cases {
        input.extend(x);
        input.extend(&gains);
    }
    input.push(0.0);
    let out = run_c(&exe, &input);
    let per = c.actuators.len() + 3;
    let mut outside = 0;
    for (k, (x, want)) in cases.iter().enumerate() {
        let domain = out[k * per + per - 2] != 0.0;
        assert_eq!(domain, *want, "f32 C at {x:?}");
        outside += usize::from(*want);
    }
    // some nearest floats do lie outside (0.2, -0.05 for alpha at least)
    assert!(outside > cases.len() / 3, "{outside} of {}", cases.len());
    std::fs::remove_dir_all(&dir).unwrap();
}

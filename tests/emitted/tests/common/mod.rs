//! What the tests of the generated code share: the specs, envelope points, the C harness
//! that drives a generated C law through doubles on stdin and stdout, and the compilers.
#![allow(dead_code)] // each test binary uses its own part

use lawsmith_codegen::Controller;
use lawsmith_expr::random::Rng;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;

pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

pub fn load(name: &str) -> lawsmith_spec::Spec {
    let text = std::fs::read_to_string(root().join(format!("specs/{name}.yaml"))).unwrap();
    lawsmith_spec::load(&text).unwrap()
}

pub fn uniform(rng: &mut Rng, (lo, hi): (f64, f64)) -> f64 {
    lo + (hi - lo) * rng.unit()
}

/// A point of the proved envelope: inputs and gains (meeting the constraints).
pub fn inside(c: &Controller, rng: &mut Rng) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0; c.input_names().len()];
    let ns = c.states.len();
    for (k, r) in (ns..).zip(c.references.iter().chain(&c.rates).chain(&c.signals)) {
        x[k] = uniform(rng, r.range);
    }
    for (i, s) in c.states.iter().enumerate() {
        let base = s.reference.map_or(s.equilibrium, |r| x[ns + r]);
        x[i] = base + uniform(rng, s.error);
    }
    loop {
        let g: Vec<f64> = c.gains.iter().map(|g| uniform(rng, g.range)).collect();
        if c.gains_valid(&g) {
            return (x, g);
        }
    }
}

/// The C compilers to build with: `cc` (or `$CC`), and clang where it runs. With
/// `LAWSMITH_REQUIRE_CLANG` set (`scripts/test` sets it once clang is installed), a missing
/// clang fails the test instead of leaving it out.
pub fn compilers() -> Vec<String> {
    let mut v = vec![std::env::var("CC").unwrap_or_else(|_| "cc".into())];
    if Command::new("clang").arg("--version").output().is_ok() {
        v.push("clang".into());
    } else {
        assert!(
            std::env::var_os("LAWSMITH_REQUIRE_CLANG").is_none(),
            "LAWSMITH_REQUIRE_CLANG is set but clang does not run"
        );
    }
    v
}

pub const STRICT: [&str; 7] = [
    "-std=c99",
    "-Wall",
    "-Wextra",
    "-Wpedantic",
    "-Werror",
    "-Wconversion",
    "-Wshadow",
];

/// A C harness for spec `name`: reads cases (inputs, gains, and for a law with controller
/// states the states and dt) as doubles on stdin and writes, per case, the commands, the limit
/// bits, the domain flag and the status bits (and the memory limit bits and the new states);
/// then for the guidance points (state, commands, gains, dt) the new state; then, for a law
/// with controller states, sequences of steps from the states `start_memory` sets, each step's
/// output as a case's.
pub fn harness(c: &Controller) -> String {
    let p = &c.name;
    let mem = !c.memory.is_empty();
    let mut s = format!("#include \"{p}.h\"\n#include <stdio.h>\n\nstatic double rd(void) {{ double v = 0.0; if (fread(&v, sizeof v, 1, stdin) != 1) return 0.0; return v; }}\nstatic void wr(double v) {{ fwrite(&v, sizeof v, 1, stdout); }}\n\n");
    // one step: read the reading and gains (and dt), compute, write the outputs
    let _ = writeln!(s, "static void step_once({}) {{\n    {p}_reading in;\n    {p}_gains g;\n    {p}_commands out;", if mem { format!("{p}_memory *memory, int read_memory") } else { "void".into() });
    for name in c.input_names() {
        let _ = writeln!(s, "    in.{name} = rd();");
    }
    for g in &c.gains {
        let _ = writeln!(s, "    g.{} = rd();", g.name);
    }
    if mem {
        let _ = writeln!(s, "    if (read_memory) {{");
        for m in &c.memory {
            let _ = writeln!(s, "        memory->{} = rd();", m.name);
        }
        let _ = writeln!(s, "    }}\n    {{\n        double dt = rd();\n        {p}_compute_commands(&in, &g, memory, dt, &out);\n    }}");
    } else {
        let _ = writeln!(s, "    {p}_compute_commands(&in, &g, &out);");
    }
    for a in &c.actuators {
        let _ = writeln!(s, "    wr(out.{});", a.name);
    }
    let _ = writeln!(
        s,
        "    wr((double)out.limits);\n    wr(out.domain ? 1.0 : 0.0);\n    wr((double)out.status);"
    );
    if mem {
        let _ = writeln!(s, "    wr((double)out.memory_limits);");
        for m in &c.memory {
            let _ = writeln!(s, "    wr(memory->{});", m.name);
        }
    }
    let _ = writeln!(
        s,
        "}}\n\nint main(void) {{\n    long n = (long)rd();\n    long m;\n    long i;"
    );
    if mem {
        let _ = writeln!(s, "    {p}_memory memory;\n    for (i = 0; i < n; i++) {{\n        step_once(&memory, 1);\n    }}");
    } else {
        let _ = writeln!(
            s,
            "    for (i = 0; i < n; i++) {{\n        step_once();\n    }}"
        );
    }
    let _ = writeln!(s, "    m = (long)rd();");
    if !c.filters.is_empty() {
        let _ = writeln!(s, "    for (i = 0; i < m; i++) {{\n        {p}_references st;\n        {p}_targets cm;\n        {p}_gains g;\n        double dt;\n        uint32_t u;");
        for f in &c.filters {
            let _ = writeln!(
                s,
                "        st.{} = rd();\n        st.{} = rd();",
                c.references[f.reference].name, f.rate
            );
        }
        for f in &c.filters {
            let _ = writeln!(s, "        cm.{} = rd();", f.command);
        }
        for g in &c.gains {
            let _ = writeln!(s, "        g.{} = rd();", g.name);
        }
        let _ = writeln!(
            s,
            "        dt = rd();\n        u = {p}_advance_references(&st, &cm, &g, dt);"
        );
        for f in &c.filters {
            let _ = writeln!(
                s,
                "        wr(st.{});\n        wr(st.{});",
                c.references[f.reference].name, f.rate
            );
        }
        let _ = writeln!(s, "        wr((double)u);\n    }}");
    }
    if mem {
        let _ = writeln!(s, "    {{\n        long q = (long)rd();\n        long len = (long)rd();\n        long k;\n        for (i = 0; i < q; i++) {{\n            {p}_start_memory(&memory);\n            for (k = 0; k < len; k++) {{\n                step_once(&memory, 0);\n            }}\n        }}\n    }}");
    }
    s.push_str("    return 0;\n}\n");
    s
}

/// What the harness reads for one case: the inputs, the gains, and for a law with controller
/// states the states (unless it is a step of a sequence) and dt.
pub fn case_values(
    c: &Controller,
    x: &[f64],
    g: &[f64],
    memory: Option<&[f64]>,
    dt: f64,
) -> Vec<f64> {
    let mut v = x.to_vec();
    v.extend(g);
    if !c.memory.is_empty() {
        v.extend(memory.unwrap_or(&[]));
        v.push(dt);
    }
    v
}

/// How many numbers the harness writes per case.
pub fn per_case(c: &Controller) -> usize {
    let mem = if c.memory.is_empty() {
        0
    } else {
        1 + c.memory.len()
    };
    c.actuators.len() + 3 + mem
}

pub fn build_c(cc: &str, dir: &Path, gen: &Path, c: &Controller, extra: &[&str]) -> PathBuf {
    let p = &c.name;
    let obj = dir.join(format!("{p}-{cc}.o"));
    let out = Command::new(cc)
        .args(STRICT)
        .args(extra)
        .args(["-O2", "-c"])
        .arg(gen.join(format!("{p}.c")))
        .arg("-I")
        .arg(gen)
        .arg("-o")
        .arg(&obj)
        .output()
        .expect("a C compiler (see .ci/run)");
    assert!(
        out.status.success(),
        "{cc} rejects the generated C of {p}:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let h = dir.join(format!("harness-{p}.c"));
    std::fs::write(&h, harness(c)).unwrap();
    let exe = dir.join(format!("harness-{p}-{cc}"));
    let out = Command::new(cc)
        .args(["-std=c99", "-O2", "-I"])
        .arg(gen)
        .arg(&h)
        .arg(&obj)
        .args(["-lm", "-o"])
        .arg(&exe)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    exe
}

pub fn run_c(exe: &Path, input: &[f64]) -> Vec<f64> {
    // through a file: a pipe in both directions would deadlock once the output fills it
    let file = exe.with_extension("in");
    let bytes: Vec<u8> = input.iter().flat_map(|v| v.to_ne_bytes()).collect();
    std::fs::write(&file, bytes).unwrap();
    let out = Command::new(exe)
        .stdin(std::fs::File::open(&file).unwrap())
        .output()
        .unwrap();
    assert!(out.status.success());
    out.stdout
        .chunks(8)
        .map(|c| f64::from_ne_bytes(c.try_into().unwrap()))
        .collect()
}

//! The C99 emitter: `NAME.h` and `NAME.c`. No heap, no recursion, no global variables;
//! `extern "C"` guards; inputs by `const` pointer. Clean under
//! `-std=c99 -Wall -Wextra -Wpedantic -Werror -Wconversion -Wshadow`.

use crate::controller::Controller;
use crate::header::{float_literal, Provenance};
use crate::ir::{Op, Program, Slot};
use crate::Float;
use lawsmith_expr::Func;
use std::fmt::Write as _;

struct Emit {
    float: Float,
}

impl Emit {
    fn ty(&self) -> &'static str {
        match self.float {
            Float::F32 => "float",
            Float::F64 => "double",
        }
    }

    fn lit(&self, x: f64) -> String {
        match self.float {
            Float::F32 => {
                let s = format!("{:?}", x as f32);
                let s = if s.contains('.') || s.contains('e') {
                    s
                } else {
                    format!("{s}.0")
                };
                format!("{s}f")
            }
            Float::F64 => float_literal(x),
        }
    }

    /// A reference at rest at `command` (an expression): clamped into the range, a NaN at
    /// its midpoint, as `Controller::start` computes it.
    fn at_rest(&self, prefix: &str, range: (f64, f64), command: &str) -> String {
        let (lo, hi) = self.ends(range);
        let mid = self.lit(crate::controller::midpoint(range));
        format!("isnan({command}) ? {mid} : {prefix}_clamp({command}, {lo}, {hi})")
    }

    /// A range's ends as literals, rounded inward for this float type.
    fn ends(&self, range: (f64, f64)) -> (String, String) {
        let (lo, hi) = self.float.inward(range);
        (self.lit(lo), self.lit(hi))
    }

    /// A literal safe after a binary operator: negative ones in parentheses.
    fn operand(&self, x: f64) -> String {
        let s = self.lit(x);
        if s.starts_with('-') {
            format!("({s})")
        } else {
            s
        }
    }

    fn func(&self, f: Func) -> String {
        crate::math_name(f, self.float)
    }

    /// The statements of a program (indented by `ind`) and each output's expression.
    fn program(
        &self,
        p: &Program,
        prefix: &str,
        ind: &str,
        input: &dyn Fn(usize) -> String,
        out: &mut String,
    ) -> Vec<String> {
        let ty = self.ty();
        let name = |s: Slot| -> String {
            match p.ops[s as usize] {
                Op::Input(i) => input(i),
                _ => p.names[s as usize].clone(),
            }
        };
        for (i, op) in p.ops.iter().enumerate() {
            let value = match op {
                Op::Input(_) => continue,
                Op::Const(c) => self.lit(*c),
                Op::Neg(a) => format!("-{}", name(*a)),
                Op::Add(a, b) => format!("{} + {}", name(*a), name(*b)),
                Op::Sub(a, b) => format!("{} - {}", name(*a), name(*b)),
                Op::Mul(a, b) => format!("{} * {}", name(*a), name(*b)),
                Op::Div(a, b) => format!("{} / {}", name(*a), name(*b)),
                Op::Call1(f, a) => format!("{}({})", self.func(*f), name(*a)),
                Op::Call2(f, a, b) => format!("{}({}, {})", self.func(*f), name(*a), name(*b)),
                Op::Pow(a, b) => {
                    let f = crate::with_float("pow", self.float);
                    format!("{f}({}, {})", name(*a), name(*b))
                }
                Op::Clamp(a, lo, hi) => {
                    let (lo, hi) = self.ends((*lo, *hi));
                    format!("{prefix}_clamp({}, {lo}, {hi})", name(*a))
                }
                Op::Select(c, a, b) => format!(
                    "({} >= {}) ? {} : {}",
                    name(*c),
                    self.lit(0.0),
                    name(*a),
                    name(*b)
                ),
            };
            let _ = writeln!(out, "{ind}const {ty} {} = {value};", p.names[i]);
        }
        p.outputs.iter().map(|(_, s)| name(*s)).collect()
    }
}

fn comment_block(prov: &Provenance, what: &str, float: Float) -> String {
    let mut s = String::from("/*\n");
    for l in prov.lines(what, float) {
        if l.is_empty() {
            s.push_str(" *\n");
        } else {
            let _ = writeln!(s, " * {l}");
        }
    }
    s.push_str(" */\n");
    s
}

/// The header and the source of a controller.
pub fn emit(c: &Controller, prov: &Provenance, float: Float) -> (String, String) {
    let e = Emit { float };
    let ty = e.ty();
    let p = &c.name;
    let up = p.to_uppercase();
    let inputs = c.input_names();

    // ---- header ----
    let mut h = comment_block(prov, "C99 header", float);
    let guard = format!("{up}_H");
    let _ = writeln!(
        h,
        "#ifndef {guard}\n#define {guard}\n\n#include <stdbool.h>\n#include <stdint.h>\n"
    );
    let _ = writeln!(h, "#ifdef __cplusplus\nextern \"C\" {{\n#endif\n");
    let _ = writeln!(
        h,
        "/* Law `{p}`: {} arithmetic operations per step. */\n",
        c.op_count()
    );
    let _ = writeln!(
        h,
        "/* What {p}_compute_commands reads each period: the measured states, the references\n   and their rates, the signals. */"
    );
    let _ = writeln!(h, "typedef struct {{");
    for s in &c.states {
        let _ = writeln!(h, "    {ty} {}; /* state [{}] */", s.name, s.unit);
    }
    for r in c.references.iter().chain(&c.rates).chain(&c.signals) {
        let _ = writeln!(
            h,
            "    {ty} {}; /* [{}], proved over [{}, {}] */",
            r.name, r.unit, r.range.0, r.range.1
        );
    }
    let _ = writeln!(h, "}} {p}_reading;\n");
    let _ = writeln!(h, "/* Run-time gains. */\ntypedef struct {{");
    for g in &c.gains {
        let _ = writeln!(
            h,
            "    {ty} {}; /* [{}], proved over [{}, {}], default {} */",
            g.name, g.unit, g.range.0, g.range.1, g.default
        );
    }
    let _ = writeln!(h, "}} {p}_gains;\n");
    let _ = writeln!(h, "/* What {p}_compute_commands sends: each actuator's command and what happened. */\ntypedef struct {{");
    for a in &c.actuators {
        let _ = writeln!(
            h,
            "    {ty} {}; /* [{}], saturated to [{}, {}] */",
            a.name, a.unit, a.limits.0, a.limits.1
        );
    }
    let _ = writeln!(
        h,
        "    uint32_t limits; /* limits hit: the {up}_LIMIT_* bits */"
    );
    let _ = writeln!(h, "    bool domain; /* an input was NaN or outside the proved envelope, or the gains outside\n                    their proved set: the law was evaluated at the nearest point of the\n                    envelope (each state's error measured against its reference as\n                    given, then errors and references clamped to their ranges; a NaN\n                    input at its range's midpoint or at zero error), with the default\n                    gains; any bit of status */");
    let _ = writeln!(
        h,
        "    uint32_t status; /* what was repaired: the {up}_STATUS_* bits */"
    );
    if !c.memory.is_empty() {
        let _ = writeln!(
            h,
            "    uint32_t memory_limits; /* controller states held at a limit: the {up}_HELD_* bits */"
        );
    }
    let _ = writeln!(h, "}} {p}_commands;\n");
    for (i, a) in c.actuators.iter().enumerate() {
        let n = a.name.to_uppercase();
        let _ = writeln!(h, "#define {up}_LIMIT_{n}_LOW (UINT32_C(1) << {})", 2 * i);
        let _ = writeln!(
            h,
            "#define {up}_LIMIT_{n}_HIGH (UINT32_C(1) << {})",
            2 * i + 1
        );
    }
    for (j, m) in c.memory.iter().enumerate() {
        let n = m.name.to_uppercase();
        let _ = writeln!(h, "#define {up}_HELD_{n}_LOW (UINT32_C(1) << {})", 2 * j);
        let _ = writeln!(
            h,
            "#define {up}_HELD_{n}_HIGH (UINT32_C(1) << {})",
            2 * j + 1
        );
    }
    for (i, (n, what)) in crate::controller::STATUS.iter().enumerate() {
        // the guidance and memory bits only where there are guidance filters and controller
        // states (an unused macro: MISRA C:2012 2.5)
        let unused = (*n == "GUIDANCE_REPAIRED" && c.filters.is_empty())
            || (*n == "MEMORY_REPAIRED" && c.memory.is_empty());
        if !unused {
            let _ = writeln!(
                h,
                "#define {up}_STATUS_{n} (UINT32_C(1) << {i}) /* {what} */"
            );
        }
    }
    let _ = writeln!(h);
    let _ = writeln!(h, "/* The spec's default gains; the generated code falls back to them. */\n{p}_gains {p}_default_gains(void);\n");
    let _ = writeln!(h, "/* Do the gains lie in their proved ranges and meet the constraints? */\nbool {p}_check_gains(const {p}_gains *g);\n");
    if c.memory.is_empty() {
        let _ = writeln!(h, "/* The control law once: the actuator commands from this period's reading, saturated to\n   their limits. */\nvoid {p}_compute_commands(const {p}_reading *in, const {p}_gains *gains, {p}_commands *out);\n");
    } else {
        let _ = writeln!(h, "/* The controller states the law carries from one period to the next. Start them with\n   {p}_start_memory (and again to reset them); {p}_compute_commands advances them. */\ntypedef struct {{");
        for m in &c.memory {
            let _ = writeln!(
                h,
                "    {ty} {}; /* [{}], held within [{}, {}], starts at {} */",
                m.name, m.unit, m.limits.0, m.limits.1, m.initial
            );
        }
        let _ = writeln!(h, "}} {p}_memory;\n");
        let _ = writeln!(h, "/* Sets every controller state to its initial value. */\nvoid {p}_start_memory({p}_memory *memory);\n");
        let _ = writeln!(h, "/* The control law once: the actuator commands from this period's reading and the\n   controller states, saturated to their limits; then each controller state advanced over dt\n   seconds by forward Euler (x + dt*x', its update law x' at this period's values) and held\n   within its limits (a {up}_HELD_* bit when a limit acts). A state outside its limits is\n   clamped into them first (a NaN restarts at its initial value), with MEMORY_REPAIRED; a dt\n   that is not positive advances nothing. */\nvoid {p}_compute_commands(const {p}_reading *in, const {p}_gains *gains, {p}_memory *memory, {ty} dt, {p}_commands *out);\n");
    }
    if !c.filters.is_empty() {
        let _ = writeln!(h, "/* The reference filters' state: each reference and its rate. Start it with\n   {p}_start_references. Each control period: {p}_compute_commands with the references\n   and rates of this state in its reading, then {p}_advance_references over the period. */\ntypedef struct {{");
        for f in &c.filters {
            let r = &c.references[f.reference];
            let _ = writeln!(h, "    {ty} {}; /* [{}] */", r.name, r.unit);
            let _ = writeln!(
                h,
                "    {ty} {}; /* limited to [{}, {}] */",
                f.rate, f.rate_limit.0, f.rate_limit.1
            );
        }
        let _ = writeln!(h, "}} {p}_references;\n");
        let _ = writeln!(
            h,
            "/* What the reference filters follow: each filter's command. */\ntypedef struct {{"
        );
        for f in &c.filters {
            let _ = writeln!(h, "    {ty} {};", f.command);
        }
        let _ = writeln!(h, "}} {p}_targets;\n");
        let _ = writeln!(h, "/* Starts the reference filters at rest: each reference at its command in start\n   (clamped into its proved range, a NaN at the range's midpoint), each rate zero. */\nvoid {p}_start_references({p}_references *state, const {p}_targets *start);\n");
        let _ = writeln!(h, "/* Advances every reference filter over dt seconds towards its command: the exact\n   solution of r' = clamp(k*(c - r), lo, hi) for a constant command. A NaN command\n   holds its reference; gains outside their proved set are replaced by the defaults;\n   a dt that is not positive changes nothing. A reference that is not finite restarts\n   at rest at its command (as {p}_start_references). Returns the {up}_STATUS_* bits of what\n   it repaired: GUIDANCE_REPAIRED, GAINS_REJECTED. */\nuint32_t {p}_advance_references({p}_references *state, const {p}_targets *targets, const {p}_gains *gains, {ty} dt);\n");
    }
    let _ = writeln!(h, "#ifdef __cplusplus\n}}\n#endif\n\n#endif /* {guard} */");

    // ---- source ----
    let mut s = comment_block(prov, "C99 source", float);
    let _ = writeln!(
        s,
        "#include \"{p}.h\"\n\n#include <float.h>\n#include <math.h>\n"
    );
    // -ffast-math (and -Ofast) let the compiler assume no NaN: the guards would vanish
    let _ = writeln!(s, "#if defined(__FAST_MATH__)\n#error \"build without -ffast-math or -Ofast: the NaN and envelope guards of this law need IEEE 754 semantics\"\n#endif\n");
    // x87 arithmetic (FLT_EVAL_METHOD 2), or float evaluated as double (1), rounds otherwise
    // than the interpreter
    let _ = writeln!(s, "#if defined(FLT_EVAL_METHOD) && (FLT_EVAL_METHOD != 0)\n#error \"this law must be computed in its own type (FLT_EVAL_METHOD 0, e.g. SSE2 or a single-precision FPU), one rounding per operation\"\n#endif\n");
    let _ = writeln!(s, "static inline {ty} {p}_clamp({ty} x, {ty} lo, {ty} hi)\n{{\n    return (x < lo) ? lo : ((x > hi) ? hi : x);\n}}\n");
    let _ = writeln!(s, "{p}_gains {p}_default_gains(void)\n{{\n    {p}_gains g;");
    for g in &c.gains {
        let _ = writeln!(s, "    g.{} = {};", g.name, e.lit(g.default));
    }
    let _ = writeln!(s, "    return g;\n}}\n");
    // static, so compute_commands and advance_references inline it; the public function calls it
    let _ = writeln!(
        s,
        "static inline bool {p}_gains_in_set(const {p}_gains *g)\n{{"
    );
    let (cprog, strict) = &c.constraints;
    let couts = e.program(
        cprog,
        p,
        "    ",
        &|i| format!("g->{}", c.gains[i].name),
        &mut s,
    );
    let mut checks: Vec<String> = c
        .gains
        .iter()
        .map(|g| {
            let (lo, hi) = e.ends(g.range);
            format!("(g->{0} >= {lo}) && (g->{0} <= {hi})", g.name)
        })
        .collect();
    for (o, st) in couts.iter().zip(strict) {
        checks.push(format!(
            "({o} {} {})",
            if *st { "<" } else { "<=" },
            e.lit(0.0)
        ));
    }
    let expr = if checks.is_empty() {
        "true".to_string()
    } else {
        checks.join("\n        && ")
    };
    let _ = writeln!(s, "    return {expr};\n}}\n");
    let _ = writeln!(
        s,
        "bool {p}_check_gains(const {p}_gains *g)\n{{\n    return {p}_gains_in_set(g);\n}}\n"
    );

    if !c.memory.is_empty() {
        let _ = writeln!(s, "void {p}_start_memory({p}_memory *memory)\n{{");
        for m in &c.memory {
            let _ = writeln!(s, "    memory->{} = {};", m.name, e.lit(m.initial));
        }
        let _ = writeln!(s, "}}\n");
        let _ = writeln!(
            s,
            "void {p}_compute_commands(const {p}_reading *in, const {p}_gains *gains, {p}_memory *memory, {ty} dt, {p}_commands *out)\n{{"
        );
    } else {
        let _ = writeln!(
            s,
            "void {p}_compute_commands(const {p}_reading *in, const {p}_gains *gains, {p}_commands *out)\n{{"
        );
    }
    let _ = writeln!(
        s,
        "    uint32_t status = 0u;\n    uint32_t limits = 0u;\n    {p}_gains g;"
    );
    for (i, n) in inputs.iter().enumerate() {
        let _ = writeln!(s, "    {ty} x{i} = in->{n};");
    }
    let ns = c.states.len();
    // each state's reference as given, before it is clamped: the error is measured from it
    for (i, st) in c.states.iter().enumerate() {
        if let Some(r) = st.reference {
            let _ = writeln!(s, "    const {ty} r{i} = x{};", ns + r);
        }
    }
    // an input the law never reads is still checked, but not repaired (no dead store)
    let reads = |i: usize| {
        let slot = i as crate::ir::Slot;
        c.law
            .ops
            .iter()
            .any(|op| crate::ir::operands(op).contains(&slot))
            || c.law.outputs.iter().any(|(_, o)| *o == slot)
    };
    let needed = |j: usize| {
        reads(ns + j)
            || c.states
                .iter()
                .enumerate()
                .any(|(i, st)| st.reference == Some(j) && reads(i))
    };
    for (j, r) in c
        .references
        .iter()
        .chain(&c.rates)
        .chain(&c.signals)
        .enumerate()
    {
        let xi = format!("x{}", ns + j);
        let (lo, hi) = e.ends(r.range);
        let mid = e.lit(crate::controller::midpoint(r.range));
        let repair = if needed(j) {
            format!("\n        {xi} = isnan({xi}) ? {mid} : {p}_clamp({xi}, {lo}, {hi});")
        } else {
            String::new()
        };
        let _ = writeln!(s, "    if (!(({xi} >= {lo}) && ({xi} <= {hi}))) {{\n        status |= isfinite({xi}) ? {up}_STATUS_OUTSIDE_ENVELOPE : {up}_STATUS_NONFINITE_INPUT;{repair}\n    }}");
    }
    for (i, st) in c.states.iter().enumerate() {
        let base = match st.reference {
            Some(r) => format!("x{}", ns + r),
            None => e.operand(st.equilibrium),
        };
        let (lo, hi) = e.ends(st.error);
        let zero = e.lit(crate::ir::clamp(0.0, st.error.0, st.error.1));
        if !reads(i) {
            let raw = if st.reference.is_some() {
                format!("r{i}")
            } else {
                base.clone()
            };
            let _ = writeln!(s, "    {{\n        const {ty} e{i} = x{i} - {raw};\n        if (!((e{i} >= {lo}) && (e{i} <= {hi}))) {{\n            status |= isfinite(e{i}) ? {up}_STATUS_OUTSIDE_ENVELOPE : {up}_STATUS_NONFINITE_INPUT;\n        }}\n    }}");
        } else if st.reference.is_some() {
            let _ = writeln!(s, "    {{\n        const {ty} e{i} = x{i} - r{i};\n        if (!((e{i} >= {lo}) && (e{i} <= {hi}))) {{\n            status |= isfinite(e{i}) ? {up}_STATUS_OUTSIDE_ENVELOPE : {up}_STATUS_NONFINITE_INPUT;\n            x{i} = {base} + (isnan(e{i}) ? {zero} : {p}_clamp(e{i}, {lo}, {hi}));\n        }} else if ({base} != r{i}) {{\n            x{i} = {base} + e{i};\n        }} else {{\n            /* inside the envelope: the state as measured */\n        }}\n    }}");
        } else {
            let _ = writeln!(s, "    {{\n        const {ty} e{i} = x{i} - {base};\n        if (!((e{i} >= {lo}) && (e{i} <= {hi}))) {{\n            status |= isfinite(e{i}) ? {up}_STATUS_OUTSIDE_ENVELOPE : {up}_STATUS_NONFINITE_INPUT;\n            x{i} = {base} + (isnan(e{i}) ? {zero} : {p}_clamp(e{i}, {lo}, {hi}));\n        }}\n    }}");
        }
    }
    // each controller state within its limits (a NaN restarts at its initial value)
    for (j, m) in c.memory.iter().enumerate() {
        let (lo, hi) = e.ends(m.limits);
        let _ = writeln!(s, "    {ty} m{j} = memory->{};\n    if (!((m{j} >= {lo}) && (m{j} <= {hi}))) {{\n        status |= {up}_STATUS_MEMORY_REPAIRED;\n        m{j} = isnan(m{j}) ? {} : {p}_clamp(m{j}, {lo}, {hi});\n    }}", m.name, e.lit(m.initial));
    }
    let _ = writeln!(s, "    if ({p}_gains_in_set(gains)) {{\n        g = *gains;\n    }} else {{\n        status |= {up}_STATUS_GAINS_REJECTED;\n        g = {p}_default_gains();\n    }}");
    let _ = writeln!(s, "    /* the law (in the envelope) */");
    let louts = e.program(
        &c.law,
        p,
        "    ",
        &|i| {
            let n_mem = c.memory.len();
            if i < inputs.len() {
                format!("x{i}")
            } else if i < inputs.len() + n_mem {
                format!("m{}", i - inputs.len())
            } else {
                format!("g.{}", c.gains[i - inputs.len() - n_mem].name)
            }
        },
        &mut s,
    );
    let _ = writeln!(s, "    /* saturation */");
    for (i, (a, o)) in c.actuators.iter().zip(&louts).enumerate() {
        let n = a.name.to_uppercase();
        let (lo, hi) = e.ends(a.limits);
        let _ = writeln!(s, "    {{\n        {ty} c{i} = {o};\n        if (!isfinite(c{i})) {{\n            status |= {up}_STATUS_NONFINITE_COMMAND;\n            c{i} = {};\n        }}\n        if (c{i} < {lo}) {{\n            c{i} = {lo};\n            limits |= {up}_LIMIT_{n}_LOW;\n        }} else if (c{i} > {hi}) {{\n            c{i} = {hi};\n            limits |= {up}_LIMIT_{n}_HIGH;\n        }} else {{\n            /* within its limits */\n        }}\n        out->{} = c{i};\n    }}", e.lit(a.safe), a.name);
    }
    if !c.memory.is_empty() {
        // forward Euler over dt, then each state held within its limits
        let _ = writeln!(
            s,
            "    /* the controller states over dt */\n    {{\n        uint32_t held = 0u;"
        );
        let rates = &louts[c.actuators.len()..];
        for (j, (m, u)) in c.memory.iter().zip(rates).enumerate() {
            let n = m.name.to_uppercase();
            let (lo, hi) = e.ends(m.limits);
            let _ = writeln!(s, "        if (dt > {zero}) {{\n            {ty} n{j} = m{j} + (dt * {u});\n            if (!isfinite(n{j})) {{\n                status |= {up}_STATUS_MEMORY_REPAIRED;\n                n{j} = m{j};\n            }}\n            if (n{j} < {lo}) {{\n                n{j} = {lo};\n                held |= {up}_HELD_{n}_LOW;\n            }} else if (n{j} > {hi}) {{\n                n{j} = {hi};\n                held |= {up}_HELD_{n}_HIGH;\n            }} else {{\n                /* within its limits */\n            }}\n            memory->{name} = n{j};\n        }} else {{\n            memory->{name} = m{j};\n        }}", zero = e.lit(0.0), name = m.name);
        }
        let _ = writeln!(s, "        out->memory_limits = held;\n    }}");
    }
    let _ = writeln!(
        s,
        "    out->limits = limits;\n    out->domain = status != 0u;\n    out->status = status;\n}}"
    );
    if !c.filters.is_empty() {
        let _ = writeln!(
            s,
            "\nvoid {p}_start_references({p}_references *state, const {p}_targets *start)\n{{"
        );
        for f in &c.filters {
            let r = &c.references[f.reference];
            let rest = e.at_rest(p, r.range, &format!("start->{}", f.command));
            let _ = writeln!(
                s,
                "    state->{rn} = {rest};\n    state->{q} = {zero};",
                rn = r.name,
                q = f.rate,
                zero = e.lit(0.0)
            );
        }
        let _ = writeln!(s, "}}");
        let _ = writeln!(s, "\nuint32_t {p}_advance_references({p}_references *state, const {p}_targets *targets, const {p}_gains *gains, {ty} dt)\n{{\n    uint32_t status = 0u;\n    if (dt > {}) {{", e.lit(0.0));
        // the body, indented once more inside the test of dt (one exit: MISRA C:2012 15.5)
        let mut b = String::new();
        let _ = writeln!(b, "    {p}_gains g;\n    if ({p}_gains_in_set(gains)) {{\n        g = *gains;\n    }} else {{\n        status |= {up}_STATUS_GAINS_REJECTED;\n        g = {p}_default_gains();\n    }}");
        for f in &c.filters {
            let rn = &c.references[f.reference].name;
            let kn = &c.gains[f.gain].name;
            let rest = e.at_rest(
                p,
                c.references[f.reference].range,
                &format!("targets->{}", f.command),
            );
            let _ = writeln!(b, "    {{\n        {ty} r = state->{rn};\n        if (!isfinite(r)) {{\n            status |= {up}_STATUS_GUIDANCE_REPAIRED;\n            r = {rest};\n        }}\n        const {ty} c = isnan(targets->{cn}) ? r : targets->{cn};\n        const {ty} k = g.{kn};", cn = f.command);
            let outs = e.program(
                &f.program,
                p,
                "        ",
                &|i| ["r", "c", "k", "dt"][i].to_string(),
                &mut b,
            );
            let _ = writeln!(
                b,
                "        state->{rn} = {};\n        state->{} = {};\n    }}",
                outs[0], f.rate, outs[1]
            );
        }
        for line in b.lines() {
            if line.is_empty() {
                s.push('\n');
            } else {
                let _ = writeln!(s, "    {line}");
            }
        }
        let _ = writeln!(s, "    }}\n    return status;\n}}");
    }
    (h, s)
}

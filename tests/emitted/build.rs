//! Makes a module of every `generated/<spec>/<spec>.rs` (and of its single-precision variant
//! `generated/<spec>/f32/<spec>.rs`, as `<spec>_f32`) and dispatchers by spec name, so the
//! tests can drive each generated controller through arrays.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// A generated module: spec name, file, has reference filters, has controller states.
type Module = (String, PathBuf, bool, bool);

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../generated");
    println!("cargo:rerun-if-changed={}", root.display());
    let mut out = String::new();
    // double precision, then single precision with the suffix `_f32`
    for (suffix, sub, ty) in [("", "", "f64"), ("_f32", "f32/", "f32")] {
        let mut specs: Vec<Module> = Vec::new();
        if let Ok(rd) = std::fs::read_dir(&root) {
            for e in rd.flatten() {
                let name = e.file_name().to_string_lossy().to_string();
                let file = e.path().join(format!("{sub}{name}.rs"));
                if file.exists() {
                    println!("cargo:rerun-if-changed={}", file.display());
                    let text = std::fs::read_to_string(&file).unwrap_or_default();
                    specs.push((
                        name,
                        file,
                        text.contains("pub fn advance_references("),
                        text.contains("pub struct Memory"),
                    ));
                }
            }
        }
        specs.sort();
        modules(&mut out, &specs, suffix, ty);
    }
    let dest = Path::new(&std::env::var("OUT_DIR").expect("OUT_DIR")).join("modules.rs");
    std::fs::write(dest, out).expect("write modules.rs");
}

/// The modules of one precision and their dispatchers `SPECS{suffix}`, `step{suffix}` and
/// `update{suffix}` over arrays of `ty`.
fn modules(out: &mut String, specs: &[Module], suffix: &str, ty: &str) {
    for (name, file, _, _) in specs {
        let _ = writeln!(
            out,
            "#[path = {:?}]\npub mod {name}{suffix};",
            file.display().to_string()
        );
    }
    let upper = suffix.to_uppercase();
    let _ = writeln!(
        out,
        "/// The specs with generated Rust ({ty}).\npub const SPECS{upper}: &[&str] = &[{}];",
        specs
            .iter()
            .map(|s| format!("{:?}", s.0))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let _ = writeln!(out, "/// One `compute_commands` of spec `name`'s generated code ({ty}): commands, limit bits, domain flag,\n/// status bits, memory limit bits; `memory` (the controller states, empty without) is advanced\n/// over `dt`.\npub fn step{suffix}(name: &str, inputs: &[{ty}], gains: &[{ty}], memory: &mut [{ty}], dt: {ty}) -> Option<(Vec<{ty}>, u32, bool, u32, u32)> {{\n    match name {{");
    for (name, _, _, has_memory) in specs {
        let m = format!("{name}{suffix}");
        if *has_memory {
            let _ = writeln!(out, "        {name:?} => {{\n            let mut m = {m}::Memory::from_array((&*memory).try_into().ok()?);\n            let o = {m}::compute_commands(&{m}::Reading::from_array(inputs.try_into().ok()?), &{m}::Gains::from_array(gains.try_into().ok()?), &mut m, dt);\n            memory.copy_from_slice(&m.to_array());\n            Some((o.commands().to_vec(), o.limits, o.domain, o.status, o.memory_limits))\n        }}");
        } else {
            let _ = writeln!(out, "        {name:?} => {{\n            let _ = (memory, dt);\n            let o = {m}::compute_commands(&{m}::Reading::from_array(inputs.try_into().ok()?), &{m}::Gains::from_array(gains.try_into().ok()?));\n            Some((o.commands().to_vec(), o.limits, o.domain, o.status, 0))\n        }}");
        }
    }
    let _ = writeln!(out, "        _ => None,\n    }}\n}}");
    let _ = writeln!(out, "/// One `advance_references` of spec `name` ({ty}): the state as [reference, rate, …]; the status bits.\npub fn update{suffix}(name: &str, state: &mut [{ty}], commands: &[{ty}], gains: &[{ty}], dt: {ty}) -> Option<u32> {{\n    match name {{");
    for (name, _, has, _) in specs {
        let m = format!("{name}{suffix}");
        if *has {
            let _ = writeln!(out, "        {name:?} => {{\n            let mut s = {m}::References::from_array((&*state).try_into().ok()?);\n            let status = {m}::advance_references(&mut s, &{m}::Targets::from_array(commands.try_into().ok()?), &{m}::Gains::from_array(gains.try_into().ok()?), dt);\n            state.copy_from_slice(&s.to_array());\n            Some(status)\n        }}");
        }
    }
    let _ = writeln!(out, "        _ => None,\n    }}\n}}");
}

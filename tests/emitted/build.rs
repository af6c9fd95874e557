//! Makes a module of every `generated/<spec>/<spec>.rs` and a dispatcher by spec name, so the
//! tests can drive each generated controller through arrays.

use std::fmt::Write as _;
use std::path::Path;

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../generated");
    println!("cargo:rerun-if-changed={}", root.display());
    // (name, file, has reference filters, has controller states)
    let mut specs: Vec<(String, std::path::PathBuf, bool, bool)> = Vec::new();
    if let Ok(rd) = std::fs::read_dir(&root) {
        for e in rd.flatten() {
            let name = e.file_name().to_string_lossy().to_string();
            let file = e.path().join(format!("{name}.rs"));
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
    let mut out = String::new();
    for (name, file, _, _) in &specs {
        let _ = writeln!(
            out,
            "#[path = {:?}]\npub mod {name};",
            file.display().to_string()
        );
    }
    let _ = writeln!(
        out,
        "/// The specs with generated Rust.\npub const SPECS: &[&str] = &[{}];",
        specs
            .iter()
            .map(|s| format!("{:?}", s.0))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let _ = writeln!(out, "/// One `compute_commands` of spec `name`'s generated code: commands, limit bits, domain flag,\n/// status bits, memory limit bits; `memory` (the controller states, empty without) is advanced\n/// over `dt`.\npub fn step(name: &str, inputs: &[f64], gains: &[f64], memory: &mut [f64], dt: f64) -> Option<(Vec<f64>, u32, bool, u32, u32)> {{\n    match name {{");
    for (name, _, _, has_memory) in &specs {
        if *has_memory {
            let _ = writeln!(out, "        {name:?} => {{\n            let mut m = {name}::Memory::from_array((&*memory).try_into().ok()?);\n            let o = {name}::compute_commands(&{name}::Reading::from_array(inputs.try_into().ok()?), &{name}::Gains::from_array(gains.try_into().ok()?), &mut m, dt);\n            memory.copy_from_slice(&m.to_array());\n            Some((o.commands().to_vec(), o.limits, o.domain, o.status, o.memory_limits))\n        }}");
        } else {
            let _ = writeln!(out, "        {name:?} => {{\n            let _ = (memory, dt);\n            let o = {name}::compute_commands(&{name}::Reading::from_array(inputs.try_into().ok()?), &{name}::Gains::from_array(gains.try_into().ok()?));\n            Some((o.commands().to_vec(), o.limits, o.domain, o.status, 0))\n        }}");
        }
    }
    let _ = writeln!(out, "        _ => None,\n    }}\n}}");
    let _ = writeln!(out, "/// One `advance_references` of spec `name`: the state as [reference, rate, …]; the status bits.\npub fn update(name: &str, state: &mut [f64], commands: &[f64], gains: &[f64], dt: f64) -> Option<u32> {{\n    match name {{");
    for (name, _, has, _) in &specs {
        if *has {
            let _ = writeln!(out, "        {name:?} => {{\n            let mut s = {name}::References::from_array((&*state).try_into().ok()?);\n            let status = {name}::advance_references(&mut s, &{name}::Targets::from_array(commands.try_into().ok()?), &{name}::Gains::from_array(gains.try_into().ok()?), dt);\n            state.copy_from_slice(&s.to_array());\n            Some(status)\n        }}");
        }
    }
    let _ = writeln!(out, "        _ => None,\n    }}\n}}");
    let dest = Path::new(&std::env::var("OUT_DIR").expect("OUT_DIR")).join("modules.rs");
    std::fs::write(dest, out).expect("write modules.rs");
}

//! `lawsmith derive`: V, V̇ and the laws in base symbols, as text, LaTeX or JSON.

use crate::{read_spec, Format, EXIT_INVALID};
use lawsmith_expr::DagLimits;
use lawsmith_spec::{derivation, derive};
use std::path::PathBuf;
use std::process::ExitCode;

pub fn derive_cmd(paths: &[PathBuf], format: Format, limits: &DagLimits) -> ExitCode {
    let mut failed = false;
    let mut json_out = Vec::new();
    for (i, path) in paths.iter().enumerate() {
        let Some(crate::Loaded { mut spec, bytes }) = read_spec(path) else {
            failed = true;
            continue;
        };
        spec.dag.set_limits(limits.clone());
        let d = match derive(&mut spec) {
            Ok(d) => d,
            Err(e) => {
                crate::print_derive_error(path, &bytes, &e);
                failed = true;
                continue;
            }
        };
        if crate::verbosity() >= 2 {
            eprintln!(
                "lawsmith: derived {}: {} expression nodes, {} of {} term products of the expansion budget",
                spec.name,
                spec.dag.len(),
                d.work,
                limits.max_term_products
            );
        }
        match format {
            Format::Json => json_out.push(derivation::json(&spec, &d, &path.display().to_string())),
            Format::Text => {
                if i > 0 {
                    println!();
                }
                print!(
                    "{}",
                    derivation::text(&spec, &d, &path.display().to_string())
                );
            }
            Format::Latex => {
                if i > 0 {
                    println!();
                }
                print!("{}", derivation::latex(&spec, &d));
            }
        }
    }
    if format == Format::Json {
        crate::print_json_per_spec(json_out);
    }
    if failed {
        ExitCode::from(EXIT_INVALID)
    } else {
        ExitCode::SUCCESS
    }
}

//! The `lawsmith` command line: parses arguments, reads files, dispatches to the library
//! crates, prints, and maps outcomes to exit codes. No derivation or proof logic lives here.

mod build_cmd;
mod check_cmd;
mod derive_cmd;
mod emit_cmd;
mod progress;
mod sim_cmd;

use clap::{Parser, Subcommand, ValueEnum};
use lawsmith_spec::{load, render, Spec};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Exit code for a spec that cannot be read or is invalid.
const EXIT_INVALID: u8 = 3;

#[derive(Parser)]
#[command(
    name = "lawsmith",
    version,
    about = "Declare an energy-based control law, derive and prove its Lyapunov function, emit code."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Print V, the closed-loop V̇ (simplified) and each law in base symbols.
    Derive {
        /// Spec files (YAML).
        #[arg(required = true)]
        specs: Vec<PathBuf>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Text)]
        format: Format,
    },
    /// Prove the Lyapunov claim over the declared envelope, or find a counterexample.
    /// Exit code 0 proven, 1 falsified, 2 inconclusive, 3 invalid spec.
    Check {
        /// Spec files (YAML).
        #[arg(required = true)]
        specs: Vec<PathBuf>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
        /// Write the proof certificate (JSON) here; one spec only.
        #[arg(long, value_name = "PATH")]
        certificate: Option<PathBuf>,
        #[command(flatten)]
        limits: check_cmd::Limits,
    },
    /// Prove each spec and write its generated code (Rust, C99). An unproven law is refused
    /// (exit 1) unless --allow-unproven. With --check: regenerate every spec of --specs-dir in
    /// memory and compare with --generated; exit 1 with a unified diff when stale.
    Emit {
        /// Spec files (YAML).
        #[arg(required_unless_present = "check")]
        specs: Vec<PathBuf>,
        /// Languages to emit.
        #[arg(long, value_enum, default_value_t = LangArg::All)]
        lang: LangArg,
        /// Directory to write into.
        #[arg(long, value_name = "DIR", required_unless_present = "check")]
        out: Option<PathBuf>,
        /// Floating-point type of the generated code.
        #[arg(long, value_enum, default_value_t = FloatArg::F64)]
        float: FloatArg,
        /// Emit a law that is not proven, its header saying so in capitals.
        #[arg(long)]
        allow_unproven: bool,
        /// Compare the committed generated code with a fresh emission instead of writing.
        #[arg(long, conflicts_with_all = ["specs", "out"])]
        check: bool,
        /// Where the specs are (with --check).
        #[arg(long, value_name = "DIR", default_value = "specs")]
        specs_dir: PathBuf,
        /// Where the generated code is (with --check).
        #[arg(long, value_name = "DIR", default_value = "generated")]
        generated: PathBuf,
        #[command(flatten)]
        limits: check_cmd::Limits,
    },
    /// The main job on the example specs: prove every spec of --specs-dir, write --generated,
    /// fly the scenarios of --specs-dir/scenarios into --report, print a summary table.
    Build {
        /// Where the specs are.
        #[arg(long, value_name = "DIR", default_value = "specs")]
        specs_dir: PathBuf,
        /// Where to write the generated code (one directory per spec).
        #[arg(long, value_name = "DIR", default_value = "generated")]
        generated: PathBuf,
        /// Where to write the simulation report.
        #[arg(long, value_name = "DIR", default_value = "report")]
        report: PathBuf,
        #[command(flatten)]
        limits: check_cmd::Limits,
    },
    /// Fly a scenario: the spec's energy law (as generated) beside PID and LQR baselines.
    /// Writes CSV time series and SVG plots to --out and prints the metrics side by side.
    /// With --runs: a Monte Carlo campaign with dispersions, percentiles and histograms.
    Sim {
        /// The scenario (YAML).
        scenario: PathBuf,
        /// Directory to write into.
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
        /// Output format of the metrics.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
        /// Monte Carlo: this many dispersed runs.
        #[arg(long)]
        runs: Option<usize>,
        /// Seed of the dispersions.
        #[arg(long, default_value_t = 1)]
        seed: u64,
    },
    /// Re-evaluate every leaf box of a certificate against its spec, without searching.
    /// Exit code 0 accepted, 1 rejected, 3 unreadable input.
    Recheck {
        /// The certificate (JSON) written by `check --certificate`.
        certificate: PathBuf,
        /// The spec it claims to prove.
        spec: PathBuf,
    },
}

#[derive(Copy, Clone, PartialEq, Eq, ValueEnum)]
enum Format {
    Text,
    Latex,
    Json,
}

#[derive(Copy, Clone, PartialEq, Eq, ValueEnum)]
enum LangArg {
    Rust,
    C,
    All,
}

#[derive(Copy, Clone, PartialEq, Eq, ValueEnum)]
enum FloatArg {
    F32,
    F64,
}

#[derive(Copy, Clone, PartialEq, Eq, ValueEnum)]
enum ReportFormat {
    Text,
    Json,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    // Formulas may nest up to the parser's depth limit and definitions stack on each other;
    // run on a thread with a generous stack so every recursive pass has room.
    let worker = std::thread::Builder::new()
        .stack_size(256 << 20)
        .spawn(move || run(cli))
        .expect("spawn worker thread");
    worker.join().unwrap_or(ExitCode::from(101))
}

fn run(cli: Cli) -> ExitCode {
    match cli.command {
        Command::Derive { specs, format } => derive_cmd::derive_cmd(&specs, format),
        Command::Check {
            specs,
            format,
            certificate,
            limits,
        } => check_cmd::check_cmd(&specs, format, certificate.as_deref(), &limits),
        Command::Recheck { certificate, spec } => check_cmd::recheck_cmd(&certificate, &spec),
        Command::Sim {
            scenario,
            out,
            format,
            runs,
            seed,
        } => sim_cmd::sim_cmd(&scenario, &out, format, runs, seed),
        Command::Emit {
            specs,
            lang,
            out,
            float,
            allow_unproven,
            check,
            specs_dir,
            generated,
            limits,
        } => {
            let settings = limits.settings();
            if check {
                return emit_cmd::check_cmd(&specs_dir, &generated, &settings);
            }
            let lang = match lang {
                LangArg::Rust => lawsmith_codegen::Lang::Rust,
                LangArg::C => lawsmith_codegen::Lang::C,
                LangArg::All => lawsmith_codegen::Lang::All,
            };
            let float = match float {
                FloatArg::F32 => lawsmith_codegen::Float::F32,
                FloatArg::F64 => lawsmith_codegen::Float::F64,
            };
            let out = out.expect("clap requires --out without --check");
            emit_cmd::emit_cmd(&specs, lang, float, &out, allow_unproven, &settings)
        }
        Command::Build {
            specs_dir,
            generated,
            report,
            limits,
        } => build_cmd::build_cmd(&specs_dir, &generated, &report, &limits.settings()),
    }
}

/// A spec as read from disk.
struct Loaded {
    spec: Spec,
    /// The file's bytes (for its SHA-256).
    bytes: Vec<u8>,
}

/// Reads and validates one spec, printing diagnostics to stderr on failure.
fn read_spec(path: &Path) -> Option<Loaded> {
    let name = path.display().to_string();
    let bytes = match std::fs::read(path) {
        Ok(b) => b,
        Err(e) => {
            eprintln!("error[io]: cannot read {name}: {e}");
            return None;
        }
    };
    if bytes.len() > lawsmith_spec::MAX_SPEC_BYTES {
        eprintln!(
            "error[too-large]: {name} is {} bytes; the limit is {} bytes",
            bytes.len(),
            lawsmith_spec::MAX_SPEC_BYTES
        );
        return None;
    }
    let source = match std::str::from_utf8(&bytes) {
        Ok(s) => s,
        Err(e) => {
            let at = e.valid_up_to();
            let valid = String::from_utf8_lossy(&bytes[..at]).to_string();
            let line = valid.matches('\n').count() + 1;
            let col = valid.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
            eprintln!(
                "error[encoding]: {name}:{line}:{col}: the file is not valid UTF-8 (byte {at})"
            );
            return None;
        }
    };
    match load(source) {
        Ok(spec) => Some(Loaded { spec, bytes }),
        Err(diags) => {
            eprint!("{}", render(&name, source, &diags));
            eprintln!(
                "{name}: {} problem{} found",
                diags.len(),
                if diags.len() == 1 { "" } else { "s" }
            );
            None
        }
    }
}

/// Writes a file atomically: a temporary file beside it, then a rename, so a reader (or an
/// interrupted run) sees either the old content or the new, never half of it.
fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    use std::io::Write;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "out".into());
    let tmp = dir.join(format!(".{name}.lawsmith-{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

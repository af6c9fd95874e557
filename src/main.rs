//! The `lawsmith` command line: parses arguments, reads files, dispatches to the library
//! crates, prints, and maps outcomes to exit codes. No derivation or proof logic lives here.

// Printing never panics: when the reader of a pipe goes away (`lawsmith check … | head -1`),
// the rest of the output is dropped and the command still ends with its own exit code. These
// shadow the standard macros for every module declared below.
macro_rules! println {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stdout(), $($t)*);
    }};
}
macro_rules! print {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let _ = write!(std::io::stdout(), $($t)*);
    }};
}
macro_rules! eprintln {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr(), $($t)*);
    }};
}
macro_rules! eprint {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let _ = write!(std::io::stderr(), $($t)*);
    }};
}

mod build_cmd;
mod certcheck_run;
mod check_cmd;
mod derive_cmd;
mod emit_cmd;
mod margin_cmd;
mod new_cmd;
mod progress;
mod sim_cmd;

use clap::{Parser, Subcommand, ValueEnum};
use lawsmith_spec::{load, render, Spec};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Exit code for a spec that cannot be read or is invalid.
const EXIT_INVALID: u8 = 3;

/// Exit code for a request refused to keep the user's files safe, or one the command cannot
/// serve: an output directory inside `specs/` or holding files lawsmith did not write, a file
/// `new` or `emit` would overwrite, a spec the simulator cannot fly.
const EXIT_REFUSED: u8 = 4;

/// The file lawsmith keeps in an output directory outside the working directory: the names of
/// the files it wrote there, one per line, so that it may write there again and nothing else.
const MANIFEST: &str = ".lawsmith";

#[derive(Parser)]
#[command(
    name = "lawsmith",
    version,
    about = "Declare an energy-based control law, derive and prove its Lyapunov function, emit code."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Print only results and errors: no progress display, no notes.
    #[arg(long, short, global = true, conflicts_with = "verbose")]
    quiet: bool,
    /// Also print what is read and how long each command took (stderr).
    #[arg(long, short, global = true)]
    verbose: bool,
}

/// 0 quiet, 1 normal, 2 verbose; set once from the command line.
static VERBOSITY: std::sync::atomic::AtomicU8 = std::sync::atomic::AtomicU8::new(1);

/// The verbosity of this run: 0 quiet, 1 normal, 2 verbose.
fn verbosity() -> u8 {
    VERBOSITY.load(std::sync::atomic::Ordering::Relaxed)
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
        #[command(flatten)]
        expr: check_cmd::ExprLimits,
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
        rates: check_cmd::RateOptions,
        /// With --rates: also prove a region of attraction of the law as flown, each command
        /// clamped to its limits, beyond the saturation-free set (up to 12 proofs of 100,000
        /// boxes each).
        #[arg(long, requires = "rates")]
        saturated: bool,
        /// Also bound the round-off of the generated code, per command and precision (f64,
        /// f32), over every input the code accepts (emit and build always do).
        #[arg(long)]
        roundoff: bool,
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
        /// Floating-point type of the generated code: both (double precision in --out, single
        /// precision in --out/f32), or one of them in --out.
        #[arg(long, value_enum, default_value_t = FloatArg::Both)]
        float: FloatArg,
        /// Emit a law that is not proven, its header saying so in capitals.
        #[arg(long)]
        allow_unproven: bool,
        /// Allow --out inside specs/ or outside the working directory.
        #[arg(long)]
        force: bool,
        /// Compare the committed generated code with a fresh emission instead of writing.
        #[arg(long, conflicts_with_all = ["specs", "out"])]
        check: bool,
        /// Where the specs are (with --check).
        #[arg(long, value_name = "DIR", default_value = "specs")]
        specs_dir: PathBuf,
        /// Where the generated code is (with --check).
        #[arg(long, value_name = "DIR", default_value = "generated")]
        generated: PathBuf,
        /// Output format of the summary (and, with --check, of the differences).
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
        /// With --rates: the guidance filters emitted with the proved rate limits.
        #[command(flatten)]
        rates: check_cmd::RateOptions,
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
        /// Allow --generated or --report inside specs/ or outside the working directory.
        #[arg(long)]
        force: bool,
        /// Output format of the summary.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
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
        /// Allow --out inside specs/ or outside the working directory.
        #[arg(long)]
        force: bool,
    },
    /// The largest error of one uncertain quantity for which the required ultimate bounds
    /// still hold: proves the bound with the declared error range scaled by factors from 0 to
    /// --up-to, prints the curve and bisects for the largest factor. Exit code 0 found, 1 not
    /// met even with zero error, 3 invalid input.
    Margin {
        /// The spec (YAML), with an `uncertain:` section.
        spec: PathBuf,
        /// The uncertain quantity to vary, e.g. drag_true.
        #[arg(long, value_name = "NAME")]
        uncertain: String,
        /// Required bounds on the state errors, e.g. h=3,va=1.
        #[arg(long, value_name = "STATE=BOUND,...")]
        bound: String,
        /// Largest factor on the declared error range sampled.
        #[arg(long, value_name = "FACTOR", default_value_t = 1.5)]
        up_to: f64,
        /// Points of the curve (factors evenly spaced from 0).
        #[arg(long, default_value_t = 7)]
        points: usize,
        /// Write margin_NAME.svg and margin_NAME.csv here.
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Allow --out inside specs/ or outside the working directory.
        #[arg(long)]
        force: bool,
        /// Output format.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
        #[command(flatten)]
        limits: check_cmd::Limits,
    },
    /// Write a commented starter spec, NAME.yaml, that loads and proves as written.
    New {
        /// The spec's name (an identifier: letters, digits, underscores).
        name: String,
        /// Directory to write into.
        #[arg(long, value_name = "DIR", default_value = ".")]
        dir: PathBuf,
        /// Overwrite an existing file.
        #[arg(long)]
        force: bool,
        /// Output format of the confirmation.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
    },
    /// Print the JSON Schema of the spec format (committed as schema/spec.schema.json), or of
    /// the scenario format with --scenario (schema/scenario.schema.json).
    Schema {
        /// The scenario format instead of the spec format.
        #[arg(long)]
        scenario: bool,
    },
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell) to stdout.
    Completions {
        /// The shell.
        shell: clap_complete::Shell,
    },
    /// Re-evaluate every leaf box of a certificate against its spec, without searching.
    /// Exit code 0 accepted, 1 rejected, 3 unreadable input.
    Recheck {
        /// The certificate (JSON) written by `check --certificate`.
        certificate: PathBuf,
        /// The spec it claims to prove.
        spec: PathBuf,
        /// Output format.
        #[arg(long, value_enum, default_value_t = ReportFormat::Text)]
        format: ReportFormat,
        #[command(flatten)]
        expr: check_cmd::ExprLimits,
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
    Both,
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
    let code = worker.join().unwrap_or(ExitCode::from(101));
    if std::env::var_os("LAWSMITH_PEAK_RSS").is_some() {
        // a test helper: the peak resident set of this process, from the kernel (Linux)
        if let Some(kib) = peak_rss_kib() {
            eprintln!("peak-rss-kib: {kib}");
        }
    }
    code
}

/// `VmHWM` of /proc/self/status, in KiB (None where the kernel does not provide it).
fn peak_rss_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn run(cli: Cli) -> ExitCode {
    let level = if cli.quiet {
        0
    } else if cli.verbose {
        2
    } else {
        1
    };
    VERBOSITY.store(level, std::sync::atomic::Ordering::Relaxed);
    let started = std::time::Instant::now();
    let code = dispatch(cli.command);
    if verbosity() >= 2 {
        eprintln!("lawsmith: done in {:.2} s", started.elapsed().as_secs_f64());
    }
    code
}

fn dispatch(command: Command) -> ExitCode {
    match command {
        Command::New {
            name,
            dir,
            force,
            format,
        } => new_cmd::new_cmd(&name, &dir, force, format),
        Command::Schema { scenario } => {
            let schema = if scenario {
                lawsmith_sim::scenario::json_schema()
            } else {
                lawsmith_spec::json_schema()
            };
            let text = serde_json::to_string_pretty(&schema).expect("json");
            println!("{text}");
            ExitCode::SUCCESS
        }
        Command::Completions { shell } => {
            use clap::CommandFactory;
            clap_complete::generate(
                shell,
                &mut Cli::command(),
                "lawsmith",
                &mut std::io::stdout(),
            );
            ExitCode::SUCCESS
        }
        Command::Derive {
            specs,
            format,
            expr,
        } => derive_cmd::derive_cmd(&specs, format, &expr.dag()),
        Command::Check {
            specs,
            format,
            certificate,
            rates,
            saturated,
            roundoff,
            limits,
        } => check_cmd::check_cmd(
            &specs,
            format,
            certificate.as_deref(),
            &limits
                .with_rates(&rates)
                .with_saturated(saturated)
                .with_roundoff(roundoff),
        ),
        Command::Recheck {
            certificate,
            spec,
            format,
            expr,
        } => check_cmd::recheck_cmd(&certificate, &spec, &expr, format),
        Command::Margin {
            spec,
            uncertain,
            bound,
            up_to,
            points,
            out,
            force,
            format,
            limits,
        } => {
            if let Some(Err(c)) = out.as_deref().map(|o| out_dir_allowed(o, force)) {
                return ExitCode::from(c);
            }
            margin_cmd::margin_cmd(
                &spec,
                &uncertain,
                &bound,
                up_to,
                points,
                out.as_deref(),
                format,
                &limits,
            )
        }
        Command::Sim {
            scenario,
            out,
            format,
            runs,
            seed,
            force,
        } => match out_dir_allowed(&out, force) {
            Ok(()) => sim_cmd::sim_cmd(&scenario, &out, format, runs, seed),
            Err(c) => ExitCode::from(c),
        },
        Command::Emit {
            specs,
            lang,
            out,
            float,
            allow_unproven,
            force,
            check,
            specs_dir,
            generated,
            format,
            rates,
            limits,
        } => {
            let settings = limits.with_rates(&rates).with_roundoff(true).settings();
            if check {
                return emit_cmd::check_cmd(&specs_dir, &generated, &settings, format);
            }
            let lang = match lang {
                LangArg::Rust => lawsmith_codegen::Lang::Rust,
                LangArg::C => lawsmith_codegen::Lang::C,
                LangArg::All => lawsmith_codegen::Lang::All,
            };
            let floats: &[(lawsmith_codegen::Float, &str)] = match float {
                FloatArg::F32 => &[(lawsmith_codegen::Float::F32, "")],
                FloatArg::F64 => &[(lawsmith_codegen::Float::F64, "")],
                FloatArg::Both => &emit_cmd::BOTH,
            };
            let out = out.expect("clap requires --out without --check");
            if let Err(c) = out_dir_allowed(&out, force) {
                return ExitCode::from(c);
            }
            emit_cmd::emit_cmd(
                &specs,
                lang,
                floats,
                &out,
                allow_unproven,
                &settings,
                format,
            )
        }
        Command::Build {
            specs_dir,
            generated,
            report,
            force,
            format,
            limits,
        } => match out_dir_allowed(&generated, force).and(out_dir_allowed(&report, force)) {
            Ok(()) => build_cmd::build_cmd(
                &specs_dir,
                &generated,
                &report,
                &limits.with_roundoff(true).settings(),
                format,
            ),
            Err(c) => ExitCode::from(c),
        },
    }
}

/// `path` made absolute and resolved through its nearest existing ancestor (the rest may not
/// exist yet).
fn resolved(path: &Path) -> Option<PathBuf> {
    let cwd = std::env::current_dir().ok()?.canonicalize().ok()?;
    let joined = cwd.join(path);
    let mut existing = joined.as_path();
    let mut rest = Vec::new();
    while !existing.exists() {
        match (existing.parent(), existing.file_name()) {
            (Some(p), Some(n)) => {
                rest.push(n.to_os_string());
                existing = p;
            }
            _ => break,
        }
    }
    let mut out = existing
        .canonicalize()
        .unwrap_or_else(|_| existing.to_path_buf());
    for n in rest.iter().rev() {
        out.push(n);
    }
    Some(out)
}

/// True when `path` lies outside the working directory.
fn outside_cwd(path: &Path) -> bool {
    let cwd = std::env::current_dir().and_then(|d| d.canonicalize());
    match (cwd, resolved(path)) {
        (Ok(c), Some(p)) => !p.starts_with(c),
        _ => false,
    }
}

/// The first file under `dir` that lawsmith did not write: neither listed in its directory's
/// manifest nor carrying the marker line of generated code.
fn foreign_file(dir: &Path) -> Option<PathBuf> {
    let listed: Vec<String> = std::fs::read_to_string(dir.join(MANIFEST))
        .map(|t| t.lines().map(str::to_string).collect())
        .unwrap_or_default();
    for e in std::fs::read_dir(dir).ok()?.flatten() {
        let p = e.path();
        let name = e.file_name().to_string_lossy().to_string();
        if p.is_dir() {
            if let Some(f) = foreign_file(&p) {
                return Some(f);
            }
            continue;
        }
        let marked = || {
            std::fs::read_to_string(&p).is_ok_and(|t| {
                t.lines()
                    .take(3)
                    .any(|l| l.contains(lawsmith_codegen::MARKER))
            })
        };
        if name != MANIFEST && !listed.contains(&name) && !marked() {
            return Some(p);
        }
    }
    None
}

/// May lawsmith write into the output directory `out`? Not inside `specs/` (where the user's
/// specs live); and outside the working directory only where it would not mix with the
/// user's own files: a directory that does not exist yet, is empty, or holds only files
/// lawsmith wrote. `force` allows anything.
fn out_dir_allowed(out: &Path, force: bool) -> Result<(), u8> {
    let (Ok(cwd), Some(target)) = (
        std::env::current_dir().and_then(|d| d.canonicalize()),
        resolved(out),
    ) else {
        return Ok(());
    };
    if force {
        return Ok(());
    }
    let problem = if target.starts_with(cwd.join("specs")) {
        Some("is inside specs/, where the specs live".to_string())
    } else if target.starts_with(&cwd) || !target.exists() {
        None
    } else if !target.is_dir() {
        Some("is a file, not a directory".to_string())
    } else {
        foreign_file(&target).map(|f| {
            format!(
                "holds {}, which lawsmith did not write (outputs would mix with your files)",
                f.display()
            )
        })
    };
    match problem {
        None => Ok(()),
        Some(why) => {
            eprintln!(
                "error[out-path]: {} {why}; choose a new or empty directory, or pass --force to write there anyway",
                out.display()
            );
            Err(EXIT_REFUSED)
        }
    }
}

/// Prints a JSON document to stdout, pretty.
fn print_json(v: &serde_json::Value) {
    println!("{}", serde_json::to_string_pretty(v).expect("json"));
}

/// Prints the documents of a command over several specs: the document itself for one spec,
/// an array for several.
fn print_json_per_spec(mut docs: Vec<serde_json::Value>) {
    let v = if docs.len() == 1 {
        docs.pop().expect("one")
    } else {
        serde_json::Value::Array(docs)
    };
    print_json(&v);
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
    // refuse a huge file before reading it
    let too_large = |len: u64| {
        let over = len > lawsmith_spec::MAX_SPEC_BYTES as u64;
        if over {
            eprintln!(
                "error[too-large]: {name}:1:1: the file is {len} bytes; the limit is {} bytes (MAX_SPEC_BYTES)",
                lawsmith_spec::MAX_SPEC_BYTES
            );
            eprintln!("  = hint: split the file or remove generated content");
        }
        over
    };
    // a regular file is measured before it is read; anything else (a pipe) after
    if std::fs::metadata(path).is_ok_and(|m| m.is_file() && too_large(m.len())) {
        return None;
    }
    let bytes = match std::fs::read(path) {
        Ok(b) => b,
        Err(e) => {
            eprintln!("error[io]: cannot read {name}: {e}");
            return None;
        }
    };
    if too_large(bytes.len() as u64) {
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
        Ok(spec) => {
            if verbosity() >= 2 {
                eprintln!(
                    "lawsmith: read {name}: {} bytes, {} symbols, claim {}",
                    bytes.len(),
                    spec.symbols.len(),
                    spec.claim.name()
                );
            }
            Some(Loaded { spec, bytes })
        }
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

/// Prints an error of `check` (or of the derivation under it): located in the spec file when
/// the derivation says where, else as one line.
fn print_check_error(path: &Path, bytes: &[u8], e: &lawsmith_verify::CheckError) {
    match &e.derive {
        Some(d) => print_derive_error(path, bytes, d),
        None => eprintln!("error[check]: {}: {e}", path.display()),
    }
}

/// Prints an error of the derivation, rendered against the spec's text like a load error.
fn print_derive_error(path: &Path, bytes: &[u8], e: &lawsmith_spec::DeriveError) {
    let source = String::from_utf8_lossy(bytes);
    eprint!(
        "{}",
        render(&path.display().to_string(), &source, &[e.diagnostic()])
    );
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
        return result;
    }
    if outside_cwd(path) {
        // so that a later run may write here again (see `out_dir_allowed`)
        let manifest = dir.join(MANIFEST);
        let mut listed = std::fs::read_to_string(&manifest).unwrap_or_default();
        if !listed.lines().any(|l| l == name) {
            listed.push_str(&name);
            listed.push('\n');
            std::fs::write(&manifest, listed)?;
        }
    }
    Ok(())
}

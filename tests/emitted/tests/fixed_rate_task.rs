//! The fixed-rate control tasks of `examples/` (Rust and C), built and run: a 10 m climb at
//! 22 m/s on the spec's own model must end at the commanded altitude and airspeed (the
//! proved law drives both errors to zero, and the climb stays inside the limits and the
//! envelope), and the C task must fly the same flight as the Rust one.

use lawsmith_emitted::energy_longitudinal as law;
use std::path::PathBuf;
use std::process::Command;

#[path = "../../../examples/fixed_rate_task.rs"]
mod example;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

#[test]
fn the_example_tasks_climb_to_the_command_in_rust_and_in_c() {
    let rust = example::fly(130.0, 22.0, 60.0);
    println!(
        "Rust task: t = {} s, h = {:.4} m, va = {:.4} m/s",
        rust.t, rust.h, rust.va
    );
    // the guidance filter reaches 130 m in a few time constants of k_h = 0.3 1/s (rate
    // limited to 3 m/s); 60 s is many of them, and the energy loops are faster still
    assert!((rust.h - 130.0).abs() < 0.05, "h = {}", rust.h);
    assert!((rust.va - 22.0).abs() < 0.05, "va = {}", rust.va);
    assert_eq!((rust.limited, rust.outside), (0, 0));

    let dir = std::env::temp_dir().join(format!("lawsmith-task-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let exe = dir.join("fixed_rate_task");
    let gen = root().join("generated/energy_longitudinal");
    let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
    let out = Command::new(&cc)
        .args(["-std=c99", "-Wall", "-Wextra", "-Werror", "-O2", "-I"])
        .arg(&gen)
        .arg(root().join("examples/fixed_rate_task.c"))
        .arg(gen.join("energy_longitudinal.c"))
        .args(["-lm", "-o"])
        .arg(&exe)
        .output()
        .expect("a C compiler (see .ci/run)");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = Command::new(&exe)
        .args(["130", "22", "60"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    let v: Vec<f64> = text
        .split_whitespace()
        .map(|w| w.parse().unwrap())
        .collect();
    println!("C task: {text}");
    assert_eq!(v[0], rust.t);
    // the same flight: the C's <math.h> may differ from libm in the last ulp
    assert!(
        (v[1] - rust.h).abs() < 1e-9 && (v[2] - rust.va).abs() < 1e-9,
        "{text}"
    );
    assert_eq!((v[3], v[4]), (0.0, 0.0));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn the_guidance_starts_at_rest_inside_its_ranges() {
    // h_r is proved over [30, 600] m and va_r over [15, 30] m/s (the spec)
    let at = |h_cmd, va_cmd| law::References::start(&law::Targets { h_cmd, va_cmd });
    let g = at(120.0, 22.0);
    assert_eq!(
        (g.h_r, g.va_r, g.hdot_r, g.vadot_r),
        (120.0, 22.0, 0.0, 0.0)
    );
    let g = at(10.0, 40.0);
    assert_eq!((g.h_r, g.va_r), (30.0, 30.0));
    let g = at(f64::NAN, f64::NAN);
    assert_eq!((g.h_r, g.va_r), (315.0, 22.5));
}

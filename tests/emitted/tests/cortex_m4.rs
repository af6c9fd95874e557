//! The single-precision C (`generated/<spec>/f32/`) cross-compiled for an ARM Cortex-M4F, a
//! common flight-controller core whose FPU is single precision only (Arm's FPv4-SP):
//! `arm-none-eabi-gcc -mcpu=cortex-m4 -mfpu=fpv4-sp-d16 -mfloat-abi=hard -O2`, strict, with
//! `-Wdouble-promotion`. The object must call no double-precision helper (`__aeabi_d*`, the
//! soft-float routines of the Arm run-time ABI) and no double-precision `<math.h>` function,
//! and contain no fused multiply-add (the interpreter rounds every operation). Figures
//! printed: code size and the stack of `compute_commands` (`-fstack-usage`).
//!
//! Without the cross compiler the test says so and checks nothing, unless
//! `LAWSMITH_REQUIRE_ARM` is set (`scripts/test` sets it once it has installed Debian's
//! `gcc-arm-none-eabi`), when it fails.

use std::path::PathBuf;
use std::process::Command;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn tool(name: &str) -> Option<String> {
    let t = format!("arm-none-eabi-{name}");
    Command::new(&t).arg("--version").output().ok()?;
    Some(t)
}

const FLAGS: [&str; 15] = [
    "-std=c99",
    "-Wall",
    "-Wextra",
    "-Wpedantic",
    "-Werror",
    "-Wconversion",
    "-Wshadow",
    "-Wdouble-promotion",
    "-mcpu=cortex-m4",
    "-mthumb",
    "-mfpu=fpv4-sp-d16",
    "-mfloat-abi=hard",
    "-O2",
    "-fstack-usage",
    "-c",
];

/// The double-precision functions of `<math.h>` the generated code could call.
const DOUBLE_MATH: [&str; 14] = [
    "sin", "cos", "tan", "asin", "acos", "atan", "atan2", "sqrt", "exp", "log", "fabs", "fmin",
    "fmax", "pow",
];

#[test]
fn single_precision_c_builds_for_a_cortex_m4f_without_double_arithmetic() {
    let (Some(gcc), Some(nm), Some(objdump)) = (tool("gcc"), tool("nm"), tool("objdump")) else {
        assert!(
            std::env::var_os("LAWSMITH_REQUIRE_ARM").is_none(),
            "LAWSMITH_REQUIRE_ARM is set but arm-none-eabi-gcc does not run"
        );
        println!("arm-none-eabi-gcc not installed: the Cortex-M4F build is not checked");
        return;
    };
    let dir = std::env::temp_dir().join(format!("lawsmith-m4-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    assert!(!lawsmith_emitted::SPECS_F32.is_empty());
    for &name in lawsmith_emitted::SPECS_F32 {
        let gen = root().join("generated").join(name).join("f32");
        let obj = dir.join(format!("{name}.o"));
        let out = Command::new(&gcc)
            .args(FLAGS)
            .arg(gen.join(format!("{name}.c")))
            .arg("-I")
            .arg(&gen)
            .arg("-o")
            .arg(&obj)
            .current_dir(&dir)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let syms = Command::new(&nm).arg(&obj).output().unwrap();
        let syms = String::from_utf8_lossy(&syms.stdout).to_string();
        let undefined: Vec<&str> = syms
            .lines()
            .filter_map(|l| l.trim().strip_prefix("U "))
            .collect();
        assert!(
            !undefined
                .iter()
                .any(|s| s.starts_with("__aeabi_d") || DOUBLE_MATH.contains(s)),
            "{name}: double-precision calls in the Cortex-M4F object: {undefined:?}"
        );
        let dis = Command::new(&objdump).arg("-d").arg(&obj).output().unwrap();
        let dis = String::from_utf8_lossy(&dis.stdout).to_string();
        let fused = dis
            .lines()
            .filter(|l| {
                ["vfma", "vfms", "vfnma", "vfnms"]
                    .iter()
                    .any(|i| l.contains(i))
            })
            .count();
        assert_eq!(fused, 0, "{name}: fused multiply-adds in the object");
        // the stack of compute_commands, as gcc reports it ("static": a fixed amount)
        let su = std::fs::read_to_string(obj.with_extension("su")).unwrap();
        let step = su
            .lines()
            .find(|l| l.contains(&format!("{name}_compute_commands\t")))
            .expect("compute_commands in the stack usage");
        let fields: Vec<&str> = step.split('\t').collect();
        assert_eq!(fields.get(2), Some(&"static"), "{name}: {step}");
        let text = std::fs::metadata(&obj).map(|m| m.len()).unwrap_or(0);
        let size = Command::new(tool("size").unwrap())
            .arg(&obj)
            .output()
            .unwrap();
        let size = String::from_utf8_lossy(&size.stdout).to_string();
        let code: u64 = size
            .lines()
            .nth(1)
            .and_then(|l| l.split_whitespace().next())
            .and_then(|w| w.parse().ok())
            .unwrap();
        assert!(code > 0 && code < text, "{name}: {size}");
        println!(
            "{name}: Cortex-M4F f32 object: {code} bytes of code, compute_commands {} bytes of stack (own frame), undefined: {}",
            fields[1],
            undefined.join(" ")
        );
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

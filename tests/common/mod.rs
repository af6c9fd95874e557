//! Helpers shared by the end-to-end tests of the binary.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

pub fn lawsmith(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(args)
        .current_dir(root())
        .output()
        .unwrap()
}

pub fn lawsmith_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

pub fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let dest = to.join(e.file_name());
        if e.path().is_dir() {
            copy_dir(&e.path(), &dest);
        } else {
            std::fs::copy(e.path(), dest).unwrap();
        }
    }
}

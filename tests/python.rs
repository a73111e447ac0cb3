//! The Python module (python/): built into a virtual environment of its own
//! under target/ and its pytest suite run there. The environment is made
//! on first use with the machine's `python3` (or `$WARDSMITH_PYTHON`), and
//! maturin, pytest and NumPy come from PyPI; later runs reuse it. The
//! module itself is rebuilt by maturin when the Rust code changed.

use std::path::{Path, PathBuf};
use std::process::Command;

fn run(cmd: &mut Command, what: &str) {
    let out = cmd
        .output()
        .unwrap_or_else(|e| panic!("{what}: could not start {cmd:?}: {e}"));
    assert!(
        out.status.success(),
        "{what} failed ({}):\n--- stdout\n{}\n--- stderr\n{}",
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

fn succeeds(cmd: &mut Command) -> bool {
    cmd.output().map(|o| o.status.success()).unwrap_or(false)
}

#[test]
fn python_module_passes_its_pytest_suite() {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| root.join("target"));
    let venv = target.join("python-venv");
    let python = venv.join("bin").join("python");
    if !python.exists() {
        let base = std::env::var("WARDSMITH_PYTHON").unwrap_or_else(|_| "python3".into());
        run(
            Command::new(&base).arg("-m").arg("venv").arg(&venv),
            "making the virtual environment (python3 -m venv; Debian needs python3-venv)",
        );
    }
    let have = |module: &str| {
        succeeds(
            Command::new(&python)
                .arg("-c")
                .arg(format!("import {module}")),
        )
    };
    if !(have("maturin") && have("pytest") && have("numpy")) {
        run(
            Command::new(&python)
                .args([
                    "-m",
                    "pip",
                    "install",
                    "--quiet",
                    "--disable-pip-version-check",
                ])
                .args(["maturin>=1.5,<2", "pytest>=7", "numpy>=1.20"]),
            "installing maturin, pytest and numpy from PyPI",
        );
    }
    build(&root, &target, &venv);
    run(
        Command::new(&python)
            .args(["-m", "pytest", "-q", "-p", "no:cacheprovider"])
            .arg(root.join("python").join("tests"))
            .current_dir(&root),
        "the pytest suite of python/tests",
    );
}

/// `maturin develop` into the environment, with a target folder of its own
/// (the outer `cargo test` holds the lock of the usual one).
fn build(root: &Path, target: &Path, venv: &Path) {
    let maturin = venv.join("bin").join("maturin");
    run(
        Command::new(maturin)
            .arg("develop")
            .arg("--quiet")
            .arg("--manifest-path")
            .arg(root.join("python").join("Cargo.toml"))
            .env("VIRTUAL_ENV", venv)
            .env("CARGO_TARGET_DIR", target.join("python"))
            .env_remove("CARGO_BUILD_TARGET_DIR"),
        "building the module with maturin develop",
    );
}

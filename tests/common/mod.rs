//! Helpers shared by the end-to-end tests: the built binary, the demo
//! models, and Python with the reference libraries (SciPy, SymPy, libSBML)
//! for cross-checks. Missing Python packages are installed on first use, so
//! `cargo test` works on a fresh machine with Python 3 and pip.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

/// The path of the built `ratewright` binary.
pub fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_ratewright"))
}

/// Runs the binary with arguments from the crate root.
pub fn ratewright(args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("the ratewright binary runs")
}

pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Every `.mech` file in models/, sorted.
pub fn models() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(root().join("models"))
        .expect("models/ exists")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "mech"))
        .collect();
    v.sort();
    v
}

static PYTHON_READY: OnceLock<Result<(), String>> = OnceLock::new();

/// Runs `install` holding one lock shared by every test thread and every
/// test binary (a file lock under target/), so that a fresh machine's first
/// `cargo test` never runs two package managers at once: parallel apt-get
/// processes collide on dpkg's lock, and parallel pip installs on
/// site-packages.
fn serialised<T>(install: impl FnOnce() -> T) -> T {
    static IN_PROCESS: std::sync::Mutex<()> = std::sync::Mutex::new(());
    let _thread = IN_PROCESS.lock().unwrap_or_else(|e| e.into_inner());
    let dir = root().join("target");
    let _ = std::fs::create_dir_all(&dir);
    let file = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(dir.join("test-installs.lock"))
        .expect("the install lock file opens");
    file.lock().expect("the install lock is taken");
    let result = install();
    let _ = file.unlock();
    result
}

/// Makes sure `python3` can import numpy, scipy, sympy and libsbml,
/// installing them with pip if needed. Panics with the pip output if that
/// fails: a cross-check that cannot run is a failed test, not a skipped one.
pub fn ensure_python() {
    let ready = PYTHON_READY.get_or_init(|| {
        let probe = |py: &str| {
            Command::new("python3")
                .args(["-c", py])
                .output()
                .map(|o| o.status.success())
                .unwrap_or(false)
        };
        if probe("import numpy, scipy, sympy, libsbml") {
            return Ok(());
        }
        serialised(|| {
            // Another binary may have installed them while this one waited.
            if probe("import numpy, scipy, sympy, libsbml") {
                return Ok(());
            }
            let out = Command::new("python3")
                .args([
                    "-m",
                    "pip",
                    "install",
                    "--quiet",
                    "numpy",
                    "scipy",
                    "sympy",
                    "python-libsbml",
                ])
                .output()
                .map_err(|e| format!("cannot run pip: {e}"))?;
            if !out.status.success() || !probe("import numpy, scipy, sympy, libsbml") {
                return Err(format!(
                    "installing numpy scipy sympy python-libsbml failed:\n{}\n{}",
                    String::from_utf8_lossy(&out.stdout),
                    String::from_utf8_lossy(&out.stderr)
                ));
            }
            Ok(())
        })
    });
    if let Err(e) = ready {
        panic!("{e}");
    }
}

/// Runs a Python script (file under tests/python/) with arguments; returns
/// its output. Panics if Python is unavailable.
pub fn python(script: &Path, args: &[&str]) -> Output {
    ensure_python();
    Command::new("python3")
        .arg(script)
        .args(args)
        .current_dir(root())
        .output()
        .expect("python3 runs")
}

static OCTAVE_READY: OnceLock<Result<(), String>> = OnceLock::new();
static R_READY: OnceLock<Result<(), String>> = OnceLock::new();
static GRAPHVIZ_READY: OnceLock<Result<(), String>> = OnceLock::new();
static LATEX_READY: OnceLock<Result<(), String>> = OnceLock::new();

/// Makes sure `octave-cli` runs, installing GNU Octave from the system's
/// package manager if needed. Panics if that is impossible: the Octave
/// check must fail, not skip.
pub fn ensure_octave() {
    ensure_tool(&OCTAVE_READY, "octave-cli", &["--version"], &["octave"]);
}

/// Makes sure `Rscript` runs with the deSolve package (Debian's
/// r-base-core and r-cran-desolve), installing them if needed.
pub fn ensure_r() {
    ensure_tool(
        &R_READY,
        "Rscript",
        &["-e", "library(deSolve)"],
        &["r-base-core", "r-cran-desolve"],
    );
}

/// Makes sure Graphviz's `dot` runs, installing it if needed.
pub fn ensure_graphviz() {
    ensure_tool(&GRAPHVIZ_READY, "dot", &["-V"], &["graphviz"]);
}

/// Makes sure `pdflatex` runs (Debian's texlive-latex-base, which has
/// amsmath), installing it if needed.
pub fn ensure_latex() {
    ensure_tool(
        &LATEX_READY,
        "pdflatex",
        &["--version"],
        &["texlive-latex-base"],
    );
}

/// Runs `program probe` once per test binary; if that fails, installs
/// `packages` with Debian's apt-get (as root or through sudo) and probes
/// again. Panics with the installer's output if the tool still does not run.
fn ensure_tool(
    ready: &OnceLock<Result<(), String>>,
    program: &str,
    probe: &[&str],
    packages: &[&str],
) {
    let ready = ready.get_or_init(|| {
        let works = || {
            Command::new(program)
                .args(probe)
                .output()
                .map(|o| o.status.success())
                .unwrap_or(false)
        };
        if works() {
            return Ok(());
        }
        serialised(|| {
            if works() {
                return Ok(());
            }
            let root = Command::new("id")
                .arg("-u")
                .output()
                .map(|o| String::from_utf8_lossy(&o.stdout).trim() == "0")
                .unwrap_or(false);
            let apt = |args: &[&str]| {
                let mut cmd = if root {
                    Command::new("apt-get")
                } else {
                    Command::new("sudo")
                };
                if !root {
                    cmd.arg("apt-get");
                }
                cmd.args(args)
                    .env("DEBIAN_FRONTEND", "noninteractive")
                    .output()
            };
            // apt-get waits for dpkg's lock (held by a package manager outside
            // the tests, say) instead of failing at once.
            let update = apt(&["-o", "DPkg::Lock::Timeout=900", "update", "-qq"])
                .map_err(|e| format!("cannot run apt-get: {e}"))?;
            let mut args = vec!["-o", "DPkg::Lock::Timeout=900", "install", "-y", "-qq"];
            args.extend_from_slice(packages);
            let install = apt(&args).map_err(|e| format!("cannot run apt-get: {e}"))?;
            if works() {
                Ok(())
            } else {
                Err(format!(
                    "installing {} failed (apt-get install -y {}):\n{}{}",
                    program,
                    packages.join(" "),
                    String::from_utf8_lossy(&update.stderr),
                    String::from_utf8_lossy(&install.stderr)
                ))
            }
        })
    });
    if let Err(e) = ready {
        panic!("{e}");
    }
}

/// Makes sure `python3` can import `module`, installing `package` with pip
/// (under the install lock) if not. Panics with pip's output if that fails:
/// a check that needs the library fails, it is not skipped.
pub fn ensure_python_module(module: &str, package: &str) {
    let probe = || {
        Command::new("python3")
            .args(["-c", &format!("import {module}")])
            .output()
            .map(|o| o.status.success())
            .unwrap_or(false)
    };
    if probe() {
        return;
    }
    let result = serialised(|| {
        if probe() {
            return Ok(());
        }
        let out = Command::new("python3")
            .args(["-m", "pip", "install", "--quiet", package])
            .output()
            .map_err(|e| format!("cannot run pip: {e}"))?;
        if out.status.success() && probe() {
            Ok(())
        } else {
            Err(format!(
                "installing {package} failed:\n{}\n{}",
                String::from_utf8_lossy(&out.stdout),
                String::from_utf8_lossy(&out.stderr)
            ))
        }
    });
    if let Err(e) = result {
        panic!("{e}");
    }
}

/// Makes sure `node` and `npm` run (Debian's nodejs and npm, installed with
/// apt-get if missing) and that the npm `packages` are installed in
/// `folder` (with `npm install`, under the install lock). Panics if not.
pub fn ensure_npm_packages(folder: &Path, packages: &[&str]) {
    static NODE_READY: OnceLock<Result<(), String>> = OnceLock::new();
    ensure_tool(&NODE_READY, "npm", &["--version"], &["nodejs", "npm"]);
    let installed = || {
        packages.iter().all(|p| {
            folder
                .join("node_modules")
                .join(p)
                .join("package.json")
                .exists()
        })
    };
    if installed() {
        return;
    }
    let result = serialised(|| {
        if installed() {
            return Ok(());
        }
        let _ = std::fs::create_dir_all(folder);
        let out = Command::new("npm")
            .args(["install", "--no-audit", "--no-fund", "--silent", "--prefix"])
            .arg(folder)
            .args(packages)
            .output()
            .map_err(|e| format!("cannot run npm: {e}"))?;
        if out.status.success() && installed() {
            Ok(())
        } else {
            Err(format!(
                "npm install {} failed:\n{}\n{}",
                packages.join(" "),
                String::from_utf8_lossy(&out.stdout),
                String::from_utf8_lossy(&out.stderr)
            ))
        }
    });
    if let Err(e) = result {
        panic!("{e}");
    }
}

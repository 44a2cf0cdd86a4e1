//! End-to-end checks of `ratewright emit`: the emitted code is run by the
//! tools it targets and compared with outside references (SciPy's
//! integrator, gcc-compiled C, libSBML's validator, GNU Octave, R with
//! deSolve, Graphviz, pdflatex, rustc) and
//! with central finite differences of its own right-hand side.

mod common;

use common::{models, python, ratewright, root};
use ratewright::model::{Expr, Model, Sym, load_path};
use std::path::{Path, PathBuf};
use std::process::Command;

/// Loads a demo model (the front end is tested elsewhere).
fn load(path: &Path) -> Model {
    let loaded = load_path(path);
    loaded
        .model
        .unwrap_or_else(|| panic!("{} loads: {:?}", path.display(), loaded.diagnostics))
}

/// The compiler's own right-hand side of the emitted system (full, or
/// reduced through `network::reduce`), evaluated at state `y`.
struct Reference {
    model: Model,
    rhs: Vec<ratewright::model::Expr>,
    state: Vec<usize>,
}

impl Reference {
    fn new(model: &Model, reduced: bool) -> Reference {
        if reduced {
            let r = ratewright::network::reduce(model).expect("reduces");
            Reference {
                rhs: r.rhs_exprs(),
                state: r.independent.clone(),
                model: r.model,
            }
        } else {
            Reference {
                rhs: model.rhs_exprs(),
                state: (0..model.species.len()).collect(),
                model: model.clone(),
            }
        }
    }
    fn full(&self, y: &[f64]) -> Vec<f64> {
        let mut full = self.model.initial_state();
        for (k, &i) in self.state.iter().enumerate() {
            full[i] = y[k];
        }
        full
    }
    fn rhs(&self, y: &[f64]) -> Vec<f64> {
        let full = self.full(y);
        self.rhs
            .iter()
            .map(|e| self.model.eval_at(e, &full, 0.5))
            .collect()
    }
    /// Richardson-extrapolated central differences, error O(h⁴) (common
    /// practice; e.g. Press et al., Numerical Recipes, 5.7).
    fn jac_fd(&self, y: &[f64]) -> Vec<Vec<f64>> {
        let n = y.len();
        let mut j = vec![vec![0.0; n]; n];
        for c in 0..n {
            let central = |h: f64| {
                let (mut yp, mut ym) = (y.to_vec(), y.to_vec());
                yp[c] += h;
                ym[c] -= h;
                let (fp, fm) = (self.rhs(&yp), self.rhs(&ym));
                (0..n)
                    .map(|r| (fp[r] - fm[r]) / (2.0 * h))
                    .collect::<Vec<f64>>()
            };
            let h = 1e-3 * y[c].abs().max(1e-6);
            let (d1, d2) = (central(h), central(h / 2.0));
            for r in 0..n {
                j[r][c] = (4.0 * d2[r] - d1[r]) / 3.0;
            }
        }
        j
    }
    /// The tolerance of a finite-difference column: 1e-6 of its scale plus
    /// the round-off of a difference quotient over terms of size |J||y|+|f|.
    fn fd_tolerance(
        &self,
        y: &[f64],
        jac: &dyn Fn(usize, usize) -> f64,
        fd: &[Vec<f64>],
        c: usize,
    ) -> f64 {
        let n = y.len();
        let f = self.rhs(y);
        let terms = (0..n)
            .map(|r| (0..n).map(|k| jac(r, k).abs() * y[k].abs()).sum::<f64>() + f[r].abs())
            .fold(0.0, f64::max);
        let scale = (0..n)
            .map(|r| fd[r][c].abs().max(jac(r, c).abs()))
            .fold(1e-300, f64::max);
        let h = 1e-3 * y[c].abs().max(1e-6);
        1e-6 * scale + 16.0 * f64::EPSILON * terms / h
    }
    /// Deterministic pseudo-random positive states around the initial scale.
    fn states(&self, count: usize) -> Vec<Vec<f64>> {
        let scale = self
            .model
            .species
            .iter()
            .map(|s| s.initial)
            .fold(0.0f64, f64::max)
            .max(1e-3);
        let mut seed: u64 = 0x9E37_79B9_7F4A_7C15;
        (0..count)
            .map(|_| {
                self.state
                    .iter()
                    .map(|_| {
                        seed = seed
                            .wrapping_mul(6364136223846793005)
                            .wrapping_add(1442695040888963407);
                        let u = (seed >> 11) as f64 / (1u64 << 53) as f64;
                        scale * (0.05 + 0.95 * u)
                    })
                    .collect()
            })
            .collect()
    }
}

/// The demo models and a fixture whose names clash with the emitted code's
/// own variables, target keywords and C's math.h macros.
fn emit_models() -> Vec<PathBuf> {
    let mut list = models();
    list.push(root().join("tests/fixtures/clashing_names.mech"));
    list.push(root().join("tests/fixtures/event_changes_a_total.mech"));
    list
}

fn temp() -> tempfile::TempDir {
    tempfile::tempdir().expect("temp dir")
}

fn emit(model: &Path, target: &str, reduced: bool, out: &Path) {
    let mut args = vec![
        "emit",
        model.to_str().unwrap(),
        "--target",
        target,
        "-o",
        out.to_str().unwrap(),
    ];
    if reduced {
        args.push("--reduced");
    }
    let o = ratewright(&args);
    assert!(
        o.status.success(),
        "emit {target} {}: {}",
        model.display(),
        String::from_utf8_lossy(&o.stderr)
    );
}

fn close(a: f64, b: f64, rel: f64, scale: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(scale)
}

#[test]
fn emitted_python_rhs_matches_the_compiler_and_its_jacobian_matches_central_differences() {
    let dir = temp();
    for path in emit_models() {
        for reduced in [false, true] {
            let reference = Reference::new(&load(&path), reduced);
            let module = dir.path().join(format!(
                "m_{}_{reduced}.py",
                path.file_stem().unwrap().to_string_lossy()
            ));
            emit(&path, "python", reduced, &module);
            let states = reference.states(4);
            let rhs: Vec<Vec<f64>> = states.iter().map(|y| reference.rhs(y)).collect();
            let cases = dir.path().join("cases.json");
            std::fs::write(
                &cases,
                serde_json::json!({ "states": states, "rhs": rhs }).to_string(),
            )
            .unwrap();
            let out = python(
                &root().join("tests/python/emit_check_python.py"),
                &[module.to_str().unwrap(), cases.to_str().unwrap()],
            );
            assert!(
                out.status.success(),
                "{} (reduced {reduced}): {}{}",
                path.display(),
                String::from_utf8_lossy(&out.stdout),
                String::from_utf8_lossy(&out.stderr)
            );
        }
    }
}

/// Reads a CSV with a header into (header, rows).
fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text.lines();
    let header = lines
        .next()
        .unwrap_or_default()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            l.split(',')
                .map(|v| v.trim().parse::<f64>().unwrap_or(f64::NAN))
                .collect()
        })
        .collect();
    (header, rows)
}

#[test]
fn emitted_python_main_reproduces_run_with_scipy() {
    // SciPy's BDF (an independent integrator) on the emitted module against
    // `ratewright run` on the same file; both at tight tolerances, so the
    // two solutions agree to 1e-6 relative (of each column's scale).
    let dir = temp();
    for path in emit_models() {
        let model = load(&path);
        let until = if model.name.as_deref() == Some("robertson") {
            "40"
        } else {
            "900"
        };
        // A start value set on the command line changes the totals it
        // belongs to, in the script as in `run`.
        let sets: &[&[&str]] = if model.name.as_deref() == Some("protease_assay") {
            &[&[], &["--set", "E=0.1"]]
        } else {
            &[&[]]
        };
        for (reduced, set) in [false, true]
            .into_iter()
            .flat_map(|r| sets.iter().map(move |s| (r, *s)))
        {
            let module = dir.path().join(format!("m_{reduced}.py"));
            emit(&path, "python", reduced, &module);
            // The same times, tolerances and values for the script and `run`.
            let mut shared = vec![
                "--until", until, "--points", "31", "--rtol", "1e-10", "--atol", "1e-14",
            ];
            shared.extend_from_slice(set);
            let py_csv = dir.path().join("py.csv");
            let mut py_args = shared.clone();
            py_args.extend(["-o", py_csv.to_str().unwrap()]);
            let out = python(&module, &py_args);
            assert!(
                out.status.success(),
                "{}: {}",
                path.display(),
                String::from_utf8_lossy(&out.stderr)
            );
            let run_csv = dir.path().join("run.csv");
            let mut run_args = vec!["run", path.to_str().unwrap()];
            run_args.extend(&shared);
            run_args.extend(["-o", run_csv.to_str().unwrap()]);
            let o = ratewright(&run_args);
            assert!(
                o.status.success(),
                "run {}: {}",
                path.display(),
                String::from_utf8_lossy(&o.stderr)
            );
            let (h1, r1) = read_csv(&py_csv);
            let (h2, r2) = read_csv(&run_csv);
            assert_eq!(h1, h2, "{}: CSV headers differ", path.display());
            assert_eq!(r1.len(), r2.len());
            for c in 0..h1.len() {
                let scale = r2
                    .iter()
                    .map(|r| r[c].abs())
                    .fold(0.0, f64::max)
                    .max(1e-300);
                for (a, b) in r1.iter().zip(&r2) {
                    assert!(
                        close(a[c], b[c], 1e-6, scale),
                        "{} (reduced {reduced}, {set:?}) column {} at t={}: python {} vs run {}",
                        path.display(),
                        h1[c],
                        a[0],
                        a[c],
                        b[c]
                    );
                }
            }
        }
    }
}

#[test]
fn emitted_python_uses_the_sparse_jacobian_on_a_large_network_and_matches_run() {
    // 90 species (> 50: the script switches to the sparse Jacobian), from
    // the seeded generator of the network benchmark.
    let dir = temp();
    let mech = dir.path().join("net.mech");
    let out = python(&root().join("bench/network_gen.py"), &["90", "180"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::write(&mech, &out.stdout).unwrap();
    let module = dir.path().join("net.py");
    emit(&mech, "python", false, &module);
    let (py_csv, run_csv) = (dir.path().join("py.csv"), dir.path().join("run.csv"));
    let tol = ["--rtol", "1e-10", "--atol", "1e-14"];
    let mut args = vec![
        "--until",
        "5",
        "--points",
        "6",
        "-o",
        py_csv.to_str().unwrap(),
    ];
    args.extend(tol);
    let out = python(&module, &args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut args = vec![
        "run",
        mech.to_str().unwrap(),
        "--until",
        "5",
        "--points",
        "6",
        "-o",
        run_csv.to_str().unwrap(),
    ];
    args.extend(tol);
    let o = ratewright(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let ((h1, r1), (h2, r2)) = (read_csv(&py_csv), read_csv(&run_csv));
    assert_eq!(h1, h2);
    for c in 1..h1.len() {
        let scale = r2
            .iter()
            .map(|r| r[c].abs())
            .fold(0.0, f64::max)
            .max(1e-300);
        for (a, b) in r1.iter().zip(&r2) {
            assert!(
                close(a[c], b[c], 1e-6, scale),
                "column {} at t={}: python {} vs run {}",
                h1[c],
                a[0],
                a[c],
                b[c]
            );
        }
    }
}

/// A C program that prints rhs, dense and sparse Jacobian at given states.
fn c_harness(stem: &str, states: &[Vec<f64>]) -> String {
    let n = states.first().map(|s| s.len()).unwrap_or(0);
    let up = stem.to_uppercase();
    let mut s = format!("#include <stdio.h>\n#include \"{stem}.h\"\nint main(void)\n{{\n");
    s += &format!(
        "    static const double states[{}][{}] = {{",
        states.len(),
        n.max(1)
    );
    for st in states {
        s += &format!(
            "{{{}}},",
            st.iter()
                .map(|v| format!("{v:?}"))
                .collect::<Vec<_>>()
                .join(",")
        );
    }
    s += "};\n";
    s += &format!(
        "    {stem}_params p;\n    double f[{up}_N_STATE + 1], J[{up}_N_STATE * {up}_N_STATE + 1], v[{up}_JAC_NNZ + 1];\n    int k, i;\n    {stem}_default_params(&p);\n"
    );
    s += &format!("    for (k = 0; k < {}; ++k) {{\n", states.len());
    s += &format!(
        "        {stem}_rhs(0.5, states[k], &p, f);\n        {stem}_jac_dense(0.5, states[k], &p, J);\n        {stem}_jac_csc(0.5, states[k], &p, v);\n"
    );
    s += &format!(
        "        for (i = 0; i < {up}_N_STATE; ++i) printf(\"%.17g \", f[i]);\n        printf(\"\\n\");\n"
    );
    s += &format!(
        "        for (i = 0; i < {up}_N_STATE * {up}_N_STATE; ++i) printf(\"%.17g \", J[i]);\n        printf(\"\\n\");\n"
    );
    s += &format!(
        "        for (i = 0; i < {up}_JAC_NNZ; ++i) printf(\"%.17g \", v[i]);\n        printf(\"\\n\");\n    }}\n"
    );
    s += &format!(
        "    for (i = 0; i <= {up}_N_STATE; ++i) printf(\"%d \", {stem}_jac_colptr[i]);\n    printf(\"\\n\");\n"
    );
    s += &format!(
        "    for (i = 0; i < {up}_JAC_NNZ; ++i) printf(\"%d \", {stem}_jac_rowval[i]);\n    printf(\"\\n\");\n    return 0;\n}}\n"
    );
    s
}

fn numbers(line: &str) -> Vec<f64> {
    line.split_whitespace()
        .map(|w| w.parse().unwrap_or(f64::NAN))
        .collect()
}

#[test]
fn emitted_c_compiles_with_werror_and_matches_the_compiler() {
    let dir = temp();
    for path in emit_models() {
        for reduced in [false, true] {
            let stem = "mech";
            let sub = dir.path().join(format!(
                "{}_{reduced}",
                path.file_stem().unwrap().to_string_lossy()
            ));
            std::fs::create_dir_all(&sub).unwrap();
            emit(&path, "c", reduced, &sub.join(stem));
            let reference = Reference::new(&load(&path), reduced);
            let states = reference.states(3);
            std::fs::write(sub.join("main.c"), c_harness(stem, &states)).unwrap();
            let exe = sub.join("check");
            let cc = Command::new("gcc")
                .args([
                    "-std=c99",
                    "-Wall",
                    "-Wextra",
                    "-Werror",
                    "-pedantic",
                    "-O1",
                    "-o",
                ])
                .arg(&exe)
                .arg(sub.join("main.c"))
                .arg(sub.join("mech.c"))
                .arg("-lm")
                .output()
                .expect("gcc runs");
            assert!(
                cc.status.success(),
                "gcc on {} (reduced {reduced}):\n{}",
                path.display(),
                String::from_utf8_lossy(&cc.stderr)
            );
            let run = Command::new(&exe).output().expect("harness runs");
            let text = String::from_utf8_lossy(&run.stdout).to_string();
            let lines: Vec<&str> = text.lines().collect();
            let n = reference.state.len();
            let colptr: Vec<usize> = numbers(lines[3 * states.len()])
                .iter()
                .map(|v| *v as usize)
                .collect();
            let rowval: Vec<usize> =
                numbers(lines.get(3 * states.len() + 1).copied().unwrap_or(""))
                    .iter()
                    .map(|v| *v as usize)
                    .collect();
            for (k, y) in states.iter().enumerate() {
                let f = numbers(lines[3 * k]);
                let jd = numbers(lines[3 * k + 1]);
                let vals = numbers(lines[3 * k + 2]);
                let want = reference.rhs(y);
                let fscale = want.iter().fold(0.0f64, |a, v| a.max(v.abs())) * 1e-9;
                for i in 0..n {
                    assert!(
                        close(f[i], want[i], 1e-10, fscale),
                        "{} rhs[{i}]: C {} vs compiler {}",
                        path.display(),
                        f[i],
                        want[i]
                    );
                }
                let fd = reference.jac_fd(y);
                let jc = |r: usize, c: usize| jd[r + n * c];
                for c in 0..n {
                    let tol = reference.fd_tolerance(y, &jc, &fd, c);
                    for r in 0..n {
                        assert!(
                            (jd[r + n * c] - fd[r][c]).abs() <= tol,
                            "{} (reduced {reduced}) J[{r},{c}]: C {} vs central difference {}",
                            path.display(),
                            jd[r + n * c],
                            fd[r][c]
                        );
                    }
                    // The CSC values are the dense entries at the declared pattern.
                    for idx in colptr[c]..colptr[c + 1] {
                        assert_eq!(vals[idx], jd[rowval[idx] + n * c]);
                    }
                }
            }
        }
    }
}

/// Reads what an emitted file's check script printed (per state: the rhs,
/// then the column-major Jacobian; last: the state its integrator reached
/// at `horizon`), checks rhs and Jacobian, and compares the end state with
/// `ratewright run` at rtol 1e-10 to 1e-6 of the state's scale.
fn check_printed_against_run(
    what: &str,
    path: &Path,
    reference: &Reference,
    states: &[Vec<f64>],
    printed: &str,
    horizon: f64,
    dir: &Path,
) {
    let lines: Vec<Vec<f64>> = printed.lines().map(numbers).collect();
    let f_rows: Vec<Vec<f64>> = (0..states.len()).map(|k| lines[2 * k].clone()).collect();
    let j_rows: Vec<Vec<f64>> = (0..states.len())
        .map(|k| lines[2 * k + 1].clone())
        .collect();
    check_rhs_and_jac(what, reference, states, &f_rows, &j_rows);
    let csv = dir.join("run.csv");
    let t = format!("{horizon:?}");
    let o = ratewright(&[
        "run",
        path.to_str().unwrap(),
        "--times",
        &t,
        "--rtol",
        "1e-10",
        "--atol",
        "1e-14",
        "-o",
        csv.to_str().unwrap(),
    ]);
    assert!(
        o.status.success(),
        "run: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let (_, rows) = read_csv(&csv);
    let run_state: Vec<f64> = reference
        .state
        .iter()
        .map(|&i| rows[rows.len() - 1][1 + i])
        .collect();
    let end = &lines[2 * states.len()];
    assert_eq!(end.len(), run_state.len(), "{what}: state length");
    let scale = run_state.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    for (i, (a, b)) in end.iter().zip(&run_state).enumerate() {
        assert!(
            (a - b).abs() <= 1e-6 * scale,
            "{what}: y[{i}] = {a} vs run {b} at t = {t}"
        );
    }
}

/// Checks rhs values against the compiler and a dense column-major
/// Jacobian against finite differences, at each state.
#[allow(clippy::needless_range_loop)]
fn check_rhs_and_jac(
    what: &str,
    reference: &Reference,
    states: &[Vec<f64>],
    f_rows: &[Vec<f64>],
    j_rows: &[Vec<f64>],
) {
    let n = reference.state.len();
    for (k, y) in states.iter().enumerate() {
        let (f, jd) = (&f_rows[k], &j_rows[k]);
        assert_eq!(f.len(), n, "{what}: rhs length");
        assert_eq!(jd.len(), n * n, "{what}: Jacobian size");
        let want = reference.rhs(y);
        let fscale = want.iter().fold(0.0f64, |a, v| a.max(v.abs())) * 1e-9;
        for i in 0..n {
            assert!(
                close(f[i], want[i], 1e-10, fscale),
                "{what} rhs[{i}]: {} vs compiler {}",
                f[i],
                want[i]
            );
        }
        let fd = reference.jac_fd(y);
        let jc = |r: usize, c: usize| jd[r + n * c];
        for c in 0..n {
            let tol = reference.fd_tolerance(y, &jc, &fd, c);
            for r in 0..n {
                assert!(
                    (jc(r, c) - fd[r][c]).abs() <= tol,
                    "{what} J[{r},{c}]: {} vs central difference {}",
                    jc(r, c),
                    fd[r][c]
                );
            }
        }
    }
}

/// A time before the first event, where `run` and another integrator can be
/// compared without event handling: (time, text).
fn quiet_horizon(model: &Model) -> f64 {
    let first_event = model
        .events
        .iter()
        .filter_map(|e| e.time())
        .fold(f64::INFINITY, f64::min);
    let horizon: f64 = if model.name.as_deref() == Some("robertson") {
        40.0
    } else {
        100.0
    };
    horizon.min(0.5 * first_event)
}

#[test]
fn emitted_octave_runs_under_octave_cli_with_ode15s() {
    common::ensure_octave();
    run_emitted_scripts(&Interpreter {
        target: "octave",
        file: "mech.m",
        script: "check.m",
        command: &[
            "octave-cli",
            "--no-gui",
            "--quiet",
            "--no-window-system",
            "check.m",
        ],
        label: "octave",
        header: "m = mech();\n",
        separator: "; ",
        // rhs, then the column-major Jacobian, at state `y = [{col}]`.
        at_state: "y = [{col}];\nprintf('%.17g ', m.rhs(0.5, y, m.p)); printf('\\n');\nJ = m.jac(0.5, y, m.p); printf('%.17g ', J(:)); printf('\\n');\n",
        // Octave 7's ode15s stops at t = 0 ("error test failed") on these
        // models with AbsTol 1e-12 even without a Jacobian; 1e-10 works.
        integrate: "opts = odeset(m.options, 'RelTol', 1e-8, 'AbsTol', 1e-10);\n[t, y] = ode15s(@(t, y) m.rhs(t, y, m.p), [0 {horizon}], m.y0, opts);\nprintf('%.17g ', y(end, :)); printf('\\n');\n",
    });
}

/// An interpreter that runs an emitted file through a check script: the
/// script prints, per state, the rhs then the column-major Jacobian, and
/// last the state its integrator reached at the horizon. `{col}` and
/// `{horizon}` in the templates are replaced by the state and the time.
struct Interpreter {
    target: &'static str,
    file: &'static str,
    script: &'static str,
    command: &'static [&'static str],
    label: &'static str,
    header: &'static str,
    separator: &'static str,
    at_state: &'static str,
    integrate: &'static str,
}

/// Emits every model (full and reduced) for `it.target`, runs its check
/// script and checks what it printed ([`check_printed_against_run`]).
fn run_emitted_scripts(it: &Interpreter) {
    let dir = temp();
    for path in emit_models() {
        let model = load(&path);
        for reduced in [false, true] {
            let sub = dir.path().join(format!(
                "{}_{reduced}",
                path.file_stem().unwrap().to_string_lossy()
            ));
            std::fs::create_dir_all(&sub).unwrap();
            emit(&path, it.target, reduced, &sub.join(it.file));
            let reference = Reference::new(&model, reduced);
            let states = reference.states(3);
            let horizon = quiet_horizon(&model);
            let mut script = it.header.to_string();
            for y in &states {
                let col = y
                    .iter()
                    .map(|v| format!("{v:?}"))
                    .collect::<Vec<_>>()
                    .join(it.separator);
                script += &it.at_state.replace("{col}", &col);
            }
            script += &it.integrate.replace("{horizon}", &format!("{horizon:?}"));
            std::fs::write(sub.join(it.script), script).unwrap();
            let out = Command::new(it.command[0])
                .args(&it.command[1..])
                .current_dir(&sub)
                .output()
                .unwrap_or_else(|e| panic!("{} runs: {e}", it.command[0]));
            let text = String::from_utf8_lossy(&out.stdout).to_string();
            assert!(
                out.status.success(),
                "{} on {}: {}{}",
                it.label,
                path.display(),
                text,
                String::from_utf8_lossy(&out.stderr)
            );
            let what = format!("{} {} (reduced {reduced})", it.label, path.display());
            check_printed_against_run(&what, &path, &reference, &states, &text, horizon, &sub);
        }
    }
}

#[test]
fn emitted_rust_compiles_with_rustc_and_matches_the_compiler() {
    let dir = temp();
    for path in emit_models() {
        let model = load(&path);
        for reduced in [false, true] {
            let sub = dir.path().join(format!(
                "{}_{reduced}",
                path.file_stem().unwrap().to_string_lossy()
            ));
            std::fs::create_dir_all(&sub).unwrap();
            emit(&path, "rust", reduced, &sub.join("mech.rs"));
            let reference = Reference::new(&model, reduced);
            let states = reference.states(3);
            let mut main = String::from(
                "mod mech;\nfn show(v: &[f64]) { println!(\"{}\", v.iter().map(|x| format!(\"{x:?}\")).collect::<Vec<_>>().join(\" \")); }\nfn main() {\n    let p = mech::DEFAULT_PARAMS;\n    let n = mech::N;\n",
            );
            for y in &states {
                let list = y
                    .iter()
                    .map(|v| format!("{v:?}"))
                    .collect::<Vec<_>>()
                    .join(", ");
                main += &format!(
                    "    let y: Vec<f64> = vec![{list}];\n    let mut f = vec![0.0; n];\n    mech::rhs(&y, &p, 0.5, &mut f);\n    show(&f);\n    let mut j = vec![0.0; n * n];\n    mech::jac_dense(&y, &p, 0.5, &mut j);\n    show(&j);\n    let v: Vec<f64> = (0..n).map(|i| 1.0 + i as f64).collect();\n    let mut jv = vec![0.0; n];\n    mech::jac_mul(&y, &p, 0.5, &v, &mut jv);\n    show(&jv);\n"
                );
            }
            main += "    let mut y0 = vec![0.0; n];\n    mech::init(&p, 0.0, &mut y0);\n    show(&y0);\n}\n";
            std::fs::write(sub.join("main.rs"), main).unwrap();
            let exe = sub.join("check");
            let rc = Command::new("rustc")
                .args(["--edition", "2021", "-D", "warnings", "-o"])
                .arg(&exe)
                .arg(sub.join("main.rs"))
                .output()
                .expect("rustc runs");
            assert!(
                rc.status.success(),
                "rustc on {} (reduced {reduced}):\n{}",
                path.display(),
                String::from_utf8_lossy(&rc.stderr)
            );
            let run = Command::new(&exe).output().expect("program runs");
            let lines: Vec<Vec<f64>> = String::from_utf8_lossy(&run.stdout)
                .lines()
                .map(numbers)
                .collect();
            let what = format!("rust {} (reduced {reduced})", path.display());
            let f_rows: Vec<Vec<f64>> = (0..states.len()).map(|k| lines[3 * k].clone()).collect();
            let j_rows: Vec<Vec<f64>> = (0..states.len())
                .map(|k| lines[3 * k + 1].clone())
                .collect();
            check_rhs_and_jac(&what, &reference, &states, &f_rows, &j_rows);
            let n = reference.state.len();
            for k in 0..states.len() {
                let (j, jv) = (&j_rows[k], &lines[3 * k + 2]);
                for r in 0..n {
                    let want: f64 = (0..n).map(|c| j[r + n * c] * (1.0 + c as f64)).sum();
                    assert!(
                        close(jv[r], want, 1e-12, 1e-300),
                        "{what}: (J v)[{r}] {} vs {want}",
                        jv[r]
                    );
                }
            }
            let y0 = &lines[3 * states.len()];
            let full = model.initial_state();
            for (k, &i) in reference.state.iter().enumerate() {
                assert_eq!(y0[k], full[i], "{what}: init");
            }
        }
    }
}

#[test]
fn emitted_sbml_validates_with_libsbml_and_reads_back() {
    let dir = temp();
    for path in emit_models() {
        let model = load(&path);
        let file = dir.path().join("model.xml");
        emit(&path, "sbml", false, &file);
        // Every species at 0.7 of its scale and the first step's law there.
        let reference = Reference::new(&model, false);
        let y = &reference.states(1)[0];
        let values: serde_json::Map<String, serde_json::Value> = model
            .species
            .iter()
            .zip(y)
            .map(|(s, v)| (s.name.clone(), serde_json::json!(v)))
            .collect();
        let state = dir.path().join("state.json");
        let reaction = format!("step_{}", model.steps[0].name);
        std::fs::write(
            &state,
            serde_json::json!({ "values": values, "reaction": reaction }).to_string(),
        )
        .unwrap();
        let out = python(
            &root().join("tests/python/emit_check_sbml.py"),
            &[file.to_str().unwrap(), state.to_str().unwrap()],
        );
        let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|_| {
            panic!(
                "{}: {}",
                path.display(),
                String::from_utf8_lossy(&out.stderr)
            )
        });
        assert!(
            out.status.success(),
            "{}: libSBML errors {}",
            path.display(),
            report["errors"]
        );
        assert_eq!(report["level"], 3);
        assert_eq!(report["version"], 2);
        assert_eq!(report["species"], model.species.len() + model.fixed.len());
        assert_eq!(report["reactions"], model.steps.len());
        assert_eq!(
            report["parameters"],
            model.params.len() + model.totals.len() + model.observables.len()
        );
        assert_eq!(report["events"], model.events.len());
        let full = reference.full(y);
        // A kinetic law is in substance per time: the rate times the
        // compartment's size, here the declared volume in litres (SBML Level 3
        // Version 2 core specification, section 4.11 on reactions; the section
        // number from memory).
        let want =
            model.eval_at(&model.step_rate(0), &full, 0.0) * model.volume_litres().unwrap_or(1.0);
        let got = report["law"].as_f64().expect("a kinetic law value");
        assert!(
            close(got, want, 1e-12, 0.0),
            "{}: libSBML law {got} vs compiler {want}",
            path.display()
        );
    }
}

/// Deterministic random expressions over three names `a`, `b`, `c`.
struct ExprGen {
    seed: u64,
}

impl ExprGen {
    fn next(&mut self) -> u64 {
        self.seed = self
            .seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        self.seed >> 33
    }
    fn pick(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn expr(&mut self, depth: u32) -> Expr {
        use ratewright::model::{BinOp, Func};
        if depth == 0 || self.pick(5) == 0 {
            return match self.pick(5) {
                0 => Expr::Number([0.5, 2.0, 3.0, 1e-3, 0.1, -1.5, 7.25][self.pick(7) as usize]),
                1 => Expr::Time,
                k => Expr::Name(Sym::Species((k - 2) as usize)),
            };
        }
        let d = depth - 1;
        match self.pick(11) {
            0 => Expr::Neg(Box::new(self.expr(d))),
            1 => Expr::bin(BinOp::Add, self.expr(d), self.expr(d)),
            2 => Expr::bin(BinOp::Sub, self.expr(d), self.expr(d)),
            3 => Expr::bin(BinOp::Mul, self.expr(d), self.expr(d)),
            4 => Expr::bin(BinOp::Div, self.expr(d), self.expr(d)),
            5 => Expr::bin(
                BinOp::Pow,
                self.expr(d),
                Expr::Number([2.0, 3.0, -1.0, 0.5, -2.0][self.pick(5) as usize]),
            ),
            6 => Expr::bin(
                BinOp::Pow,
                Expr::Call(Func::Abs, vec![self.expr(d)]),
                self.expr(d),
            ),
            7 => Expr::Call(
                [Func::Exp, Func::Ln, Func::Sqrt, Func::Log10][self.pick(4) as usize],
                vec![self.expr(d)],
            ),
            8 => Expr::Call(
                [Func::Min, Func::Max][self.pick(2) as usize],
                vec![self.expr(d), self.expr(d)],
            ),
            9 => Expr::Call(
                Func::Pow,
                vec![Expr::Call(Func::Abs, vec![self.expr(d)]), self.expr(d)],
            ),
            _ => Expr::Call(Func::Abs, vec![self.expr(d)]),
        }
    }
}

/// Expressions whose value is finite and moderate at a = 1.3, b = 0.7,
/// c = 2.1, t = 0.9, with those values.
fn sample_printed_exprs() -> Vec<(Expr, f64)> {
    let mut g = ExprGen { seed: 42 };
    let values = [1.3, 0.7, 2.1];
    let mut out = Vec::new();
    while out.len() < 150 {
        let e = g.expr(5);
        let value = |e: &Expr| {
            e.eval(
                &|s| {
                    if let Sym::Species(i) = s {
                        values[i]
                    } else {
                        f64::NAN
                    }
                },
                0.9,
            )
        };
        let v = value(&e);
        // Every part defined: targets differ only where the math is (NaN
        // and complex results), which is not what this test is about.
        if all_parts_finite(&e, &value) && v.abs() < 1e12 && (v == 0.0 || v.abs() > 1e-12) {
            out.push((e, v));
        }
    }
    out
}

fn all_parts_finite(e: &Expr, value: &dyn Fn(&Expr) -> f64) -> bool {
    value(e).is_finite()
        && match e {
            Expr::Neg(a) => all_parts_finite(a, value),
            Expr::Binary(_, a, b) => all_parts_finite(a, value) && all_parts_finite(b, value),
            Expr::Call(_, args) => args.iter().all(|a| all_parts_finite(a, value)),
            _ => true,
        }
}

fn abc(s: Sym) -> String {
    match s {
        Sym::Species(0) => "a".into(),
        Sym::Species(1) => "b".into(),
        _ => "c".into(),
    }
}

#[test]
fn printed_expressions_evaluate_the_same_in_python_c_octave_rust_and_the_mechanism_language() {
    common::ensure_octave();
    use ratewright::algebra::print::{Syntax, print_expr};
    let samples = sample_printed_exprs();
    let dir = temp();
    let check = |what: &str, got: &[f64]| {
        assert_eq!(got.len(), samples.len(), "{what}: one value per expression");
        for ((e, want), g) in samples.iter().zip(got) {
            assert!(
                close(*g, *want, 1e-9, 0.0),
                "{what}: {} = {g}, Rust evaluates {want}",
                print_expr(e, &abc, Syntax::Mech)
            );
        }
    };
    // Python (numpy), the reference interpreter for the Python printer.
    let py: Vec<String> = samples
        .iter()
        .map(|(e, _)| print_expr(e, &abc, Syntax::Python))
        .collect();
    let script = dir.path().join("eval.py");
    std::fs::write(
        &script,
        format!(
            "import numpy as np\na, b, c, t = 1.3, 0.7, 2.1, 0.9\nfor v in [{}]:\n    print(repr(float(v)))\n",
            py.join(",\n          ")
        ),
    )
    .unwrap();
    let out = python(&script, &[]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    check("python", &numbers(&String::from_utf8_lossy(&out.stdout)));
    // C99 with <math.h>, compiled by gcc with warnings as errors.
    let mut c = String::from(
        "#include <math.h>\n#include <stdio.h>\nint main(void)\n{\n    const double a = 1.3, b = 0.7, c = 2.1, t = 0.9;\n",
    );
    for (e, _) in &samples {
        c += &format!(
            "    printf(\"%.17g\\n\", {});\n",
            print_expr(e, &abc, Syntax::C)
        );
    }
    c += "    return 0;\n}\n";
    std::fs::write(dir.path().join("eval.c"), c).unwrap();
    let exe = dir.path().join("eval_c");
    let cc = Command::new("gcc")
        .args(["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o"])
        .arg(&exe)
        .arg(dir.path().join("eval.c"))
        .arg("-lm")
        .output()
        .expect("gcc runs");
    assert!(
        cc.status.success(),
        "{}",
        String::from_utf8_lossy(&cc.stderr)
    );
    check(
        "c",
        &numbers(&String::from_utf8_lossy(
            &Command::new(&exe).output().unwrap().stdout,
        )),
    );
    // Rust with f64 methods, compiled by rustc.
    let mut rs =
        String::from("fn main() {\n    let (a, b, c, t) = (1.3f64, 0.7f64, 2.1f64, 0.9f64);\n");
    for (e, _) in &samples {
        rs += &format!(
            "    println!(\"{{:?}}\", {});\n",
            print_expr(e, &abc, Syntax::Rust)
        );
    }
    rs += "    let _ = (a, b, c, t);\n}\n";
    std::fs::write(dir.path().join("eval.rs"), rs).unwrap();
    let exe = dir.path().join("eval_rs");
    let rc = Command::new("rustc")
        .args(["--edition", "2021", "-A", "warnings", "-o"])
        .arg(&exe)
        .arg(dir.path().join("eval.rs"))
        .output()
        .expect("rustc runs");
    assert!(
        rc.status.success(),
        "{}",
        String::from_utf8_lossy(&rc.stderr)
    );
    check(
        "rust",
        &numbers(&String::from_utf8_lossy(
            &Command::new(&exe).output().unwrap().stdout,
        )),
    );
    // GNU Octave.
    let mut m = String::from("a = 1.3; b = 0.7; c = 2.1; t = 0.9;\n");
    for (e, _) in &samples {
        m += &format!(
            "printf('%.17g\\n', {});\n",
            print_expr(e, &abc, Syntax::Octave)
        );
    }
    std::fs::write(dir.path().join("evalm.m"), m).unwrap();
    let out = Command::new("octave-cli")
        .args(["--no-gui", "--quiet", "evalm.m"])
        .current_dir(dir.path())
        .output()
        .expect("octave-cli runs");
    check("octave", &numbers(&String::from_utf8_lossy(&out.stdout)));
    // The mechanism language: printed as observables, parsed back by the
    // front end and evaluated by the IR. The random expressions add terms of
    // any dimension, so a, b and c are params of unknown dimension here (as
    // species they would be concentrations, and the sums errors).
    let mut mech = String::from("param a = 1.3\nparam b = 0.7\nparam c = 2.1\n");
    for (k, (e, _)) in samples.iter().enumerate() {
        mech += &format!("observe o{k} = {}\n", print_expr(e, &abc, Syntax::Mech));
    }
    let loaded = ratewright::model::load_str(&mech, Path::new("printed.mech"));
    let model = loaded
        .model
        .unwrap_or_else(|| panic!("printed expressions parse: {:?}", loaded.diagnostics));
    let y = model.initial_state();
    let got: Vec<f64> = model
        .observables
        .iter()
        .map(|o| model.eval_at(&o.expr, &y, 0.9))
        .collect();
    check("mech", &got);
}

/// The JSON target's Jacobian, in the mechanism language, parsed back as
/// observables of the model and compared with central differences.
#[test]
#[allow(clippy::needless_range_loop)]
fn json_jacobian_reads_back_and_matches_central_differences() {
    let dir = temp();
    for path in emit_models() {
        let file = dir.path().join("m.json");
        emit(&path, "json", false, &file);
        let doc: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&file).unwrap()).unwrap();
        assert_eq!(doc["format"], "ratewright-model");
        let model = load(&path);
        let mut text = std::fs::read_to_string(&path).unwrap();
        let entries = doc["system"]["jacobian"].as_array().unwrap();
        for (k, e) in entries.iter().enumerate() {
            text += &format!(
                "\nobserve json_jac_{k} = {}",
                e["expression"].as_str().unwrap()
            );
        }
        let loaded = ratewright::model::load_str(&text, &path);
        let with = loaded
            .model
            .unwrap_or_else(|| panic!("{}: {:?}", path.display(), loaded.diagnostics));
        let reference = Reference::new(&model, false);
        let y = &reference.states(1)[0];
        let fd = reference.jac_fd(y);
        let n = y.len();
        let index = |name: &str| model.species.iter().position(|s| s.name == name).unwrap();
        let mut dense = vec![0.0; n * n];
        let first = model.observables.len();
        for (k, e) in entries.iter().enumerate() {
            let (r, c) = (
                index(e["row"].as_str().unwrap()),
                index(e["column"].as_str().unwrap()),
            );
            dense[r + n * c] = with.eval_at(&with.observables[first + k].expr, y, 0.5);
        }
        let jc = |r: usize, c: usize| dense[r + n * c];
        for c in 0..n {
            let tol = reference.fd_tolerance(y, &jc, &fd, c);
            for r in 0..n {
                assert!(
                    (jc(r, c) - fd[r][c]).abs() <= tol,
                    "{} json J[{r},{c}] {} vs {}",
                    path.display(),
                    jc(r, c),
                    fd[r][c]
                );
            }
        }
        // Shape of the documented schema.
        let entries = doc["stoichiometry"]["entries"].as_array().unwrap();
        let nonzeros: usize = (0..model.steps.len())
            .map(|j| model.net_change(j).len())
            .sum();
        assert_eq!(entries.len(), nonzeros);
        let stoich = model.stoichiometry();
        for e in entries {
            let (i, j) = (
                e[0].as_u64().unwrap() as usize,
                e[1].as_u64().unwrap() as usize,
            );
            assert_eq!(
                e[2].as_i64().map(|v| v as f64),
                Some(ratewright::model::coef_f64(stoich[i][j]))
            );
        }
        assert_eq!(doc["steps"].as_array().unwrap().len(), model.steps.len());
    }
}

/// Every target for two models, as insta snapshots (full and reduced).
#[test]
fn snapshots_of_every_target() {
    let dir = temp();
    // fed_dehydrogenase: the assay protocol in every target (the only check
    // of the Julia driver, Julia not being installable here).
    for name in ["protease_assay", "kinase_cycle", "fed_dehydrogenase"] {
        let path = root().join("models").join(format!("{name}.mech"));
        for target in ::ratewright::emit::TARGETS {
            for reduced in [false, true] {
                if reduced && !target.supports_reduced() {
                    continue;
                }
                let out = if target.multi_file() {
                    dir.path().join(name)
                } else {
                    dir.path().join(format!("{name}.{}", target.extension()))
                };
                emit(&path, target.name(), reduced, &out);
                let files: Vec<PathBuf> = if target.multi_file() {
                    vec![
                        dir.path().join(format!("{name}.h")),
                        dir.path().join(format!("{name}.c")),
                    ]
                } else {
                    vec![out.clone()]
                };
                let mut text = String::new();
                for f in files {
                    text += &format!("==> {} <==\n", f.file_name().unwrap().to_string_lossy());
                    text += &std::fs::read_to_string(&f).unwrap();
                }
                let snap = format!(
                    "{name}_{}{}",
                    target.name(),
                    if reduced { "_reduced" } else { "" }
                );
                insta::assert_snapshot!(snap, text);
            }
        }
    }
}

#[test]
fn usage_errors_are_clear() {
    let m = root().join("models/protease_assay.mech");
    let m = m.to_str().unwrap();
    let o = ratewright(&["emit", m, "--target", "pyhton"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("did you mean `python`"));
    let o = ratewright(&["emit", m, "--target", "c"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("-o DIR"));
    let o = ratewright(&["emit", m, "--target", "sbml", "--reduced"]);
    assert_eq!(o.status.code(), Some(2));
    // Refuses to overwrite its input: a usage error (exit 2), as for every
    // command that writes (docs/reliability.md).
    let dir = temp();
    let copy = dir.path().join("m.mech");
    std::fs::copy(m, &copy).unwrap();
    let o = ratewright(&[
        "emit",
        copy.to_str().unwrap(),
        "--target",
        "json",
        "-o",
        copy.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        std::fs::read_to_string(&copy)
            .unwrap()
            .contains("mechanism protease_assay")
    );
}

/// The R target under R with deSolve (Debian's r-cran-desolve): its `rhs`
/// matches the compiler, its `jacobian` matches central differences, and
/// deSolve's LSODA with that Jacobian (`jactype = "fullusr"`) ends where
/// `ratewright run` does, for every demo model, full and reduced.
#[test]
fn emitted_r_runs_under_desolve_and_matches_run() {
    common::ensure_r();
    run_emitted_scripts(&Interpreter {
        target: "r",
        file: "mech.R",
        script: "check.R",
        command: &["Rscript", "check.R"],
        label: "R with deSolve",
        header: "suppressMessages(library(deSolve))\nsource(\"mech.R\")\nshow <- function(x) cat(sprintf(\"%.17g\", as.vector(x)), \"\\n\")\n",
        separator: ", ",
        at_state: "y <- c({col})\nshow(rhs(0.5, y, parms)[[1]])\nshow(jacobian(0.5, y, parms))\n",
        integrate: "out <- ode(y = y0, times = c(0, {horizon}), func = rhs, parms = parms, method = \"lsoda\", jacfunc = jacobian, jactype = \"fullusr\", rtol = 1e-10, atol = 1e-12)\nshow(out[nrow(out), -1])\n",
    });
}

/// The DOT target read by Graphviz (`dot -Tplain`): every species and step
/// is a node, and the edges are exactly the reactant → step and
/// step → product pairs of the model, for every demo model.
#[test]
fn emitted_dot_is_read_by_graphviz_with_the_model_edges() {
    use std::collections::BTreeSet;
    common::ensure_graphviz();
    let dir = temp();
    for path in emit_models() {
        let model = load(&path);
        let file = dir.path().join(format!(
            "{}.dot",
            path.file_stem().unwrap().to_string_lossy()
        ));
        emit(&path, "dot", false, &file);
        let out = Command::new("dot")
            .args(["-Tplain", file.to_str().unwrap()])
            .output()
            .expect("dot runs (apt-get install -y graphviz)");
        assert!(
            out.status.success(),
            "dot on {}: {}",
            path.display(),
            String::from_utf8_lossy(&out.stderr)
        );
        let text = String::from_utf8_lossy(&out.stdout).to_string();
        let unquote = |s: &str| s.trim_matches('"').to_string();
        let mut nodes = BTreeSet::new();
        let mut edges = BTreeSet::new();
        for line in text.lines() {
            let fields: Vec<&str> = line.split_whitespace().collect();
            match fields.first() {
                Some(&"node") => {
                    nodes.insert(unquote(fields[1]));
                }
                Some(&"edge") => {
                    edges.insert((unquote(fields[1]), unquote(fields[2])));
                }
                _ => {}
            }
        }
        let mut want_edges = BTreeSet::new();
        for step in &model.steps {
            let s = format!("step:{}", step.name);
            assert!(nodes.contains(&s), "{}: no node {s}", path.display());
            for term in &step.reactants {
                if let Sym::Species(i) = term.sym {
                    want_edges.insert((format!("species:{}", model.species[i].name), s.clone()));
                }
            }
            for term in &step.products {
                if let Sym::Species(i) = term.sym {
                    want_edges.insert((s.clone(), format!("species:{}", model.species[i].name)));
                }
            }
        }
        for sp in &model.species {
            let n = format!("species:{}", sp.name);
            assert!(nodes.contains(&n), "{}: no node {n}", path.display());
        }
        let drawn: BTreeSet<(String, String)> = edges
            .into_iter()
            .filter(|(a, b)| {
                (a.starts_with("species:") && b.starts_with("step:"))
                    || (a.starts_with("step:") && b.starts_with("species:"))
            })
            .collect();
        assert_eq!(drawn, want_edges, "{}: edges", path.display());
    }
}

/// The LaTeX target and `derive --format latex` compile with pdflatex and
/// amsmath (Debian's texlive-latex-base) without errors, for every demo
/// model (emit: full and reduced; derive: the models that state their
/// assumptions).
#[test]
fn latex_output_compiles_with_pdflatex() {
    common::ensure_latex();
    let dir = temp();
    for path in emit_models() {
        let stem = path.file_stem().unwrap().to_string_lossy().to_string();
        let mut pieces = Vec::new();
        for reduced in [false, true] {
            let file = dir.path().join(format!("{stem}_{reduced}.tex"));
            emit(&path, "latex", reduced, &file);
            pieces.push(file);
        }
        let text = std::fs::read_to_string(&path).unwrap();
        if text.contains("assume ") {
            let o = ratewright(&["derive", path.to_str().unwrap(), "--format", "latex"]);
            assert!(
                o.status.success(),
                "derive {}: {}",
                path.display(),
                String::from_utf8_lossy(&o.stderr)
            );
            let file = dir.path().join(format!("{stem}_derive.tex"));
            std::fs::write(&file, &o.stdout).unwrap();
            pieces.push(file);
        }
        for piece in pieces {
            let name = piece.file_stem().unwrap().to_string_lossy().to_string();
            let doc = dir.path().join(format!("doc_{name}.tex"));
            std::fs::write(
                &doc,
                format!(
                    "\\documentclass{{article}}\n\\usepackage{{amsmath}}\n\\begin{{document}}\n\\input{{{}}}\n\\end{{document}}\n",
                    piece.file_name().unwrap().to_string_lossy()
                ),
            )
            .unwrap();
            let out = Command::new("pdflatex")
                .args([
                    "-interaction=nonstopmode",
                    "-halt-on-error",
                    doc.file_name().unwrap().to_str().unwrap(),
                ])
                .current_dir(dir.path())
                .output()
                .expect("pdflatex runs (apt-get install -y texlive-latex-base)");
            assert!(
                out.status.success(),
                "pdflatex on {name} ({}): {}",
                path.display(),
                String::from_utf8_lossy(&out.stdout)
            );
            assert!(dir.path().join(format!("doc_{name}.pdf")).exists());
        }
    }
}

#[test]
fn emitted_sbml_integrated_by_libsbml_and_scipy_follows_run_through_events() {
    // libSBML reads the file and SciPy's Radau integrates it (an independent
    // reading of the SBML semantics: assignment rules, event priorities,
    // values taken when an event executes); `run` must agree to 1e-6.
    let dir = temp();
    for fixture in [
        "models/protease_assay.mech",
        "tests/fixtures/event_changes_a_total.mech",
        "tests/fixtures/events_at_one_time.mech",
    ] {
        let path = root().join(fixture);
        let file = dir.path().join("model.xml");
        emit(&path, "sbml", false, &file);
        let model = load(&path);
        let end = model
            .events
            .iter()
            .filter_map(|e| e.time())
            .fold(0.0, f64::max)
            * 1.5
            + 1.0;
        let times: Vec<String> = (0..=12)
            .map(|k| format!("{}", end * k as f64 / 12.0))
            .collect();
        let mut times = times;
        // The events' own times too, where the row holds the state after them.
        times.extend(
            model
                .events
                .iter()
                .filter_map(|e| e.time())
                .map(|t| format!("{t}")),
        );
        let mut sorted: Vec<f64> = times.iter().map(|t| t.parse().unwrap()).collect();
        sorted.sort_by(f64::total_cmp);
        sorted.dedup();
        let list = sorted
            .iter()
            .map(|t| format!("{t}"))
            .collect::<Vec<_>>()
            .join(",");
        let out = python(
            &root().join("tests/python/sbml_simulate.py"),
            &[file.to_str().unwrap(), &list],
        );
        assert!(
            out.status.success(),
            "{fixture}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let sbml_csv = dir.path().join("sbml.csv");
        std::fs::write(&sbml_csv, &out.stdout).unwrap();
        let run_csv = dir.path().join("run.csv");
        let o = ratewright(&[
            "run",
            path.to_str().unwrap(),
            "--times",
            &list,
            "--rtol",
            "1e-10",
            "--atol",
            "1e-14",
            "-o",
            run_csv.to_str().unwrap(),
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let (h_sbml, r_sbml) = read_csv(&sbml_csv);
        let (h_run, r_run) = read_csv(&run_csv);
        assert_eq!(r_sbml.len(), r_run.len(), "{fixture}");
        for (c, name) in h_sbml.iter().enumerate().skip(1) {
            let k = h_run
                .iter()
                .position(|h| h == name)
                .unwrap_or_else(|| panic!("{name}"));
            let scale = r_run
                .iter()
                .map(|r| r[k].abs())
                .fold(0.0, f64::max)
                .max(1e-300);
            for (a, b) in r_sbml.iter().zip(&r_run) {
                assert!(
                    close(a[c], b[k], 1e-6, scale),
                    "{fixture}: {name} at t = {}: SBML {} vs run {}",
                    a[0],
                    a[c],
                    b[k]
                );
            }
        }
    }
}

//! End-to-end checks of `run`, `steady` and `scan` against published
//! reference solutions, closed forms, SciPy, and central differences.

// Reference values keep every digit their source gives.
#![allow(clippy::excessive_precision)]

mod common;

use common::{models, python, ratewright, root};
use ratewright::model::{Model, Sym, load_path};
use ratewright::numeric::{CompiledSystem, constants_of};
use std::path::{Path, PathBuf};

fn write_model(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn run_ok(args: &[&str]) -> String {
    let out = ratewright(args);
    assert!(
        out.status.success(),
        "ratewright {args:?} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// Reads a CSV written by `run -o`: header and rows.
fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(|v| v.parse::<f64>().unwrap()).collect())
        .collect();
    (header, rows)
}

fn parse_csv_text(text: &str) -> (Vec<String>, Vec<Vec<f64>>) {
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| {
            l.split(',')
                .map(|v| v.parse::<f64>().unwrap_or(f64::NAN))
                .collect()
        })
        .collect();
    (header, rows)
}

fn simulate_csv(dir: &Path, model: &Path, extra: &[&str]) -> (Vec<String>, Vec<Vec<f64>>) {
    let out = dir.join(format!(
        "{}.csv",
        model.file_stem().unwrap().to_string_lossy()
    ));
    let mut args = vec!["run", model.to_str().unwrap(), "-o", out.to_str().unwrap()];
    args.extend_from_slice(extra);
    run_ok(&args);
    read_csv(&out)
}

#[test]
fn robertson_matches_the_published_reference_solution() {
    // Robertson (1966) at t = 40 and t = 1e11. Reference values from memory
    // of the Bari test set for IVP solvers (Mazzia & Magherini, problem
    // ROBER; also Hairer & Wanner, Solving ODEs II, sec. IV.10):
    //   t = 40:   y = 0.7158270687193267, 0.9185534764557338e-5, 0.2841637457458771
    //   t = 1e11: y = 0.2083340149701255e-7, 0.8333360770334713e-13, 0.9999999791665050
    // Being from memory, they are cross-checked below against SciPy Radau at rtol 1e-12.
    let reference = [
        [
            0.7158270687193267,
            0.9185534764557338e-5,
            0.2841637457458771,
        ],
        [
            0.2083340149701255e-7,
            0.8333360770334713e-13,
            0.9999999791665050,
        ],
    ];
    let scipy = python(&root().join("tests/python/sim_robertson.py"), &[]);
    assert!(
        scipy.status.success(),
        "{}",
        String::from_utf8_lossy(&scipy.stderr)
    );
    let scipy_rows: Vec<Vec<f64>> = String::from_utf8(scipy.stdout)
        .unwrap()
        .lines()
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    for (r, s) in reference.iter().zip(&scipy_rows) {
        for k in 0..3 {
            assert!(
                (r[k] - s[k]).abs() <= 1e-6 * r[k],
                "memory value {} vs SciPy Radau {}",
                r[k],
                s[k]
            );
        }
    }
    let dir = tempfile::tempdir().unwrap();
    for method in ["bdf", "esdirk"] {
        let (header, rows) = simulate_csv(
            dir.path(),
            &root().join("models/robertson.mech"),
            &[
                "--times", "40,1e11", "--rtol", "1e-10", "--atol", "1e-20", "--method", method,
            ],
        );
        assert_eq!(&header[..4], &["t", "A", "B", "C"]);
        for (row, r) in rows.iter().zip(&reference) {
            for k in 0..3 {
                let rel = (row[k + 1] - r[k]).abs() / r[k];
                // Asked for rtol 1e-10; global error accumulates over ~1000 steps.
                assert!(
                    rel < 1e-5,
                    "{method}: t = {} y{} = {} vs {} (rel {rel:e})",
                    row[0],
                    k + 1,
                    row[k + 1],
                    r[k]
                );
            }
        }
    }
}

#[test]
fn first_order_reversible_and_second_order_match_closed_forms() {
    let dir = tempfile::tempdir().unwrap();
    // A -> B: A = A0 exp(-k t). A <=> B: relaxation to A_eq = kr (A0 + B0)/(kf + kr)
    // with rate kf + kr. 2 A -> P (rate k A^2, dA/dt = -2 k A^2): A = A0 / (1 + 2 k A0 t).
    // (Integrated rate laws; common practice, e.g. Atkins' Physical Chemistry, ch. 17.)
    let m = write_model(
        dir.path(),
        "closed.mech",
        "units concentration uM, time s\n\
         species A = 5 uM\nspecies B\nspecies C = 2 uM\nspecies D = 1 uM\nspecies E = 3 uM\nspecies P\n\
         param k = 0.2 /s\nparam kf = 0.7 /s\nparam kr = 0.3 /s\nparam k2 = 0.05 /uM/s\n\
         step decay A -> B with k\nstep flip C <=> D with kf, kr\nstep dimer 2 E -> P with k2\n",
    );
    let (_, rows) = simulate_csv(
        dir.path(),
        &m,
        &[
            "--until", "20 s", "--points", "41", "--rtol", "1e-10", "--atol", "1e-14",
        ],
    );
    for r in &rows {
        let t = r[0];
        let a = 5.0 * (-0.2 * t).exp();
        let c_eq = 0.3 * 3.0 / 1.0;
        let c = c_eq + (2.0 - c_eq) * (-(0.7 + 0.3) * t).exp();
        let e = 3.0 / (1.0 + 2.0 * 0.05 * 3.0 * t);
        assert!((r[1] - a).abs() <= 1e-7 * 5.0, "A at {t}: {} vs {a}", r[1]);
        assert!((r[3] - c).abs() <= 1e-7 * 3.0, "C at {t}: {} vs {c}", r[3]);
        assert!((r[5] - e).abs() <= 1e-7 * 3.0, "E at {t}: {} vs {e}", r[5]);
    }
}

/// The principal branch W0 of the Lambert W function by Halley's iteration
/// (Corless et al., "On the Lambert W function", Adv. Comput. Math. 5, 1996).
fn lambert_w0(x: f64) -> f64 {
    let mut w = if x < 1.0 {
        x / (1.0 + x)
    } else {
        x.ln() - x.ln().ln().max(0.0)
    };
    for _ in 0..100 {
        let ew = w.exp();
        let f = w * ew - x;
        let step = f / (ew * (w + 1.0) - (w + 2.0) * f / (2.0 * w + 2.0));
        w -= step;
        if step.abs() <= 1e-15 * w.abs().max(1e-300) {
            break;
        }
    }
    w
}

#[test]
fn michaelis_menten_progress_curve_follows_the_lambert_w_solution() {
    // Schnell & Mendoza (1997), J. Theor. Biol. 187, 207: under the QSSA
    // S(t) = Km W0((S0/Km) exp((S0 - Vmax t)/Km)), Vmax = kcat E0,
    // Km = (koff + kcat)/kon. With E0/(S0 + Km) = 1e-4 the QSSA error is of
    // that relative order (Segel, Bull. Math. Biol. 50, 1988).
    assert!((lambert_w0(1.0) - 0.5671432904097838).abs() < 1e-15); // the omega constant
    let dir = tempfile::tempdir().unwrap();
    let m = write_model(
        dir.path(),
        "mm.mech",
        "units concentration uM, time s\n\
         species S = 50 uM\nspecies E = 0.01 uM\nspecies ES\nspecies P\n\
         param kon = 10 /uM/s\nparam koff = 100 /s\nparam kcat = 50 /s\n\
         step bind E + S <=> ES with kon, koff\nstep turn ES -> E + P with kcat\n",
    );
    let (_, rows) = simulate_csv(
        dir.path(),
        &m,
        &[
            "--until", "300 s", "--points", "61", "--rtol", "1e-9", "--atol", "1e-14",
        ],
    );
    let (km, vmax, s0) = ((100.0 + 50.0) / 10.0, 50.0 * 0.01, 50.0);
    for r in rows.iter().skip(1) {
        let t = r[0];
        let s = km * lambert_w0((s0 / km) * ((s0 - vmax * t) / km).exp());
        // Compare substrate + complex (the QSSA's slow variable) against S0 scale.
        let err = (r[1] + r[3] - s).abs() / s0;
        assert!(
            err < 5e-4,
            "t = {t}: S+ES = {} vs W solution {s} (error {err:e} of S0)",
            r[1] + r[3]
        );
    }
}

/// Conservation laws from the exact stoichiometry (the `network` stage).
fn laws_of(model: &Model) -> Vec<Vec<(usize, f64)>> {
    let reduced = ratewright::network::reduce(model).expect("reduces");
    reduced
        .laws
        .iter()
        .map(|l| {
            l.coefficients
                .iter()
                .map(|(i, c)| (*i, c.to_string().parse::<f64>().unwrap()))
                .collect()
        })
        .collect()
}

#[test]
fn every_conservation_law_holds_along_every_trajectory_and_reduced_runs_agree() {
    let dir = tempfile::tempdir().unwrap();
    for path in models() {
        let loaded = load_path(&path);
        let model = loaded
            .model
            .unwrap_or_else(|| panic!("{} loads", path.display()));
        let event_times: Vec<f64> = model.events.iter().filter_map(|e| e.time()).collect();
        let (_, full) = simulate_csv(dir.path(), &path, &["--rtol", "1e-10", "--atol", "1e-16"]);
        for law in laws_of(&model) {
            let value = |row: &Vec<f64>| law.iter().map(|(i, c)| c * row[i + 1]).sum::<f64>();
            let scale = law
                .iter()
                .map(|(i, c)| (c * full[0][i + 1]).abs())
                .sum::<f64>()
                .max(1e-300);
            // Compare within each stretch between events (an addition changes a total).
            let segment = |t: f64| event_times.iter().filter(|&&e| e <= t).count();
            // Rows at one time straddle an event (the state before, then after).
            for w in full.windows(2) {
                if w[0][0] < w[1][0] && segment(w[0][0]) == segment(w[1][0]) {
                    let (a, b) = (value(&w[0]), value(&w[1]));
                    assert!(
                        (a - b).abs() <= 1e-9 * scale.max(a.abs()),
                        "{}: law {law:?} drifts from {a} to {b}",
                        path.display()
                    );
                }
            }
        }
        let out = dir.path().join("reduced.csv");
        run_ok(&[
            "run",
            path.to_str().unwrap(),
            "--reduced",
            "--rtol",
            "1e-10",
            "--atol",
            "1e-16",
            "-o",
            out.to_str().unwrap(),
        ]);
        let (_, reduced) = read_csv(&out);
        assert_eq!(reduced.len(), full.len());
        // Agreement to 1e-6 relative (the default --rtol) when both runs are asked for 1e-10:
        // each run's global error is a few orders above its local tolerance on stiff models.
        for (a, b) in full.iter().zip(&reduced) {
            for k in 1..a.len() {
                let col_scale = full.iter().map(|r| r[k].abs()).fold(0.0, f64::max);
                assert!(
                    (a[k] - b[k]).abs() <= 1e-6 * a[k].abs() + 1e-8 * col_scale + 1e-13,
                    "{}: full and reduced differ at t = {}, column {k}: {} vs {}",
                    path.display(),
                    a[0],
                    a[k],
                    b[k]
                );
            }
        }
    }
}

#[test]
fn compiled_jacobian_agrees_with_central_differences_on_every_model() {
    // Central differences, error O(h^2) (common practice).
    for path in models() {
        let model = load_path(&path).model.unwrap();
        let system = CompiledSystem::full(&model).unwrap();
        let mut w = system.workspace(&constants_of(&model));
        let n = system.nstates;
        // At the initial state and at a state with every species positive.
        let y0 = system.state_from_species(&model.initial_state());
        let scale = y0.iter().fold(0.0f64, |a, v| a.max(v.abs())).max(1e-3);
        let y1: Vec<f64> = (0..n)
            .map(|i| y0[i] + scale * (0.1 + 0.05 * i as f64))
            .collect();
        for y in [y0, y1] {
            let j = system.dense_jacobian(&mut w, &y, 0.0);
            for c in 0..n {
                let h = 1e-6 * y[c].abs().max(scale * 1e-3);
                let (mut yp, mut ym) = (y.clone(), y.clone());
                yp[c] += h;
                ym[c] -= h;
                let (mut fp, mut fm) = (vec![0.0; n], vec![0.0; n]);
                system.rhs(&mut w, &yp, 0.0, &mut fp);
                system.rhs(&mut w, &ym, 0.0, &mut fm);
                for r in 0..n {
                    let fd = (fp[r] - fm[r]) / (2.0 * h);
                    let tol = 1e-5 * fd.abs().max(j[r][c].abs())
                        + 1e-7 * (fp[r].abs() + fm[r].abs()) / h * 1e-6
                        + 1e-9;
                    assert!(
                        (fd - j[r][c]).abs() <= tol,
                        "{}: J[{r}][{c}] = {} vs central difference {fd}",
                        path.display(),
                        j[r][c]
                    );
                }
            }
        }
    }
}

/// Writes the model as Python expressions for tests/python/sim_crosscheck.py.
fn crosscheck_spec(model: &Model, times: &[f64]) -> serde_json::Value {
    use ratewright::algebra::print::{Syntax, print_expr};
    let name = |s: Sym| match s {
        Sym::Species(i) => format!("y[{i}]"),
        Sym::Param(i) => format!("P[{i}]"),
        Sym::Fixed(i) => format!("F[{i}]"),
        Sym::Total(i) => format!("T[{i}]"),
        Sym::Observable(i) => panic!("observable {i} left after expansion"),
    };
    let expand = |e: &ratewright::model::Expr| {
        let mut e = e.clone();
        for _ in 0..16 {
            e = e.substitute(&|s| match s {
                Sym::Observable(i) => Some(model.observables[i].expr.clone()),
                _ => None,
            });
        }
        e
    };
    let fluxes: Vec<String> = (0..model.steps.len())
        .map(|j| print_expr(&expand(&model.step_rate(j)), &name, Syntax::Python))
        .collect();
    let stoich: Vec<Vec<(usize, f64)>> = (0..model.steps.len())
        .map(|j| {
            model
                .net_change(j)
                .into_iter()
                .map(|(i, c)| (i, ratewright::model::coef_f64(c)))
                .collect()
        })
        .collect();
    let observables: Vec<String> = model
        .observables
        .iter()
        .map(|o| print_expr(&expand(&o.expr), &name, Syntax::Python))
        .collect();
    serde_json::json!({
        "species": model.species.iter().map(|s| s.name.clone()).collect::<Vec<_>>(),
        "observable_names": model.observables.iter().map(|o| o.name.clone()).collect::<Vec<_>>(),
        "initial": model.initial_state(),
        "params": model.params.iter().map(|p| p.value).collect::<Vec<_>>(),
        "fixed": model.fixed.iter().map(|f| f.value).collect::<Vec<_>>(),
        "totals": model.totals.iter().map(|t| t.terms.iter().map(|(i, c)| (*i, ratewright::model::coef_f64(*c))).collect::<Vec<_>>()).collect::<Vec<_>>(),
        "fluxes": fluxes,
        "stoichiometry": stoich,
        "observables": observables,
        "events": model.events.iter().filter_map(|e| e.timed_species_change()).map(|(time, kind, species, amount)| serde_json::json!({"time": time, "kind": kind, "species": species, "amount": amount})).collect::<Vec<_>>(),
        "times": times,
        "rtol": 1e-10,
        "atol": 1e-16,
    })
}

/// `run` at rtol 1e-10 against SciPy's solve_ivp (Radau, rtol 1e-10, a
/// general-purpose reference integrator) to 1e-6 relative at every output
/// time.
fn check_against_scipy_radau(dir: &Path, path: &Path) {
    let model = load_path(path).model.unwrap();
    let (header, mut rows) = simulate_csv(dir, path, &["--rtol", "1e-10", "--atol", "1e-16"]);
    // The default grid holds each event's time twice (before, then after);
    // the reference reports the state after, so the rows before are dropped.
    let mut after_events: Vec<Vec<f64>> = Vec::new();
    for row in rows.drain(..) {
        if after_events
            .last()
            .is_some_and(|last: &Vec<f64>| last[0] == row[0])
        {
            after_events.pop();
        }
        after_events.push(row);
    }
    let rows = after_events;
    let times: Vec<f64> = rows.iter().map(|r| r[0]).collect();
    let spec = dir.join("spec.json");
    std::fs::write(
        &spec,
        serde_json::to_vec(&crosscheck_spec(&model, &times)).unwrap(),
    )
    .unwrap();
    let out = python(
        &root().join("tests/python/sim_crosscheck.py"),
        &[spec.to_str().unwrap()],
    );
    assert!(
        out.status.success(),
        "{}: {}",
        path.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    let (ref_header, reference) = parse_csv_text(&String::from_utf8(out.stdout).unwrap());
    assert_eq!(header, ref_header, "{}", path.display());
    assert_eq!(rows.len(), reference.len(), "{}", path.display());
    for (a, b) in rows.iter().zip(&reference) {
        assert_eq!(a[0], b[0]);
        for k in 1..a.len() {
            let col_scale = reference.iter().map(|r| r[k].abs()).fold(0.0, f64::max);
            // 1e-6 relative, with a floor far below each column's size for values near zero.
            let tol = 1e-6 * b[k].abs() + 1e-9 * col_scale;
            assert!(
                (a[k] - b[k]).abs() <= tol,
                "{}: t = {} {} = {} vs SciPy Radau {} (diff {:e})",
                path.display(),
                a[0],
                header[k],
                a[k],
                b[k],
                (a[k] - b[k]).abs()
            );
        }
    }
}

/// A model whose protocol changes the volume or waits for conditions: its
/// emitted SBML read by libSBML and integrated by SciPy's Radau with event
/// functions (tests/python/sbml_assay_simulate.py) against `run --times`, to
/// 1e-6 relative (plus 1e-9 of each column's largest value), volume too.
fn check_against_libsbml_scipy(dir: &Path, path: &Path) {
    let xml = dir.join("assay.xml");
    run_ok(&[
        "emit",
        path.to_str().unwrap(),
        "--target",
        "sbml",
        "-o",
        xml.to_str().unwrap(),
    ]);
    let times = "1,30,100,300,500,700,1000,1300,1500";
    let (header, rows) = simulate_csv(
        dir,
        path,
        &["--times", times, "--rtol", "1e-10", "--atol", "1e-14"],
    );
    let out = python(
        &root().join("tests/python/sbml_assay_simulate.py"),
        &[xml.to_str().unwrap(), times],
    );
    assert!(
        out.status.success(),
        "{}: {}",
        path.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    // `# fired,<time>` lines report the triggers; the table is the rest.
    let table: String = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| format!("{l}\n"))
        .collect();
    let (ref_header, reference) = parse_csv_text(&table);
    assert_eq!(rows.len(), reference.len(), "{}", path.display());
    let model = load_path(path).model.unwrap();
    if model.events.iter().any(|e| e.time().is_none()) {
        assert!(
            text.contains("# fired,"),
            "{}: no trigger fired",
            path.display()
        );
    }
    let litres = model.volume_litres().unwrap() / model.volume.unwrap();
    for (k, name) in header.iter().enumerate().skip(1) {
        // The compartment is in litres, the volume column in the declared unit.
        let (r, factor) = if name == "volume" {
            (ref_header.iter().position(|h| h == "compartment"), litres)
        } else {
            (ref_header.iter().position(|h| h == name), 1.0)
        };
        let Some(r) = r else {
            // Observables are not in the reference's output.
            assert!(model.observables.iter().any(|o| &o.name == name), "{name}");
            continue;
        };
        let col_scale = reference.iter().map(|q| q[r].abs()).fold(0.0, f64::max);
        for (a, b) in rows.iter().zip(&reference) {
            let (got, want) = (a[k] * factor, b[r]);
            assert!(
                (got - want).abs() <= 1e-6 * want.abs() + 1e-9 * col_scale,
                "{}: t = {} {name} = {got} vs libSBML + SciPy {want}",
                path.display(),
                a[0]
            );
        }
    }
}

#[test]
fn scipy_radau_agrees_with_run_on_every_model() {
    let dir = tempfile::tempdir().unwrap();
    for path in models() {
        let model = load_path(&path).model.unwrap();
        if model.events.iter().any(|e| e.is_second_round()) {
            check_against_libsbml_scipy(dir.path(), &path);
        } else {
            check_against_scipy_radau(dir.path(), &path);
        }
    }
}

/// A mass-action network of `species` species with partners drawn at
/// random (isomerisations, reversible bindings A + B <=> C, irreversible
/// conversions; constants log-uniform in 0.01–100): above the sparse
/// threshold, and with no small separators, so the sparse LU's ordering
/// ends in a filled-in block that is factorised dense.
fn random_network(species: usize) -> String {
    let mut seed: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut next = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        seed
    };
    let below = |n: usize, next: &mut dyn FnMut() -> u64| (next() % n as u64) as usize;
    let mut text = String::from("units concentration uM, time s\n");
    for i in 0..species {
        let c = 0.1 + below(1000, &mut next) as f64 / 1000.0;
        text.push_str(&format!("species X{i} = {c:.3} uM\n"));
    }
    for k in 0..3 * species {
        let kf = 10f64.powf(-2.0 + 4.0 * below(1000, &mut next) as f64 / 1000.0);
        let kr = 10f64.powf(-2.0 + 4.0 * below(1000, &mut next) as f64 / 1000.0);
        // Every species is the first reactant of three steps.
        let a = k % species;
        let b = (a + 1 + below(species - 1, &mut next)) % species;
        let c = (b + 1 + below(species - 1, &mut next)) % species;
        let line = match k % 3 {
            0 => format!(
                "param kf{k} = {kf} /s\nparam kr{k} = {kr} /s\nstep r{k} X{a} <=> X{b} with kf{k}, kr{k}\n"
            ),
            1 if c != a => format!(
                "param kf{k} = {kf} /uM/s\nparam kr{k} = {kr} /s\nstep r{k} X{a} + X{b} <=> X{c} with kf{k}, kr{k}\n"
            ),
            _ => format!("param kf{k} = {kf} /s\nstep r{k} X{a} -> X{b} with kf{k}\n"),
        };
        text.push_str(&line);
    }
    text
}

#[test]
fn scipy_radau_agrees_with_run_on_a_large_random_network() {
    let dir = tempfile::tempdir().unwrap();
    let species = 160;
    assert!(species > ratewright::numeric::SPARSE_THRESHOLD);
    let path = write_model(dir.path(), "random_network.mech", &random_network(species));
    check_against_scipy_radau(dir.path(), &path);
}

#[test]
fn steady_state_matches_closed_forms_with_eigenvalues() {
    let dir = tempfile::tempdir().unwrap();
    // Open Michaelis-Menten system: 0 -> S (k0), E + S <=> ES -> E + P, P -> 0.
    // At steady state k0 = kcat E_t S/(Km + S) exactly (Briggs & Haldane,
    // Biochem. J. 19, 338, 1925), so S = Km k0/(kcat E_t - k0), P = k0/kd.
    let m = write_model(
        dir.path(),
        "open.mech",
        "units concentration uM, time s\n\
         species S = 1 uM\nspecies E = 0.5 uM\nspecies ES\nspecies P\n\
         param k0 = 0.2 uM/s\nparam kon = 2 /uM/s\nparam koff = 3 /s\nparam kcat = 1 /s\nparam kd = 0.1 /s\n\
         step feed 0 -> S with k0\nstep bind E + S <=> ES with kon, koff\nstep turn ES -> E + P with kcat\nstep drain P -> 0 with kd\n",
    );
    let out = run_ok(&["steady", m.to_str().unwrap(), "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let km = (3.0 + 1.0) / 2.0;
    let s = km * 0.2 / (1.0 * 0.5 - 0.2);
    let got = v["state"]["S"].as_f64().unwrap();
    assert!((got - s).abs() < 1e-8 * s, "S = {got} vs {s}");
    assert!((v["state"]["P"].as_f64().unwrap() - 2.0).abs() < 1e-8);
    assert_eq!(v["stable"], serde_json::json!(true));
    // Three independent species (E is fixed by E_t): three eigenvalues, P's is -kd.
    let eig = v["eigenvalues"].as_array().unwrap();
    assert_eq!(eig.len(), 3);
    assert!(
        eig.iter()
            .any(|e| (e[0].as_f64().unwrap() + 0.1).abs() < 1e-9)
    );

    // A <=> B: A = kr T/(kf + kr); the one eigenvalue of the reduced system is -(kf + kr).
    let m = write_model(
        dir.path(),
        "ab.mech",
        "species A = 3 uM\nspecies B = 1 uM\nparam kf = 2 /s\nparam kr = 0.5 /s\nstep s A <=> B with kf, kr\n",
    );
    let v: serde_json::Value = serde_json::from_str(&run_ok(&[
        "steady",
        m.to_str().unwrap(),
        "--format",
        "json",
    ]))
    .unwrap();
    assert!((v["state"]["A"].as_f64().unwrap() - 0.5 * 4.0 / 2.5).abs() < 1e-10);
    let eig = v["eigenvalues"].as_array().unwrap();
    assert_eq!(eig.len(), 1);
    assert!((eig[0][0].as_f64().unwrap() + 2.5).abs() < 1e-9 && eig[0][1].as_f64().unwrap() == 0.0);
}

#[test]
fn a_system_without_a_steady_state_gets_a_clear_message() {
    let dir = tempfile::tempdir().unwrap();
    // Constant inflow and nothing leaves: S grows without bound.
    let m = write_model(
        dir.path(),
        "grow.mech",
        "species S = 1 uM\nparam k0 = 1 uM/s\nstep feed 0 -> S with k0\n",
    );
    no_steady_state_error(m.to_str().unwrap());
}

/// `steady` on `path` exits 1 with E0702 "no steady state found".
fn no_steady_state_error(path: &str) {
    let out = ratewright(&["steady", path]);
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("E0702") && err.contains("no steady state found"),
        "{err}"
    );
}

#[test]
fn scans_match_closed_forms_at_a_time_and_at_steady_state() {
    let dir = tempfile::tempdir().unwrap();
    let m = write_model(
        dir.path(),
        "ab.mech",
        "species A = 3 uM\nspecies B = 1 uM\nparam kf = 2 /s\nparam kr = 0.5 /s\nstep s A <=> B with kf, kr\n",
    );
    let csv = dir.path().join("scan.csv");
    run_ok(&[
        "scan",
        m.to_str().unwrap(),
        "--vary",
        "kf=0.1..10:7:log",
        "--measure",
        "B / (A + B)",
        "--steady",
        "-o",
        csv.to_str().unwrap(),
    ]);
    let (header, rows) = read_csv(&csv);
    assert_eq!(header, vec!["kf", "B / (A + B)"]);
    assert_eq!(rows.len(), 7);
    for r in &rows {
        let expect = r[0] / (r[0] + 0.5); // equilibrium fraction kf/(kf + kr)
        assert!(
            (r[1] - expect).abs() < 1e-8,
            "kf = {}: {} vs {expect}",
            r[0],
            r[1]
        );
    }
    // Two names at a time: A(t) = A_eq + (A0 - A_eq) exp(-(kf + kr) t).
    run_ok(&[
        "scan",
        m.to_str().unwrap(),
        "--vary",
        "kf=0.5..2:4",
        "--vary",
        "A=1..4:3",
        "--measure",
        "A",
        "--at",
        "0.7 s",
        "--rtol",
        "1e-10",
        "--atol",
        "1e-14",
        "-o",
        csv.to_str().unwrap(),
    ]);
    let (_, rows) = read_csv(&csv);
    assert_eq!(rows.len(), 12);
    for r in &rows {
        let (kf, a0) = (r[0], r[1]);
        let total = a0 + 1.0;
        let a_eq = 0.5 * total / (kf + 0.5);
        let expect = a_eq + (a0 - a_eq) * (-(kf + 0.5) * 0.7f64).exp();
        assert!(
            (r[2] - expect).abs() < 1e-7,
            "kf = {kf}, A0 = {a0}: {} vs {expect}",
            r[2]
        );
    }
}

#[test]
fn a_blow_up_stops_with_the_time_and_species_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    // 2 A -> 3 A: dA/dt = k A^2, A = A0/(1 - k A0 t), infinite at t = 1/(k A0) = 10 s.
    let m = write_model(
        dir.path(),
        "boom.mech",
        "species A = 1 uM\nparam k = 0.1 /uM/s\nstep grow 2 A -> 3 A with k\n",
    );
    let out_csv = dir.path().join("boom.csv");
    let out = ratewright(&[
        "run",
        m.to_str().unwrap(),
        "--until",
        "20 s",
        "-o",
        out_csv.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("E0701") && err.contains("`A`"), "{err}");
    let t: f64 = err
        .split("t = ")
        .nth(1)
        .and_then(|s| s.split(':').next())
        .and_then(|s| s.trim().parse().ok())
        .expect("a time in the message");
    assert!(
        t > 9.0 && t <= 10.0 + 1e-6,
        "failure reported at t = {t}, the singularity is at 10 s"
    );
    assert!(!out_csv.exists(), "nothing is written after a failure");
}

#[test]
fn outputs_come_in_every_format_and_plots_are_drawn() {
    let dir = tempfile::tempdir().unwrap();
    let model = root().join("models/protease_assay.mech");
    let m = model.to_str().unwrap();
    let tsv = dir.path().join("x.tsv");
    let json = dir.path().join("x.json");
    let svg = dir.path().join("x.svg");
    let png = dir.path().join("x.png");
    run_ok(&[
        "run",
        m,
        "--until",
        "20 min",
        "--every",
        "1 min",
        "-o",
        tsv.to_str().unwrap(),
        "--plot",
        svg.to_str().unwrap(),
        "--show",
        "S,P",
    ]);
    let text = std::fs::read_to_string(&tsv).unwrap();
    assert!(
        text.starts_with("t\tS\tP\tE\tES\tsignal\tv_qss\n"),
        "{}",
        &text[..60]
    );
    // Header, 21 grid rows, and the protocol's addition at 10 min once more
    // (its time appears before and after the event).
    assert_eq!(text.lines().count(), 23);
    let svg_text = std::fs::read_to_string(&svg).unwrap();
    assert!(
        svg_text.contains("<svg")
            && svg_text.contains("time (s)")
            && svg_text.contains("concentration (uM)")
    );
    run_ok(&[
        "run",
        m,
        "--times",
        "0,600 s,601",
        "-o",
        json.to_str().unwrap(),
        "--plot",
        png.to_str().unwrap(),
        "--log-values",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    // The row at the addition's time holds the state after the addition (+10 uM S).
    let s = v["species"]["S"].as_array().unwrap();
    assert!(s[1].as_f64().unwrap() > 10.0 && s[1].as_f64().unwrap() < 10.01);
    assert_eq!(&std::fs::read(&png).unwrap()[1..4], b"PNG");
    // --set with units: 5 mM substrate is 5000 uM in the model's units.
    let out = run_ok(&["run", m, "--set", "S=5mM", "--times", "0"]);
    assert!(out.contains("5.000000e3"), "{out}");
}

#[test]
fn robertson_steady_state_is_found_despite_its_singular_jacobian() {
    // Robertson (1966): adding the three rate equations gives d(A+B+C)/dt = 0,
    // and the sum of dA/dt and dB/dt is -3e7 B², so the only steady state in
    // the class A + B + C = 1 is (0, 0, 1), where the reduced Jacobian is
    // singular (a derivation, common practice): in the coordinates (A, B)
    // it is [[-0.04, 1e4], [0.04, -1e4]], with eigenvalues 0 and -10000.04,
    // so linear stability cannot decide ("marginal"). Newton's method cannot
    // reach the state from the integrated one, where A and B still fall like
    // 1/t; the tool must still report (0, 0, 1) itself, not a point of the
    // trajectory near it.
    let out = run_ok(&["steady", "models/robertson.mech", "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&out).expect("json");
    let state = &v["state"];
    assert!(
        (state["C"].as_f64().unwrap() - 1.0).abs() <= 1e-12,
        "{state}"
    );
    assert!(state["A"].as_f64().unwrap().abs() <= 1e-15, "{state}");
    assert!(state["B"].as_f64().unwrap().abs() <= 1e-15, "{state}");
    let eigenvalues = v["eigenvalues"].as_array().unwrap();
    assert_eq!(eigenvalues.len(), 2);
    assert!(
        eigenvalues[0][0].as_f64().unwrap().abs() <= 1e-9,
        "{eigenvalues:?}"
    );
    assert!(
        (eigenvalues[1][0].as_f64().unwrap() + 10000.04).abs() <= 1e-6,
        "{eigenvalues:?}"
    );
    assert_eq!(v["stability"], "marginal");
}

#[test]
fn a_model_with_nothing_to_integrate_runs_and_has_a_steady_state() {
    // Every species fixed or in no step: the state is constant and the
    // observables follow their formulas (g = k·t exactly; common practice).
    let dir = tempfile::tempdir().unwrap();
    let m = write_model(
        dir.path(),
        "constant.mech",
        "units concentration uM, time s\n\
         fixed F = 2 uM\nspecies A = 1 uM\nparam k = 3 /s\n\
         observe o = k*F\nobserve g = k*F*t\n",
    );
    for extra in [&[][..], &["--reduced"], &["--method", "esdirk"]] {
        let (header, rows) =
            simulate_csv(dir.path(), &m, &[&["--times", "0,1.5,4"], extra].concat());
        assert_eq!(header, ["t", "A", "o", "g"]);
        assert_eq!(rows.len(), 3);
        for r in &rows {
            assert_eq!(r[1], 1.0);
            assert_eq!(r[2], 6.0);
            assert!((r[3] - 6.0 * r[0]).abs() <= 1e-12 * (1.0 + r[3].abs()));
        }
    }
    let json = run_ok(&["steady", m.to_str().unwrap(), "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(v["state"]["A"], 1.0);
    assert_eq!(v["stable"], true);
    assert_eq!(v["eigenvalues"].as_array().unwrap().len(), 0);
    // And an empty file: a run of nothing, not a failure.
    let empty = write_model(dir.path(), "empty.mech", "");
    let (header, rows) = simulate_csv(dir.path(), &empty, &["--times", "0,1"]);
    assert_eq!(header, ["t"]);
    assert_eq!(rows.len(), 2);
}

/// A -> B with k = 1 /s from A = 1 uM: A(t) = exp(-k t) (first-order
/// decay; common practice).
fn decay_model(dir: &Path) -> PathBuf {
    write_model(
        dir,
        "decay.mech",
        "units concentration uM, time s\nspecies A = 1 uM\nspecies B\nparam k = 1 /s\nstep r A -> B with k\n",
    )
}

#[test]
fn a_scan_asking_for_more_workers_than_points_gives_the_same_answer() {
    // A -> B: A(t) = A0 exp(-k t) (first-order decay; common practice).
    let dir = tempfile::tempdir().unwrap();
    let m = decay_model(dir.path());
    let scan = |jobs: &str| {
        run_ok(&[
            "scan",
            m.to_str().unwrap(),
            "--vary",
            "k=0.5..2:3",
            "--measure",
            "A",
            "--at",
            "1",
            "--jobs",
            jobs,
        ])
    };
    let one = scan("1");
    assert_eq!(scan("100000"), one);
    let (_, rows) = parse_csv_text(&one);
    for r in &rows {
        assert!(
            (r[1] - (-r[0]).exp()).abs() <= 1e-5,
            "k = {}: A(1) = {}",
            r[0],
            r[1]
        );
    }
}

#[test]
fn set_values_take_units_of_the_right_dimension_only() {
    // 1 /mM/min = 1/(1000 uM · 60 s) (SI prefixes and the minute: BIPM SI
    // Brochure, 9th ed.).
    let dir = tempfile::tempdir().unwrap();
    let m = write_model(
        dir.path(),
        "bind.mech",
        "units concentration uM, time s\n\
         species E = 1 uM\nspecies S = 10 uM\nspecies ES\n\
         param kon = 2 /uM/s\nparam koff = 3 /s\n\
         step bind E + S <=> ES with kon, koff\nobserve kon_used = kon\n",
    );
    let file = m.to_str().unwrap();
    let (header, rows) = simulate_csv(dir.path(), &m, &["--times", "0", "--set", "kon=1 /mM/min"]);
    let column = header.iter().position(|h| h == "kon_used").unwrap();
    assert!((rows[0][column] - 1.0 / 60_000.0).abs() <= 1e-18);
    for (option, value) in [
        ("--set", "kon=1 /s"),
        ("--set", "kon=1 uM"),
        ("--set", "E=3 min"),
        ("--set", "S=5 /s"),
    ] {
        let out = ratewright(&["run", file, "--times", "0", option, value]);
        assert_eq!(out.status.code(), Some(2), "{option} {value} is refused");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains("cannot be a value of"), "{err}");
    }
    let out = ratewright(&[
        "scan",
        file,
        "--vary",
        "kon=1 /s..2 /s:3",
        "--measure",
        "ES",
        "--at",
        "1",
    ]);
    assert_eq!(out.status.code(), Some(2));
    // A bare number is in the model's default units and always fits.
    run_ok(&["run", file, "--times", "0", "--set", "kon=5"]);
}

#[test]
fn setting_a_species_of_a_declared_total_keeps_the_total() {
    // `--set ES=1` must mean what writing `species ES = 1 uM` in the file
    // means: the declared total E_t = E + ES = 50 uM holds and E starts at 49
    // (the conservation law the file declares; LANGUAGE.md).
    let dir = tempfile::tempdir().unwrap();
    let text = |es: &str| {
        format!(
            "units concentration uM, time s\n\
             species S = 20 uM\nspecies P\nspecies E\nspecies ES{es}\n\
             param k1 = 2 /uM/s\nparam km1 = 40 /s\nparam k2 = 12 /s\n\
             step bind E + S <=> ES with k1, km1\nstep cat ES -> E + P with k2\n\
             total E_t = E + ES = 50 uM\n"
        )
    };
    let set_on_command_line = write_model(dir.path(), "a.mech", &text(""));
    let written_in_file = write_model(dir.path(), "b.mech", &text(" = 1 uM"));
    let times = ["--times", "0,0.01,1"];
    let (_, from_set) = simulate_csv(
        dir.path(),
        &set_on_command_line,
        &[&times[..], &["--set", "ES=1"]].concat(),
    );
    let (_, from_file) = simulate_csv(dir.path(), &written_in_file, &times);
    assert_eq!(from_set[0][3], 49.0, "E starts at 50 - 1");
    for (a, b) in from_set.iter().zip(&from_file) {
        for k in 0..a.len() {
            assert!((a[k] - b[k]).abs() <= 1e-9 * (1.0 + b[k].abs()));
        }
        assert!(
            (a[3] + a[4] - 50.0).abs() <= 1e-9,
            "E + ES = E_t at t = {}",
            a[0]
        );
    }
    // More than the total holds is refused, not run with a larger total.
    let out = ratewright(&[
        "run",
        set_on_command_line.to_str().unwrap(),
        "--times",
        "0",
        "--set",
        "ES=60",
    ]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn a_negative_rate_constant_is_refused_from_the_command_line_and_at_scan_points() {
    // Mass action: rate = k·[A] (common practice), so k < 0 would drive B
    // below zero; the file check (E0411) is in tests/bad_inputs.
    let dir = tempfile::tempdir().unwrap();
    let m = decay_model(dir.path());
    let file = m.to_str().unwrap();
    let out = ratewright(&["run", file, "--set", "k=-1"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot be negative"));
    let csv = run_ok(&[
        "scan",
        file,
        "--vary",
        "k=-1..1:3",
        "--measure",
        "B",
        "--at",
        "1",
    ]);
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines[1], "-1.0,", "the negative point is left empty");
    // B(1) = 1 - exp(-k) for k = 0 and 1.
    let (_, rows) = parse_csv_text(
        &lines[..1]
            .iter()
            .chain(&lines[2..])
            .copied()
            .collect::<Vec<_>>()
            .join("\n"),
    );
    for r in &rows {
        assert!((r[1] - (1.0 - (-r[0]).exp())).abs() <= 1e-5);
    }
}

#[test]
fn output_times_are_exactly_those_asked_for() {
    // A -> B: A(t) = exp(-k t) (first-order decay; common practice).
    let dir = tempfile::tempdir().unwrap();
    let m = decay_model(dir.path());
    let (_, rows) = simulate_csv(dir.path(), &m, &["--times", "0,1,1,2"]);
    let times: Vec<f64> = rows.iter().map(|r| r[0]).collect();
    assert_eq!(times, [0.0, 1.0, 1.0, 2.0]);
    assert_eq!(rows[1], rows[2]);
    assert!((rows[1][1] - (-1f64).exp()).abs() <= 1e-5);
    let out = ratewright(&["run", m.to_str().unwrap(), "--times", "5,1,3"]);
    assert_eq!(
        out.status.code(),
        Some(2),
        "a decreasing list is refused, not reordered"
    );
}

#[test]
fn a_bad_measured_expression_is_a_usage_error_that_quotes_it() {
    // The expression is a command-line argument: exit 2 (CLI.md), and the
    // message quotes it instead of pointing at a line the file does not have.
    for (measure, code) in [("P +", "E0101"), ("Q", "E0201"), ("P + k_cat", "E0302")] {
        let out = ratewright(&[
            "scan",
            "models/protease_assay.mech",
            "--vary",
            "k_on=1..2:2",
            "--measure",
            measure,
            "--at",
            "1",
        ]);
        assert_eq!(out.status.code(), Some(2), "{measure}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(
            err.contains(&format!("--measure `{measure}`")) && err.contains(code),
            "{err}"
        );
        assert!(!err.contains("scan_measure"), "{err}");
    }
    // The time has no value at a steady state.
    let out = ratewright(&[
        "scan",
        "models/protease_assay.mech",
        "--vary",
        "k_on=1..2:2",
        "--measure",
        "t",
        "--steady",
    ]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn a_non_finite_observable_is_written_and_warned_about() {
    // ratio = A / B with B(0) = 0 is infinite at t = 0 only (IEEE 754
    // division; common practice), then A/B = e^{-t}/(1 - e^{-t}).
    let dir = tempfile::tempdir().unwrap();
    let m = write_model(
        dir.path(),
        "ratio.mech",
        "units concentration uM, time s\nspecies A = 1 uM\nspecies B\nparam k = 1 /s\n\
         step r A -> B with k\nobserve ratio = A / B\n",
    );
    let csv = dir.path().join("ratio.csv");
    let out = ratewright(&[
        "run",
        m.to_str().unwrap(),
        "--times",
        "0,1",
        "-o",
        csv.to_str().unwrap(),
    ]);
    assert!(out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("observable `ratio` is inf at t = 0"), "{err}");
    let (_, rows) = read_csv(&csv);
    assert!(rows[0][3].is_infinite());
    let e = (-1f64).exp();
    assert!((rows[1][3] - e / (1.0 - e)).abs() <= 1e-5);
}

#[test]
fn the_oregonator_matches_the_published_reference_solution() {
    // Bari IVP test set (Mazzia & Magherini), problem OREGO, reference
    // solution at t = 360 (from memory): y1 = 1.000814870318523,
    // y2 = 1228.178521549917, y3 = 132.0554942846706.
    let dir = tempfile::tempdir().unwrap();
    let reference = [1.000814870318523, 1228.178521549917, 132.0554942846706];
    for (fixture, method) in [
        ("orego.mech", "bdf"),
        ("orego.mech", "esdirk"),
        ("orego_scaled.mech", "bdf"),
    ] {
        let (_, rows) = simulate_csv(
            dir.path(),
            &root().join("tests/fixtures").join(fixture),
            &[
                "--times", "360", "--rtol", "1e-10", "--atol", "1e-10", "--method", method,
            ],
        );
        for (k, want) in reference.iter().enumerate() {
            let got = rows[0][k + 1];
            assert!(
                (got - want).abs() <= 1e-6 * want.abs(),
                "{method}: y{} = {got} vs {want}",
                k + 1
            );
        }
    }
}

#[test]
fn an_oscillator_has_no_steady_state_to_report() {
    // OREGO oscillates for ever (a limit cycle around an unstable steady
    // state; Field & Noyes 1974, from memory): `steady` must say no steady
    // state was found (E0702, exit 1), not report a bare solver failure.
    no_steady_state_error("tests/fixtures/orego.mech");
}

#[test]
fn species_from_a_used_file_stand_where_the_use_is_in_the_columns() {
    // CLI.md: the CSV header is `t,<species in declaration order>,...`; a
    // `use` declares the other file's species where it stands.
    let dir = tempfile::tempdir().unwrap();
    write_model(
        dir.path(),
        "enzyme.mech",
        "species E = 1 uM\nparam kon = 1 /uM/s\n",
    );
    let main = write_model(
        dir.path(),
        "main.mech",
        "units concentration uM, time s\nspecies P\nuse \"enzyme.mech\"\nspecies S = 10 uM, ES\n\
         param koff = 1 /s\nparam kcat = 2 /s\nstep b E + S <=> ES with kon, koff\nstep c ES -> E + P with kcat\n",
    );
    let (header, _) = simulate_csv(dir.path(), &main, &["--times", "0"]);
    assert_eq!(header, ["t", "P", "E", "S", "ES"]);
}

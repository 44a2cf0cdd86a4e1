//! Simulation benchmarks, in process (run through bench/run_sim_bench.sh):
//!
//!   sim_bench robertson N           Robertson (1966) to t = 1e11 through the
//!                                   compiled model, N repetitions; and the
//!                                   same problem with a hand-written RHS and
//!                                   Jacobian handed to diffsol (the limit).
//!   sim_bench network DIR           generates the 1,000-species, 3,000-step
//!                                   random network into DIR (network.mech
//!                                   and network.json for the SciPy script).
//!   sim_bench network-local DIR     the same with partners chosen among
//!                                   nearby species (pathway-like).
//!   sim_bench threshold N           dense against sparse LU by size.
//!   sim_bench network-run DIR N     solves DIR/network.mech N times and a
//!                                   tight reference once.
//!   sim_bench control N             control analysis of models/kinase_cycle.mech
//!                                   (steady state, elasticities, control and
//!                                   response coefficients), N repetitions.
//!   sim_bench network-sensitivity DIR N
//!                                   the same run plain and with forward
//!                                   sensitivities to kf0..kf9, side by side,
//!                                   N times each; writes the sensitivities of
//!                                   X0..X9 at t = 10 for the SciPy script.
//!
//! Each line of output is `key value` so the shell script can collect it.

// Reference values keep every digit their source gives.
#![allow(clippy::excessive_precision)]

use diffsol::{NalgebraLU, NalgebraMat, OdeBuilder, OdeSolverMethod, Vector};
use ratewright::model::load_path;
use ratewright::sim::integrate::{LinearAlgebra, simulate_with};
use ratewright::sim::{Prepared, Settings};
use std::path::Path;
use std::time::Instant;

const ROBERTSON_RTOL: f64 = 1e-8;
const ROBERTSON_ATOL: f64 = 1e-12;
// Bari IVP test set (Mazzia & Magherini), problem ROBER at t = 1e11, from
// memory; cross-checked against SciPy Radau at rtol 1e-12 in tests/sim.rs.
const ROBERTSON_REF: [f64; 3] = [
    0.2083340149701255e-7,
    0.8333360770334713e-13,
    0.9999999791665050,
];

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn max_rel_error(y: &[f64], reference: &[f64]) -> f64 {
    y.iter()
        .zip(reference)
        .map(|(a, b)| (a - b).abs() / b.abs())
        .fold(0.0, f64::max)
}

fn robertson(reps: usize) {
    let model = load_path(Path::new("models/robertson.mech"))
        .model
        .expect("models/robertson.mech loads");
    let settings = Settings {
        rtol: ROBERTSON_RTOL,
        atol: ROBERTSON_ATOL,
        ..Settings::default()
    };
    let prepared = Prepared::full(&model).expect("compiles");
    let mut times = Vec::new();
    let mut last = Vec::new();
    for _ in 0..reps {
        let start = Instant::now();
        let tr = prepared.simulate(&settings, &[1e11]).expect("solves");
        times.push(start.elapsed().as_secs_f64());
        last = tr.rows[0][..3].to_vec();
    }
    println!("compiled_seconds {:.6e}", median(times));
    println!(
        "compiled_error {:.3e}",
        max_rel_error(&last, &ROBERTSON_REF)
    );

    // Compile + solve, as a fitting loop that rebuilds the model would pay.
    let start = Instant::now();
    for _ in 0..reps {
        let p = Prepared::full(&model).expect("compiles");
        let _ = p.simulate(&settings, &[1e11]).expect("solves");
    }
    println!(
        "compiled_with_compile_seconds {:.6e}",
        start.elapsed().as_secs_f64() / reps as f64
    );

    // The limit: the same equations written by hand for diffsol.
    let mut times = Vec::new();
    let mut last = Vec::new();
    for _ in 0..reps {
        let start = Instant::now();
        let y = hand_written_robertson();
        times.push(start.elapsed().as_secs_f64());
        last = y;
    }
    println!("hand_seconds {:.6e}", median(times));
    println!("hand_error {:.3e}", max_rel_error(&last, &ROBERTSON_REF));
}

fn hand_written_robertson() -> Vec<f64> {
    let problem = OdeBuilder::<NalgebraMat<f64>>::new()
        .rtol(ROBERTSON_RTOL)
        .atol([ROBERTSON_ATOL; 3])
        .p([0.04, 3e7, 1e4])
        .rhs_implicit(
            |x: &[f64], p: &[f64], _t: f64, y: &mut [f64]| {
                let (a, b, c) = (x[0], x[1], x[2]);
                let slow = p[0] * a;
                let fast = p[1] * b * b;
                let medium = p[2] * b * c;
                y[0] = -slow + medium;
                y[1] = slow - fast - medium;
                y[2] = fast;
            },
            |x: &[f64], p: &[f64], _t: f64, v: &[f64], y: &mut [f64]| {
                let (b, c) = (x[1], x[2]);
                let d_slow = p[0] * v[0];
                let d_fast = 2.0 * p[1] * b * v[1];
                let d_medium = p[2] * (c * v[1] + b * v[2]);
                y[0] = -d_slow + d_medium;
                y[1] = d_slow - d_fast - d_medium;
                y[2] = d_fast;
            },
        )
        .init(
            |_p: &[f64], _t: f64, y: &mut [f64]| y.copy_from_slice(&[1.0, 0.0, 0.0]),
            3,
        )
        .build()
        .expect("builds");
    let mut problem = problem;
    problem.ode_options.max_number_timesteps = 500_000;
    let mut solver = problem.bdf::<NalgebraLU<f64>>().expect("starts");
    solver.set_stop_time(1e11).expect("stop time");
    loop {
        if let diffsol::OdeSolverStopReason::TstopReached = solver.step().expect("steps") {
            break;
        }
    }
    solver
        .interpolate(1e11)
        .expect("interpolates")
        .clone_as_vec()
}

/// A small deterministic generator (SplitMix64), so the network is the same on every machine.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E3779B97F4A7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58476D1CE4E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D049BB133111EB);
        z ^ (z >> 31)
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    fn log_uniform(&mut self, lo: f64, hi: f64) -> f64 {
        (lo.ln() + self.unit() * (hi.ln() - lo.ln())).exp()
    }
}

/// 1,000 species, 3,000 steps: isomerisations A <=> B (first order), bindings
/// A + B <=> C (second order forward), and irreversible conversions A -> B;
/// about two thirds reversible. Every step conserves a positive weight
/// (binding products weigh the sum of their parts), so concentrations stay
/// bounded.
///
/// `window`: None picks partners anywhere (a random graph, the worst case for
/// sparse LU fill-in); Some(w) picks them within about w indices of a random
/// centre, like pathways where each species reacts with a few neighbours.
fn generate_network(dir: &Path, window: Option<usize>) {
    generate(dir, 1000, 3000, window);
}

/// A member of `group` (sorted) anywhere, or near `centre`.
fn pick(rng: &mut Rng, group: &[usize], centre: usize, window: Option<usize>) -> usize {
    match window {
        None => group[rng.below(group.len())],
        Some(w) => {
            let p0 = group.partition_point(|&x| x < centre) as i64;
            let half = (w / 4).max(1) as i64;
            let off = rng.below((2 * half + 1) as usize) as i64 - half;
            group[(p0 + off).clamp(0, group.len() as i64 - 1) as usize]
        }
    }
}

fn generate(dir: &Path, n_species: usize, n_steps: usize, window: Option<usize>) {
    let mut rng = Rng(20241);
    // Weights 1..4 so that bindings can conserve weight: C's weight = A's + B's.
    let weight: Vec<usize> = (0..n_species).map(|i| 1 + i % 4).collect();
    let by_weight =
        |w: usize| -> Vec<usize> { (0..n_species).filter(|&i| weight[i] == w).collect() };
    let groups: Vec<Vec<usize>> = (0..=4).map(by_weight).collect();
    let mut mech = String::from(
        "# Generated benchmark network (bench/sim_bench.rs).\nmechanism generated_network\nunits concentration uM, time s\n",
    );
    let mut initial = Vec::new();
    for i in 0..n_species {
        let v = 0.1 + rng.unit();
        initial.push(v);
        mech.push_str(&format!("species X{i} = {v:.6} uM\n"));
    }
    let mut steps_json = Vec::new();
    for k in 0..n_steps {
        let kind = rng.below(3);
        let centre = rng.below(n_species);
        let kf = rng.log_uniform(0.01, 100.0);
        let kr = rng.log_uniform(0.01, 100.0);
        let (reactants, products, reversible): (Vec<usize>, Vec<usize>, bool) = match kind {
            0 => {
                let w = 1 + rng.below(4);
                let g = &groups[w];
                let a = pick(&mut rng, g, centre, window);
                let mut b = pick(&mut rng, g, centre, window);
                if b == a {
                    b = g[(g.iter().position(|&x| x == a).unwrap_or(0) + 1) % g.len()];
                }
                (vec![a], vec![b], true)
            }
            1 => {
                let (wa, wb) = (1 + rng.below(2), 1 + rng.below(2));
                let a = pick(&mut rng, &groups[wa], centre, window);
                let b = pick(&mut rng, &groups[wb], centre, window);
                let c = pick(&mut rng, &groups[wa + wb], centre, window);
                (vec![a, b], vec![c], rng.below(4) != 0)
            }
            _ => {
                let w = 1 + rng.below(4);
                let g = &groups[w];
                let a = pick(&mut rng, g, centre, window);
                let mut b = pick(&mut rng, g, centre, window);
                if b == a {
                    b = g[(g.iter().position(|&x| x == a).unwrap_or(0) + 1) % g.len()];
                }
                (vec![a], vec![b], false)
            }
        };
        // Constants in the model's units: first order /s, second order /uM/s.
        let kf_unit = if reactants.len() == 2 { "/uM/s" } else { "/s" };
        mech.push_str(&format!("param kf{k} = {kf:.6} {kf_unit}\n"));
        if reversible {
            mech.push_str(&format!("param kr{k} = {kr:.6} /s\n"));
        }
        let side = |v: &[usize]| {
            v.iter()
                .map(|i| format!("X{i}"))
                .collect::<Vec<_>>()
                .join(" + ")
        };
        let rate = if reversible {
            format!("with kf{k}, kr{k}")
        } else {
            format!("with kf{k}")
        };
        mech.push_str(&format!(
            "step r{k} {} {} {} {rate}\n",
            side(&reactants),
            if reversible { "<=>" } else { "->" },
            side(&products)
        ));
        let kf_r = (kf * 1e6).round() / 1e6;
        let kr_r = (kr * 1e6).round() / 1e6;
        steps_json.push(serde_json::json!({
            "reactants": reactants, "products": products, "kf": kf_r, "kr": if reversible { kr_r } else { 0.0 },
        }));
    }
    let initial_r: Vec<f64> = initial.iter().map(|v| (v * 1e6).round() / 1e6).collect();
    std::fs::create_dir_all(dir).expect("bench dir");
    std::fs::write(dir.join("network.mech"), mech).expect("writes network.mech");
    let json = serde_json::json!({ "n": n_species, "initial": initial_r, "steps": steps_json, "until": 10.0 });
    std::fs::write(
        dir.join("network.json"),
        serde_json::to_vec(&json).expect("json"),
    )
    .expect("writes network.json");
    if n_species == 1000 {
        println!("network_written {} (window {window:?})", dir.display());
    }
}

fn network_run(dir: &Path, reps: usize) {
    let path = dir.join("network.mech");
    let loaded = load_path(&path);
    let model = loaded.model.unwrap_or_else(|| {
        panic!(
            "{} loads: {:?}",
            path.display(),
            loaded.diagnostics.first().map(|d| &d.message)
        )
    });
    let start = Instant::now();
    let prepared = Prepared::full(&model).expect("compiles");
    println!(
        "network_compile_seconds {:.6e}",
        start.elapsed().as_secs_f64()
    );
    let settings = Settings {
        rtol: 1e-6,
        atol: 1e-10,
        ..Settings::default()
    };
    let mut times = Vec::new();
    let mut last = Vec::new();
    for _ in 0..reps {
        let start = Instant::now();
        let tr = prepared.simulate(&settings, &[10.0]).expect("solves");
        times.push(start.elapsed().as_secs_f64());
        last = tr.rows[0][..model.species.len()].to_vec();
    }
    println!("network_seconds {:.6e}", median(times));
    let tight = Settings {
        rtol: 1e-11,
        atol: 1e-15,
        ..Settings::default()
    };
    let reference = prepared
        .simulate(&tight, &[10.0])
        .expect("solves tightly")
        .rows[0][..model.species.len()]
        .to_vec();
    let err = last
        .iter()
        .zip(&reference)
        .map(|(a, b)| (a - b).abs() / b.abs().max(1e-6))
        .fold(0.0, f64::max);
    println!("network_error {err:.3e}");
    let text: Vec<String> = reference.iter().map(|v| format!("{v:?}")).collect();
    std::fs::write(dir.join("reference.txt"), text.join("\n")).expect("writes the reference");
}

/// In-process time of the whole control analysis of the kinase cycle.
fn control(reps: usize) {
    let model = load_path(Path::new("models/kinase_cycle.mech"))
        .model
        .expect("models/kinase_cycle.mech loads");
    let mut times = Vec::new();
    let mut residual = 0.0f64;
    for _ in 0..reps {
        let start = Instant::now();
        let analysis = ratewright::control::control(&model).expect("a steady state");
        times.push(start.elapsed().as_secs_f64());
        residual = analysis
            .residuals
            .iter()
            .fold(0.0f64, |a, r| a.max(r.abs()));
    }
    println!("control_kinase_cycle_seconds {:.6e}", median(times));
    println!("control_theorem_residual {residual:.3e}");
}

/// A plain run against one with sensitivities to ten rate constants, on
/// the generated network (one compilation each, reused).
fn network_sensitivity(dir: &Path, reps: usize) {
    use ratewright::sim::forward::{SensitivityRunner, Wrt};
    let model = load_path(&dir.join("network.mech")).model.expect("loads");
    let prepared = Prepared::full(&model).expect("compiles");
    let wrt: Vec<Wrt> = (0..10)
        .map(|k| {
            Wrt::Constant(
                model
                    .lookup(&format!("kf{k}"))
                    .expect("the generator names kf0..kf9"),
            )
        })
        .collect();
    let start = Instant::now();
    let runner = SensitivityRunner::new(&prepared, &wrt).expect("compiles the partials");
    println!(
        "sensitivity_compile_seconds {:.6e}",
        start.elapsed().as_secs_f64()
    );
    let settings = Settings {
        rtol: 1e-6,
        atol: 1e-10,
        ..Settings::default()
    };
    let (mut plain, mut with) = (Vec::new(), Vec::new());
    let mut last = None;
    for _ in 0..reps {
        let start = Instant::now();
        prepared.simulate(&settings, &[10.0]).expect("solves");
        plain.push(start.elapsed().as_secs_f64());
        let start = Instant::now();
        last = Some(
            runner
                .run(&prepared.model, &settings, &[10.0])
                .expect("solves with sensitivities"),
        );
        with.push(start.elapsed().as_secs_f64());
    }
    let (plain, with) = (median(plain), median(with));
    println!("plain_run_seconds {plain:.6e}");
    println!("sensitivity_run_seconds {with:.6e}");
    println!("sensitivity_over_plain {:.3}", with / plain);
    let last = last.expect("at least one repetition");
    // d(X_i)/d(kf_k) for i, k < 10, row-major, for the SciPy comparison.
    let m = wrt.len();
    let text: Vec<String> = (0..10)
        .flat_map(|i| (0..m).map(move |k| (i, k)))
        .map(|(i, k)| format!("{:?}", last.sensitivities[0][i * m + k]))
        .collect();
    std::fs::write(dir.join("sensitivities.txt"), text.join("\n")).expect("writes");
}

/// Dense against sparse linear algebra on generated networks of growing size
/// (same generator, scaled: 3 steps per species), to place the threshold.
fn threshold(reps: usize) {
    for (kind, window) in [("random", None), ("local", Some(20))] {
        for n in [20usize, 40, 80, 120, 200, 300, 500] {
            let dir = std::env::temp_dir().join(format!("ratewright-threshold-{kind}-{n}"));
            generate(&dir, n, 3 * n, window);
            let model = load_path(&dir.join("network.mech")).model.expect("loads");
            let system = ratewright::numeric::CompiledSystem::full(&model).expect("compiles");
            let settings = Settings {
                rtol: 1e-6,
                atol: 1e-10,
                ..Settings::default()
            };
            let mut line = format!("threshold {kind} n={n}");
            for algebra in [LinearAlgebra::Dense, LinearAlgebra::Sparse] {
                let mut times = Vec::new();
                for _ in 0..reps {
                    let start = Instant::now();
                    simulate_with(&model, &system, &settings, &[10.0], algebra).expect("solves");
                    times.push(start.elapsed().as_secs_f64());
                }
                line.push_str(&format!(" {algebra:?}_ms={:.3}", median(times) * 1e3));
            }
            println!("{line}");
        }
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    match args.get(1).map(String::as_str) {
        Some("robertson") => robertson(args.get(2).and_then(|s| s.parse().ok()).unwrap_or(50)),
        Some("network") => generate_network(
            Path::new(
                args.get(2)
                    .map(String::as_str)
                    .unwrap_or("target/sim-bench"),
            ),
            None,
        ),
        Some("network-local") => generate_network(
            Path::new(
                args.get(2)
                    .map(String::as_str)
                    .unwrap_or("target/sim-bench-local"),
            ),
            Some(20),
        ),
        Some("threshold") => threshold(args.get(2).and_then(|s| s.parse().ok()).unwrap_or(5)),
        Some("network-run") => network_run(
            Path::new(
                args.get(2)
                    .map(String::as_str)
                    .unwrap_or("target/sim-bench"),
            ),
            args.get(3).and_then(|s| s.parse().ok()).unwrap_or(5),
        ),
        Some("control") => control(args.get(2).and_then(|s| s.parse().ok()).unwrap_or(200)),
        Some("network-sensitivity") => network_sensitivity(
            Path::new(
                args.get(2)
                    .map(String::as_str)
                    .unwrap_or("target/sim-bench"),
            ),
            args.get(3).and_then(|s| s.parse().ok()).unwrap_or(5),
        ),
        _ => eprintln!(
            "usage: sim_bench robertson N | network DIR | network-local DIR | network-run DIR N | network-sensitivity DIR N | control N | threshold N"
        ),
    }
}

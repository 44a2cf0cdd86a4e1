//! Stochastic-simulation benchmarks, in process, one core (run through
//! bench/run_sample_bench.sh):
//!
//!   sample_bench small EVENTS       the 4-step scheme of bench/sample_numpy.py
//!                                   (E + S <=> ES -> E + P, P -> Q, Q -> S) in
//!                                   1 pL, exact runs until about EVENTS
//!                                   reaction events; direct and next-reaction.
//!   sample_bench network FILE T [A] FILE (the generated 1,000-species network
//!                                   of `sim_bench network`) in 1 fL to time T,
//!                                   next-reaction and direct (or only A:
//!                                   NextReaction or Direct).
//!   sample_bench threshold          events per second of both exact methods on
//!                                   random networks of 4 to 256 reactions.
//!   sample_bench leap RUNS          exact against tau-leaping on the 20-species
//!                                   chain of tests/sample.rs at 100 times its
//!                                   counts: wall time for RUNS runs each.
//!
//! Each line of output is `key value` so the shell script can collect it.

use ratewright::model::{Model, load_path, load_str};
use ratewright::stochastic::ensemble::run_one_using;
use ratewright::stochastic::exact::Algorithm;
use ratewright::stochastic::{Method, Network, prepare};
use std::path::Path;
use std::time::Instant;

fn model_of(text: &str) -> Model {
    load_str(text, Path::new("bench.mech"))
        .model
        .expect("the benchmark model lowers")
}

fn network(model: &Model, litres: f64) -> Network {
    prepare(model, litres)
        .map_err(|e| format!("{e:?}"))
        .expect("the benchmark model converts")
        .0
}

/// Events per second of one run to `until` (best of three runs with
/// different seeds, so a stray interruption of the machine does not count).
fn events_per_second(
    net: &Network,
    algorithm: Algorithm,
    method: Method,
    until: f64,
) -> (f64, u64) {
    let mut best = 0.0f64;
    let mut events = 0;
    for seed in 1..=3 {
        let start = Instant::now();
        let (_, fired) =
            run_one_using(net, method, algorithm, &[until], seed, 1).expect("the run succeeds");
        let rate = fired as f64 / start.elapsed().as_secs_f64();
        if rate > best {
            best = rate;
            events = fired;
        }
    }
    (best, events)
}

/// The 4-step cycle: a few molecules of enzyme turning substrate over,
/// product relaxing back to substrate, so the run never runs dry.
const SMALL: &str = "units concentration uM, time s
species E = 0.01 uM, S = 1 uM, ES, P, Q
param kon = 10 /uM/s
param koff = 5 /s
param kcat = 20 /s
param k1 = 2 /s
param k2 = 2 /s
step bind E + S <=> ES with kon, koff
step cat ES -> E + P with kcat
step relax P -> Q with k1
step back Q -> S with k2
";

fn small(events: f64) {
    let net = network(&model_of(SMALL), 1e-12);
    // Measure the event rate per unit of model time with a short run, then
    // run long enough for about `events` events.
    let (_, fired) = run_one_using(&net, Method::Exact, Algorithm::Direct, &[1.0], 1, 1).unwrap();
    let until = events / fired.max(1) as f64;
    for algorithm in [Algorithm::Direct, Algorithm::NextReaction] {
        let (rate, fired) = events_per_second(&net, algorithm, Method::Exact, until);
        println!("small_{algorithm:?}_events {fired}");
        println!("small_{algorithm:?}_events_per_second {rate:.4e}");
    }
}

fn big(file: &Path, until: f64, only: Option<&str>) {
    let model = load_path(file).model.expect("the network loads");
    let net = network(&model, 1e-15);
    println!(
        "network_species {} reactions {}",
        net.species_count(),
        net.reactions.len()
    );
    for algorithm in [Algorithm::NextReaction, Algorithm::Direct] {
        if only.is_some_and(|o| o != format!("{algorithm:?}")) {
            continue;
        }
        let (rate, fired) = events_per_second(&net, algorithm, Method::Exact, until);
        println!("network_{algorithm:?}_events {fired}");
        println!("network_{algorithm:?}_events_per_second {rate:.4e}");
    }
}

/// A random closed network of `n` species and about `reactions` reactions
/// (isomerisations both ways and bindings with their dissociation), the
/// counts of a few hundred molecules each.
fn random_network(n: usize, reactions: usize) -> String {
    let mut state = 12345u64;
    let mut next = |m: usize| {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((state >> 33) as usize) % m
    };
    let mut s =
        String::from("units concentration uM, time s\nparam k = 1 /s\nparam kb = 1 /uM/s\n");
    for i in 0..n {
        s.push_str(&format!("species X{i} = 0.5 uM\n"));
    }
    let mut k = 0;
    while 2 * k < reactions {
        let a = next(n);
        let b = (a + 1 + next(n - 1)) % n;
        s.push_str(&format!("step r{k} X{a} <=> X{b} with k, k\n"));
        k += 1;
    }
    s
}

fn threshold() {
    for reactions in [4, 8, 16, 32, 64, 80, 96, 112, 128, 256] {
        let n = (reactions / 2).max(3);
        let net = network(&model_of(&random_network(n, reactions)), 1e-15);
        let (_, fired) =
            run_one_using(&net, Method::Exact, Algorithm::Direct, &[0.01], 1, 1).unwrap();
        let until = 0.01 * 3e6 / fired.max(1) as f64;
        let (direct, _) = events_per_second(&net, Algorithm::Direct, Method::Exact, until);
        let (next, _) = events_per_second(&net, Algorithm::NextReaction, Method::Exact, until);
        println!(
            "threshold reactions {} direct {direct:.4e} next_reaction {next:.4e}",
            net.reactions.len()
        );
    }
}

fn chain(n: usize, scale: f64) -> String {
    // The network of tests/sample.rs (source, chain, one binding), in uM
    // with counts `scale` times larger in 1 fL.
    let omega = 1e-6 * ratewright::stochastic::AVOGADRO * 1e-15;
    let mut s = format!(
        "units concentration uM, time s\nparam src = {:e} uM/s\nparam k = 4 /s\nparam k2 = {:e} /uM/s\n",
        200.0 * scale / omega,
        0.004 * omega / scale
    );
    for i in 1..=n {
        s.push_str(&format!("species X{i}\n"));
    }
    s.push_str("step feed 0 -> X1 with src\n");
    for i in 1..n {
        s.push_str(&format!("step s{i} X{i} -> X{} with k\n", i + 1));
    }
    s.push_str(&format!("step out X{n} -> 0 with k\n"));
    s.push_str("step pair X3 + X4 -> X5 with k2\n");
    s
}

fn leap(runs: u64) {
    let net = network(&model_of(&chain(20, 100.0)), 1e-15);
    let algorithm = Algorithm::for_network(&net);
    for method in [Method::Exact, Method::Leap] {
        let start = Instant::now();
        let mut fired = 0;
        let mut last = Vec::new();
        for run in 1..=runs {
            let (counts, f) = run_one_using(&net, method, algorithm, &[6.0], 1, run).unwrap();
            fired += f;
            last = counts;
        }
        let secs = start.elapsed().as_secs_f64();
        println!("leap20_{method:?}_seconds {secs:.4e}");
        println!("leap20_{method:?}_events {fired}");
        println!("leap20_{method:?}_X20_last_run {}", last[19]);
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    match args.get(1).map(String::as_str) {
        Some("small") => small(args.get(2).and_then(|v| v.parse().ok()).unwrap_or(2e7)),
        Some("network") => big(
            Path::new(args.get(2).expect("a network file")),
            args.get(3).and_then(|v| v.parse().ok()).unwrap_or(0.01),
            args.get(4).map(String::as_str),
        ),
        Some("threshold") => threshold(),
        Some("leap") => leap(args.get(2).and_then(|v| v.parse().ok()).unwrap_or(20)),
        _ => eprintln!(
            "usage: sample_bench small EVENTS | network FILE T [ALGORITHM] | threshold | leap RUNS"
        ),
    }
}

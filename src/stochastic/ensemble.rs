//! Ensembles: many independent runs, each with its own random stream, in
//! parallel on the current rayon pool; their counts at the output times,
//! statistics per species and time, and histograms.
//!
//! A run's stream is xoshiro256++ (Blackman & Vigna 2021, ACM TOMS 47:36)
//! seeded from SplitMix64 (Steele, Lea & Flood 2014) of the pair (seed,
//! run), so run r of seed s is the same sample path whichever thread runs
//! it and however many there are. Runs are numbered from 1.
//!
//! Event semantics follow `sim`: events at the same time apply in file
//! order; an output at an event's time reports the counts after it; an
//! event at t = 0 changes the start. After an event the totals are
//! recomputed from the counts (an addition changes the amount conserved)
//! and the constants that read them follow.

use super::StochasticError;
use super::convert::MAX_COUNT;
use super::exact::{Algorithm, Direct, NextReaction, Rng};
use super::leap::Leap;
use super::network::Network;
use crate::model::EventKind;
use rand::SeedableRng;
use rayon::prelude::*;

/// How runs are simulated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Every reaction event (direct or next-reaction method by size).
    Exact,
    /// Tau-leaping with exact steps where counts are low.
    Leap,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Settings {
    pub method: Method,
    /// Number of runs.
    pub runs: u64,
    pub seed: u64,
    /// Output times, non-negative and in increasing order.
    pub times: Vec<f64>,
}

/// A run's state: counts, time, and what the propensities read besides
/// counts (constants and totals, which change only at events).
#[derive(Debug, Clone)]
pub struct RunState {
    pub counts: Vec<i64>,
    pub t: f64,
    pub constants: Vec<f64>,
    pub totals: Vec<f64>,
    /// Reaction events so far.
    pub firings: u64,
    /// The run's number, for messages.
    pub run: u64,
}

/// The counts of every run at every output time.
#[derive(Debug, Clone, PartialEq)]
pub struct Ensemble {
    pub times: Vec<f64>,
    pub species: Vec<String>,
    pub runs: usize,
    /// `counts[(run * times + time) * species + species_index]`.
    pub counts: Vec<i64>,
    /// Reaction events over all runs.
    pub firings: u64,
    pub method: Method,
    /// The exact method used (alone, or for the leap's exact steps, which
    /// are always direct-method steps).
    pub algorithm: Algorithm,
}

impl Ensemble {
    /// The counts of every species in run `run` (0-based) at output `time`.
    pub fn row(&self, run: usize, time: usize) -> &[i64] {
        let n = self.species.len();
        let start = (run * self.times.len() + time) * n;
        &self.counts[start..start + n]
    }
}

/// SplitMix64's output function: a bijection of 64-bit words that spreads
/// neighbouring inputs apart.
fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The random stream of run `run` (numbered from 1) under `seed`.
pub fn run_rng(seed: u64, run: u64) -> Rng {
    Rng::seed_from_u64(splitmix64(splitmix64(seed) ^ run))
}

enum Stepper {
    Direct(Direct),
    Next(NextReaction),
    Leap(Leap),
}

impl Stepper {
    fn refresh(
        &mut self,
        net: &Network,
        st: &RunState,
        rng: &mut Rng,
    ) -> Result<(), StochasticError> {
        match self {
            Stepper::Direct(d) => d.refresh(net, st),
            Stepper::Next(n) => n.refresh(net, st, rng),
            // A leap recomputes every propensity at each step anyway.
            Stepper::Leap(_) => Ok(()),
        }
    }
    fn advance(
        &mut self,
        net: &Network,
        st: &mut RunState,
        until: f64,
        rng: &mut Rng,
    ) -> Result<(), StochasticError> {
        match self {
            Stepper::Direct(d) => d.advance(net, st, until, rng),
            Stepper::Next(n) => n.advance(net, st, until, rng),
            Stepper::Leap(l) => l.advance(net, st, until, rng),
        }
    }
}

fn apply_events(
    net: &Network,
    st: &mut RunState,
    next: &mut usize,
    up_to: f64,
) -> Result<bool, StochasticError> {
    let mut applied = false;
    while let Some(e) = net.events.get(*next).filter(|e| e.time <= up_to) {
        let n = &mut st.counts[e.species];
        *n = match e.kind {
            EventKind::Add => n.saturating_add(e.count),
            // A withdrawal cannot take more than there is.
            EventKind::Remove => (*n - e.count).max(0),
            EventKind::Set => e.count,
        };
        if !Network::holds(*n) {
            return Err(StochasticError::CountOutOfRange {
                what: format!(
                    "`{}` after the event at t = {} in run {}",
                    net.model.species[e.species].name, e.time, st.run
                ),
                count: *n as f64,
                span: None,
            });
        }
        *next += 1;
        applied = true;
    }
    if applied {
        st.totals = net.totals_of(&st.counts);
        if net.constants_read_totals {
            st.constants = net.constants(&st.totals)?;
        }
    }
    Ok(applied)
}

/// One run: its counts at every output time (time-major) and its number of
/// reaction events.
pub fn run_one(
    net: &Network,
    method: Method,
    times: &[f64],
    seed: u64,
    run: u64,
) -> Result<(Vec<i64>, u64), StochasticError> {
    run_one_using(net, method, Algorithm::for_network(net), times, seed, run)
}

/// [`run_one`] with the exact method given rather than chosen by size (for
/// the benchmark that measures where one overtakes the other).
pub fn run_one_using(
    net: &Network,
    method: Method,
    algorithm: Algorithm,
    times: &[f64],
    seed: u64,
    run: u64,
) -> Result<(Vec<i64>, u64), StochasticError> {
    let mut rng = run_rng(seed, run);
    let totals = net.start_totals();
    let mut st = RunState {
        counts: net.initial.clone(),
        t: 0.0,
        constants: net.constants(&totals)?,
        totals,
        firings: 0,
        run,
    };
    let mut stepper = match (method, algorithm) {
        (Method::Leap, _) => Stepper::Leap(Leap::new(net)),
        (Method::Exact, Algorithm::Direct) => Stepper::Direct(Direct::new(net)),
        (Method::Exact, Algorithm::NextReaction) => Stepper::Next(NextReaction::new(net)),
    };
    let mut next_event = 0;
    apply_events(net, &mut st, &mut next_event, 0.0)?;
    stepper.refresh(net, &st, &mut rng)?;
    let n = net.species_count();
    let mut out = vec![0; times.len() * n];
    for (k, &t_out) in times.iter().enumerate() {
        while let Some(te) = net
            .events
            .get(next_event)
            .map(|e| e.time)
            .filter(|&te| te <= t_out)
        {
            stepper.advance(net, &mut st, te, &mut rng)?;
            apply_events(net, &mut st, &mut next_event, te)?;
            stepper.refresh(net, &st, &mut rng)?;
        }
        stepper.advance(net, &mut st, t_out, &mut rng)?;
        if let Some(&big) = st.counts.iter().find(|&&c| c as f64 > MAX_COUNT) {
            return Err(StochasticError::CountOutOfRange {
                what: format!("a count at t = {t_out} in run {run}"),
                count: big as f64,
                span: None,
            });
        }
        out[k * n..(k + 1) * n].copy_from_slice(&st.counts);
    }
    Ok((out, st.firings))
}

/// Runs 1..=runs on the current rayon pool; `tick` is called as each run
/// ends. The first failed run (by number) is the error, whatever the order
/// the runs finished in.
pub fn sample(
    net: &Network,
    settings: &Settings,
    tick: &(dyn Fn() + Sync),
) -> Result<Ensemble, StochasticError> {
    let results: Vec<Result<(Vec<i64>, u64), StochasticError>> = (1..=settings.runs)
        .into_par_iter()
        .map(|run| {
            let r = run_one(net, settings.method, &settings.times, settings.seed, run);
            tick();
            r
        })
        .collect();
    let mut counts =
        Vec::with_capacity(settings.runs as usize * settings.times.len() * net.species_count());
    let mut firings = 0u64;
    for r in results {
        let (c, f) = r?;
        counts.extend_from_slice(&c);
        firings = firings.saturating_add(f);
    }
    Ok(Ensemble {
        times: settings.times.clone(),
        species: net.model.species.iter().map(|s| s.name.clone()).collect(),
        runs: settings.runs as usize,
        counts,
        firings,
        method: settings.method,
        // The leap's exact steps are direct-method steps on the
        // propensities it has just computed.
        algorithm: match settings.method {
            Method::Exact => Algorithm::for_network(net),
            Method::Leap => Algorithm::Direct,
        },
    })
}

/// Mean, standard deviation and the 5 % and 95 % quantiles of each species
/// at each output time: `mean[time][species]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Statistics {
    pub mean: Vec<Vec<f64>>,
    /// Sample standard deviation (divisor n − 1; 0 for a single run).
    pub sd: Vec<Vec<f64>>,
    pub q05: Vec<Vec<f64>>,
    pub q95: Vec<Vec<f64>>,
}

/// The p-quantile of sorted values by linear interpolation between order
/// statistics (Hyndman & Fan 1996, Am. Stat. 50:361, definition 7).
pub fn quantile(sorted: &[f64], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = (sorted.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Mean, sample sd, 5 % and 95 % quantiles of `values` (sorted in place).
fn summary(values: &mut [f64]) -> [f64; 4] {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
    values.sort_by(f64::total_cmp);
    let sd = if values.len() > 1 {
        (ss / (n - 1.0)).sqrt()
    } else {
        0.0
    };
    [mean, sd, quantile(values, 0.05), quantile(values, 0.95)]
}

impl Statistics {
    /// Statistics of `columns` values per time and quantity, each column of
    /// runs filled by `fill(time, quantity, runs)`.
    fn of(nt: usize, nq: usize, runs: usize, fill: impl Fn(usize, usize, &mut [f64])) -> Self {
        let mut s = Statistics {
            mean: vec![vec![0.0; nq]; nt],
            sd: vec![vec![0.0; nq]; nt],
            q05: vec![vec![0.0; nq]; nt],
            q95: vec![vec![0.0; nq]; nt],
        };
        let mut column = vec![0.0; runs];
        for t in 0..nt {
            for i in 0..nq {
                fill(t, i, &mut column);
                let [mean, sd, q05, q95] = summary(&mut column);
                s.mean[t][i] = mean;
                s.sd[t][i] = sd;
                s.q05[t][i] = q05;
                s.q95[t][i] = q95;
            }
        }
        s
    }
}

impl Ensemble {
    /// Statistics of the counts of each species.
    pub fn statistics(&self) -> Statistics {
        Statistics::of(
            self.times.len(),
            self.species.len(),
            self.runs,
            |t, i, col| {
                for (r, v) in col.iter_mut().enumerate() {
                    *v = self.row(r, t)[i] as f64;
                }
            },
        )
    }

    /// Statistics of each observable of the model, evaluated in every run
    /// at the concentrations `counts / Ω` (totals recomputed from the
    /// counts, as after an event), in the model's units.
    pub fn observable_statistics(&self, net: &Network) -> Statistics {
        let model = &net.model;
        Statistics::of(
            self.times.len(),
            model.observables.len(),
            self.runs,
            |t, o, col| {
                for (r, v) in col.iter_mut().enumerate() {
                    let counts = self.row(r, t);
                    let totals = net.totals_of(counts);
                    *v = net.value(crate::model::Sym::Observable(o), counts, &totals);
                }
            },
        )
    }
}

/// How many runs end with each count of species `i` at output `time`:
/// (count, runs), counts increasing.
pub fn histogram(ens: &Ensemble, time: usize, i: usize) -> Vec<(i64, u64)> {
    let mut values: Vec<i64> = (0..ens.runs).map(|r| ens.row(r, time)[i]).collect();
    values.sort_unstable();
    let mut out: Vec<(i64, u64)> = Vec::new();
    for v in values {
        match out.last_mut() {
            Some((c, n)) if *c == v => *n += 1,
            _ => out.push((v, 1)),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stochastic::exact::NEXT_REACTION_ABOVE;

    fn net(text: &str, litres: f64) -> Network {
        let model = crate::model::load_str(text, std::path::Path::new("t.mech"))
            .model
            .expect("the test model lowers");
        crate::stochastic::prepare(&model, litres)
            .expect("converts")
            .0
    }

    #[test]
    fn quantiles_interpolate_between_order_statistics() {
        // R's quantile(1:10, c(0.05, 0.95)), type 7: 1.45 and 9.55.
        let v: Vec<f64> = (1..=10).map(f64::from).collect();
        assert!((quantile(&v, 0.05) - 1.45).abs() < 1e-12);
        assert!((quantile(&v, 0.95) - 9.55).abs() < 1e-12);
        assert_eq!(quantile(&[3.0], 0.05), 3.0);
    }

    #[test]
    fn streams_differ_by_run_and_seed_and_repeat() {
        use rand::Rng as _;
        let mut a = run_rng(7, 1);
        let mut b = run_rng(7, 2);
        let mut c = run_rng(8, 1);
        let mut a2 = run_rng(7, 1);
        let x: u64 = a.random();
        assert_ne!(x, b.random::<u64>());
        assert_ne!(x, c.random::<u64>());
        assert_eq!(x, a2.random::<u64>());
    }

    /// Birth–death in a volume where Ω = 1 molecule per unit: stationary
    /// Poisson(λ/μ) (Gardiner, Handbook of Stochastic Methods, sec. 7.1):
    /// mean = variance = 20. Checked for both exact methods, the
    /// next-reaction one by padding the network with reactions that never
    /// fire (a species at 0 that only decays).
    #[test]
    fn both_exact_methods_give_the_birth_death_moments() {
        let litres = 1.0 / (1e-6 * crate::stochastic::AVOGADRO);
        let small = "species A\nparam l = 20 uM/s\nparam m = 1 /s\nstep b 0 -> A with l\nstep d A -> 0 with m\n";
        let mut padded = small.to_string();
        for k in 0..=NEXT_REACTION_ABOVE {
            padded.push_str(&format!("species Z{k}\nstep z{k} Z{k} -> 0 with m\n"));
        }
        for (text, algorithm) in [
            (small.to_string(), Algorithm::Direct),
            (padded, Algorithm::NextReaction),
        ] {
            let n = net(&text, litres);
            assert_eq!(Algorithm::for_network(&n), algorithm);
            let settings = Settings {
                method: Method::Exact,
                runs: 2000,
                seed: 11,
                times: vec![15.0],
            };
            let ens = sample(&n, &settings, &|| {}).unwrap();
            let s = ens.statistics();
            // Standard errors for 2000 draws of Poisson(20): the mean's is
            // sqrt(20/2000) = 0.1; the variance's is about
            // sqrt((μ4 − σ⁴)/n) = sqrt((20 + 3·400 − 400)/2000) = 0.64.
            let (mean, var) = (s.mean[0][0], s.sd[0][0].powi(2));
            assert!(
                (mean - 20.0).abs() < 4.0 * 0.1,
                "{algorithm:?}: mean {mean}"
            );
            assert!(
                (var - 20.0).abs() < 4.0 * 0.64,
                "{algorithm:?}: variance {var}"
            );
        }
    }

    #[test]
    fn events_change_counts_and_outputs_see_them() {
        // Nothing reacts (k = 0): the counts are exactly the events'.
        let litres = 1.0 / (1e-6 * crate::stochastic::AVOGADRO);
        let n = net(
            "species A = 5 uM\nparam k = 0 /s\nstep d A -> 0 with k\nadd 3 uM A at 1 s\nremove 20 uM A at 2 s\nset A = 7 uM at 3 s\n",
            litres,
        );
        let settings = Settings {
            method: Method::Exact,
            runs: 1,
            seed: 1,
            times: vec![0.0, 1.0, 1.5, 2.0, 3.0],
        };
        let ens = sample(&n, &settings, &|| {}).unwrap();
        let got: Vec<i64> = (0..5).map(|t| ens.row(0, t)[0]).collect();
        assert_eq!(got, vec![5, 8, 8, 0, 7]);
    }
}

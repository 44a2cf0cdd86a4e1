//! Tau-leaping: many reaction events per step, each reaction firing a
//! Poisson number of times over the leap, with the step size of Cao,
//! Gillespie & Petzold 2006 (J. Chem. Phys. 124:044109, "Efficient step
//! size selection for the tau-leaping simulation method"):
//!
//! 1. A reaction is *critical* when it can fire and fewer than
//!    [`CRITICAL_FIRINGS`] firings would exhaust one of its reactants.
//! 2. τ′ is the largest leap over which the expected change that the
//!    non-critical reactions make to every reactant species i (and its
//!    standard deviation) stays within max(ε x_i / g_i, 1), with g_i from
//!    the highest order of the reactions that consume i (their cases for
//!    orders 1 to 3, generalised to any order as
//!    `g = (m/ν) Σ_{k<ν} (1 + k/(x − k))` for a reaction of order m that
//!    takes ν molecules of i).
//! 3. If τ′ is below [`EXACT_BELOW`]/a0, a leap would be hardly longer than
//!    one exact step: [`EXACT_STEPS`] direct-method steps are taken instead.
//! 4. Otherwise the time to the next critical firing τ″ is drawn; the leap
//!    is min(τ′, τ″), with one critical firing if τ″ is the smaller.
//! 5. A leap that would take any count below zero is rejected and τ′
//!    halved: counts are never negative.

use super::ensemble::RunState;
use super::exact::{Rng, all_propensities, direct_steps};
use super::network::Network;
use super::{StochasticError, convert::MAX_COUNT};
use rand::Rng as _;
use rand_distr::{Distribution, Exp1, Poisson};

/// The error-control parameter ε (the value Cao et al. use throughout).
pub const EPSILON: f64 = 0.03;
/// n_c: a reaction this few firings from exhausting a reactant is critical.
pub const CRITICAL_FIRINGS: i64 = 10;
/// A leap shorter than this many mean exact steps is not worth taking.
pub const EXACT_BELOW: f64 = 10.0;
/// Exact steps taken instead of such a leap.
pub const EXACT_STEPS: u64 = 100;

pub struct Leap {
    a: Vec<f64>,
    critical: Vec<bool>,
    proposal: Vec<i64>,
    mu: Vec<f64>,
    sigma2: Vec<f64>,
    /// For each species, (order, multiplicity) of the reactions consuming it.
    consumers: Vec<Vec<(u32, u32)>>,
    /// Whether a species is a reactant of any reaction (I_rs of Cao et al.:
    /// the changes that non-critical reactions make to it are bounded even
    /// when only critical reactions consume it, since their propensities
    /// are held fixed over the leap).
    in_rs: Vec<bool>,
}

impl Leap {
    pub fn new(net: &Network) -> Leap {
        let n = net.species_count();
        let mut consumers: Vec<Vec<(u32, u32)>> = vec![Vec::new(); n];
        for r in &net.reactions {
            for &(i, nu) in &r.reactants {
                if !consumers[i].contains(&(r.order, nu)) {
                    consumers[i].push((r.order, nu));
                }
            }
        }
        Leap {
            a: vec![0.0; net.reactions.len()],
            critical: vec![false; net.reactions.len()],
            proposal: vec![0; n],
            mu: vec![0.0; n],
            sigma2: vec![0.0; n],
            in_rs: consumers.iter().map(|c| !c.is_empty()).collect(),
            consumers,
        }
    }

    /// g_i of Cao et al. at count x: the largest over the reactions that
    /// consume species i.
    fn g(&self, i: usize, x: i64) -> f64 {
        self.consumers[i]
            .iter()
            .map(|&(m, nu)| {
                let sum: f64 = (0..nu as i64)
                    .map(|k| 1.0 + k as f64 / ((x - k).max(1)) as f64)
                    .sum();
                f64::from(m) / f64::from(nu) * sum
            })
            .fold(1.0, f64::max)
    }

    /// τ′ for the non-critical reactions (infinite if none can fire).
    fn tau_noncritical(&mut self, net: &Network, counts: &[i64]) -> f64 {
        self.mu.iter_mut().for_each(|v| *v = 0.0);
        self.sigma2.iter_mut().for_each(|v| *v = 0.0);
        for j in 0..self.a.len() {
            let aj = self.a[j];
            if self.critical[j] || aj <= 0.0 {
                continue;
            }
            let (sp, d) = net.change_of(j);
            for (&i, &d) in sp.iter().zip(d) {
                let d = d as f64;
                self.mu[i as usize] += d * aj;
                self.sigma2[i as usize] += d * d * aj;
            }
        }
        let mut tau = f64::INFINITY;
        for (i, &x) in counts.iter().enumerate() {
            if !self.in_rs[i] {
                continue;
            }
            let bound = (EPSILON * x as f64 / self.g(i, x)).max(1.0);
            if self.mu[i] != 0.0 {
                tau = tau.min(bound / self.mu[i].abs());
            }
            if self.sigma2[i] > 0.0 {
                tau = tau.min(bound * bound / self.sigma2[i]);
            }
        }
        tau
    }

    /// Marks the critical reactions at `counts`.
    fn mark_critical(&mut self, net: &Network, counts: &[i64]) {
        for j in 0..self.a.len() {
            let (sp, d) = net.change_of(j);
            let firings_left = sp
                .iter()
                .zip(d)
                .filter(|(_, d)| **d < 0)
                .map(|(&i, &d)| counts[i as usize] / -d)
                .min();
            self.critical[j] =
                self.a[j] > 0.0 && firings_left.is_some_and(|l| l < CRITICAL_FIRINGS);
        }
    }

    pub fn advance(
        &mut self,
        net: &Network,
        st: &mut RunState,
        until: f64,
        rng: &mut Rng,
    ) -> Result<(), StochasticError> {
        while st.t < until {
            all_propensities(net, st, &mut self.a)?;
            let a0: f64 = self.a.iter().sum();
            if a0 <= 0.0 {
                st.t = until;
                return Ok(());
            }
            self.mark_critical(net, &st.counts);
            let mut tau1 = self.tau_noncritical(net, &st.counts);
            if tau1 < EXACT_BELOW / a0 {
                if direct_steps(net, st, &mut self.a, until, EXACT_STEPS, rng)? {
                    return Ok(());
                }
                continue;
            }
            loop {
                let a0c: f64 = (0..self.a.len())
                    .filter(|&j| self.critical[j])
                    .map(|j| self.a[j])
                    .sum();
                let tau2 = if a0c > 0.0 {
                    rng.sample::<f64, _>(Exp1) / a0c
                } else {
                    f64::INFINITY
                };
                let leap = tau1.min(until - st.t);
                let (tau, one_critical) = if tau2 < leap {
                    (tau2, true)
                } else {
                    (leap, false)
                };
                self.proposal.copy_from_slice(&st.counts);
                let mut fired: u64 = 0;
                for j in 0..self.a.len() {
                    let aj = self.a[j];
                    if self.critical[j] || aj <= 0.0 {
                        continue;
                    }
                    let lambda = aj * tau;
                    let k = Poisson::new(lambda)
                        .map(|p| p.sample(rng))
                        .unwrap_or(f64::INFINITY);
                    if k.is_nan() || k > MAX_COUNT {
                        return Err(StochasticError::CountOutOfRange {
                            what: format!(
                                "the firings of one reaction in a leap at t = {} in run {}",
                                st.t, st.run
                            ),
                            count: lambda,
                            span: Some(net.reactions[j].span),
                        });
                    }
                    let k = k as i64;
                    fired += k as u64;
                    let (sp, d) = net.change_of(j);
                    for (&i, &d) in sp.iter().zip(d) {
                        self.proposal[i as usize] += k * d;
                    }
                }
                if one_critical {
                    let r = rng.random::<f64>() * a0c;
                    let mut acc = 0.0;
                    let mut chosen = None;
                    for j in (0..self.a.len()).filter(|&j| self.critical[j]) {
                        acc += self.a[j];
                        chosen = Some(j);
                        if r < acc {
                            break;
                        }
                    }
                    if let Some(j) = chosen {
                        net.fire(j, &mut self.proposal);
                        fired += 1;
                    }
                }
                if self.proposal.iter().any(|&n| n < 0) {
                    // Halving the leap actually tried keeps τ′ finite even
                    // when it started infinite.
                    tau1 = tau1.min(leap) / 2.0;
                    continue;
                }
                st.counts.copy_from_slice(&self.proposal);
                st.firings += fired;
                st.t = if tau == until - st.t {
                    until
                } else {
                    st.t + tau
                };
                break;
            }
        }
        Ok(())
    }
}

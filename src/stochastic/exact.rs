//! Exact stochastic runs: every reaction event is simulated.
//!
//! - Gillespie's direct method (Gillespie 1977, J. Phys. Chem. 81:2340):
//!   the waiting time is exponential with rate a0 = Σ a_j and the reaction
//!   is chosen with probability a_j / a0; after a firing only the
//!   propensities in the dependency graph are recomputed. Its cost per
//!   event grows with the number of reactions (the sum and the search).
//! - The next-reaction method (Gibson & Bruck 2000, J. Phys. Chem. A
//!   104:1876): every reaction has an absolute putative time in an indexed
//!   priority queue; after a firing the fired reaction draws a new time and
//!   each dependent one rescales its time by a_old / a_new, so the cost per
//!   event grows with the logarithm of the number of reactions.
//!
//! Which one runs depends only on the network's size (above
//! [`NEXT_REACTION_ABOVE`] reactions the next-reaction method; measured, see
//! docs/benchmarks.md), so a command gives the same numbers every time.

use super::network::Network;
use super::{StochasticError, ensemble::RunState};
use rand::Rng as _;
use rand_distr::Exp1;

/// The random generator of a run.
pub type Rng = rand_xoshiro::Xoshiro256PlusPlus;

/// Above this many reactions the next-reaction method is used. Measured
/// with `sample_bench threshold` (docs/benchmarks.md): on random networks
/// of isomerisations the direct method is faster up to 80 reactions, the
/// two are level at 96, and the next-reaction method is faster from 112 on
/// (2.3 times at 256).
pub const NEXT_REACTION_ABOVE: usize = 80;

/// The exact method chosen for a network.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Algorithm {
    Direct,
    NextReaction,
}

impl Algorithm {
    pub fn for_network(net: &Network) -> Algorithm {
        if net.reactions.len() > NEXT_REACTION_ABOVE {
            Algorithm::NextReaction
        } else {
            Algorithm::Direct
        }
    }
    pub fn name(self) -> &'static str {
        match self {
            Algorithm::Direct => "direct method",
            Algorithm::NextReaction => "next-reaction method",
        }
    }
}

/// A propensity, refused when it is negative or not a number (only a law
/// can be).
#[inline(always)]
pub fn checked(net: &Network, j: usize, st: &RunState) -> Result<f64, StochasticError> {
    let a = net.propensity(j, &st.counts, &st.constants, &st.totals);
    if a >= 0.0 && a.is_finite() {
        Ok(a)
    } else {
        Err(net.negative_law(j, a, st.t, st.run, &st.counts))
    }
}

/// Every propensity at the current state.
pub fn all_propensities(
    net: &Network,
    st: &RunState,
    a: &mut [f64],
) -> Result<(), StochasticError> {
    for (j, slot) in a.iter_mut().enumerate() {
        *slot = checked(net, j, st)?;
    }
    Ok(())
}

/// The index `j` with `Σ_{k<j} a_k ≤ r < Σ_{k≤j} a_k`; rounding in the
/// sum can leave `r` past the end, and then the last reaction that can fire
/// is taken.
#[inline]
fn select(a: &[f64], r: f64) -> usize {
    let mut acc = 0.0;
    let mut last = 0;
    for (j, &aj) in a.iter().enumerate() {
        if aj > 0.0 {
            acc += aj;
            last = j;
            if r < acc {
                return j;
            }
        }
    }
    last
}

/// Direct-method steps from `st.t`, at most `max_steps`, stopping at
/// `until`; `a` holds the propensities at the current state and is kept up
/// to date. Returns whether `until` was reached.
pub fn direct_steps(
    net: &Network,
    st: &mut RunState,
    a: &mut [f64],
    until: f64,
    max_steps: u64,
    rng: &mut Rng,
) -> Result<bool, StochasticError> {
    for _ in 0..max_steps {
        let a0: f64 = a.iter().sum();
        if a0 <= 0.0 {
            st.t = until;
            return Ok(true);
        }
        if !a0.is_finite() {
            return Err(StochasticError::CountOutOfRange {
                what: format!("the total propensity at t = {} in run {}", st.t, st.run),
                count: a0,
                span: None,
            });
        }
        let tau: f64 = rng.sample::<f64, _>(Exp1) / a0;
        if st.t + tau > until {
            // The waiting time is memoryless: the part beyond `until` is
            // drawn afresh from there.
            st.t = until;
            return Ok(true);
        }
        st.t += tau;
        let j = select(a, rng.random::<f64>() * a0);
        net.fire(j, &mut st.counts);
        st.firings += 1;
        for &k in net.dependents(j) {
            a[k as usize] = checked(net, k as usize, st)?;
        }
    }
    Ok(false)
}

/// The direct method's state between calls: the propensities.
pub struct Direct {
    a: Vec<f64>,
}

impl Direct {
    pub fn new(net: &Network) -> Direct {
        Direct {
            a: vec![0.0; net.reactions.len()],
        }
    }
    pub fn refresh(&mut self, net: &Network, st: &RunState) -> Result<(), StochasticError> {
        all_propensities(net, st, &mut self.a)
    }
    pub fn advance(
        &mut self,
        net: &Network,
        st: &mut RunState,
        until: f64,
        rng: &mut Rng,
    ) -> Result<(), StochasticError> {
        direct_steps(net, st, &mut self.a, until, u64::MAX, rng).map(|_| ())
    }
}

/// A binary heap of reaction indices keyed by putative time, with each
/// reaction's position kept so that its key can change in O(log n). Keys
/// sit beside their reaction in the heap array, so a comparison reads one
/// place in memory rather than following an index.
struct IndexedQueue {
    heap: Vec<(f64, u32)>,
    pos: Vec<u32>,
}

impl IndexedQueue {
    fn new(n: usize) -> IndexedQueue {
        IndexedQueue {
            heap: (0..n as u32).map(|j| (f64::INFINITY, j)).collect(),
            pos: (0..n as u32).collect(),
        }
    }

    /// The key of reaction `j`.
    #[inline]
    fn key(&self, j: usize) -> f64 {
        self.heap[self.pos[j] as usize].0
    }

    /// Sets every key (indexed by reaction) and restores the heap order.
    fn rebuild(&mut self, keys: impl Iterator<Item = f64>) {
        for (j, k) in keys.enumerate() {
            self.heap[j] = (k, j as u32);
            self.pos[j] = j as u32;
        }
        for i in (0..self.heap.len() / 2).rev() {
            self.down(i);
        }
    }

    #[inline]
    fn top(&self) -> Option<(usize, f64)> {
        self.heap.first().map(|&(k, j)| (j as usize, k))
    }

    #[inline]
    fn update(&mut self, j: usize, key: f64) {
        let i = self.pos[j] as usize;
        let old = self.heap[i].0;
        self.heap[i].0 = key;
        if key < old {
            self.up(i);
        } else {
            self.down(i);
        }
    }

    fn up(&mut self, mut i: usize) {
        let item = self.heap[i];
        while i > 0 {
            let parent = (i - 1) / 2;
            if item.0 < self.heap[parent].0 {
                self.heap[i] = self.heap[parent];
                self.pos[self.heap[i].1 as usize] = i as u32;
                i = parent;
            } else {
                break;
            }
        }
        self.heap[i] = item;
        self.pos[item.1 as usize] = i as u32;
    }

    fn down(&mut self, mut i: usize) {
        let n = self.heap.len();
        let item = self.heap[i];
        loop {
            let l = 2 * i + 1;
            if l >= n {
                break;
            }
            let r = l + 1;
            let c = if r < n && self.heap[r].0 < self.heap[l].0 {
                r
            } else {
                l
            };
            if self.heap[c].0 < item.0 {
                self.heap[i] = self.heap[c];
                self.pos[self.heap[i].1 as usize] = i as u32;
                i = c;
            } else {
                break;
            }
        }
        self.heap[i] = item;
        self.pos[item.1 as usize] = i as u32;
    }
}

/// The next-reaction method's state between calls.
pub struct NextReaction {
    a: Vec<f64>,
    queue: IndexedQueue,
}

impl NextReaction {
    pub fn new(net: &Network) -> NextReaction {
        NextReaction {
            a: vec![0.0; net.reactions.len()],
            queue: IndexedQueue::new(net.reactions.len()),
        }
    }

    /// New propensities and putative times for all reactions (at the start
    /// and after an event changed counts from outside).
    pub fn refresh(
        &mut self,
        net: &Network,
        st: &RunState,
        rng: &mut Rng,
    ) -> Result<(), StochasticError> {
        all_propensities(net, st, &mut self.a)?;
        let t = st.t;
        let keys: Vec<f64> = self
            .a
            .iter()
            .map(|&aj| {
                if aj > 0.0 {
                    t + rng.sample::<f64, _>(Exp1) / aj
                } else {
                    f64::INFINITY
                }
            })
            .collect();
        self.queue.rebuild(keys.into_iter());
        Ok(())
    }

    pub fn advance(
        &mut self,
        net: &Network,
        st: &mut RunState,
        until: f64,
        rng: &mut Rng,
    ) -> Result<(), StochasticError> {
        loop {
            let Some((j, tj)) = self.queue.top() else {
                st.t = until;
                return Ok(());
            };
            // Putative times are absolute, so those beyond `until` stay valid.
            if tj > until {
                st.t = until;
                return Ok(());
            }
            st.t = tj;
            net.fire(j, &mut st.counts);
            st.firings += 1;
            for &k in net.dependents(j) {
                let k = k as usize;
                if k == j {
                    continue;
                }
                let old = self.a[k];
                let new = checked(net, k, st)?;
                self.a[k] = new;
                let tk = self.queue.key(k);
                let key = if new <= 0.0 {
                    f64::INFINITY
                } else if old > 0.0 && tk.is_finite() {
                    st.t + (old / new) * (tk - st.t)
                } else {
                    st.t + rng.sample::<f64, _>(Exp1) / new
                };
                self.queue.update(k, key);
            }
            let new = checked(net, j, st)?;
            self.a[j] = new;
            let key = if new > 0.0 {
                st.t + rng.sample::<f64, _>(Exp1) / new
            } else {
                f64::INFINITY
            };
            self.queue.update(j, key);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_queue_keeps_the_earliest_time_on_top() {
        let mut q = IndexedQueue::new(6);
        q.rebuild([5.0, 3.0, 9.0, 1.0, 7.0, 4.0].into_iter());
        assert_eq!(q.top(), Some((3, 1.0)));
        q.update(3, 8.0);
        assert_eq!(q.top(), Some((1, 3.0)));
        q.update(2, 0.5);
        assert_eq!(q.top(), Some((2, 0.5)));
        q.update(2, f64::INFINITY);
        q.update(1, f64::INFINITY);
        assert_eq!(q.top(), Some((5, 4.0)));
        for (i, &(_, j)) in q.heap.iter().enumerate() {
            assert_eq!(q.pos[j as usize] as usize, i);
        }
        assert_eq!(q.key(0), 5.0);
        for i in 1..q.heap.len() {
            assert!(q.heap[(i - 1) / 2].0 <= q.heap[i].0);
        }
    }

    #[test]
    fn selection_follows_the_cumulative_sums() {
        let a = [0.0, 1.0, 0.0, 2.0];
        assert_eq!(select(&a, 0.0), 1);
        assert_eq!(select(&a, 0.999), 1);
        assert_eq!(select(&a, 1.0), 3);
        assert_eq!(select(&a, 3.5), 3);
    }
}

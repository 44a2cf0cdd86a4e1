//! Rival mechanisms fitted to the same data: ranking by AICc with Akaike
//! weights (Burnham & Anderson 2002) and the extra-sum-of-squares F test
//! (common practice).

use super::{Fit, stats};

/// One fitted model of a comparison.
pub struct Ranked {
    pub index: usize,
    pub delta_aicc: f64,
    /// Akaike weight, exp(−Δ/2) normalized (Burnham & Anderson 2002).
    pub weight: f64,
}

/// Models ranked by AICc, best first.
pub fn rank(fits: &[Fit]) -> Vec<Ranked> {
    let best = fits.iter().map(|f| f.aicc).fold(f64::INFINITY, f64::min);
    let total: f64 = fits.iter().map(|f| (-(f.aicc - best) / 2.0).exp()).sum();
    let mut out: Vec<Ranked> = fits
        .iter()
        .enumerate()
        .map(|(index, f)| Ranked {
            index,
            delta_aicc: f.aicc - best,
            weight: (-(f.aicc - best) / 2.0).exp() / total,
        })
        .collect();
    out.sort_by(|a, b| a.delta_aicc.total_cmp(&b.delta_aicc));
    out
}

/// The extra-sum-of-squares F test of a model with fewer params (`small`)
/// against one with more (`large`), on the same points: (F, p-value).
pub fn f_test(small: &Fit, large: &Fit) -> Option<(f64, f64)> {
    let (p1, p2) = (small.params.len(), large.params.len());
    if small.n != large.n || p1 >= p2 || large.dof == 0 {
        return None;
    }
    let f = ((small.ssr - large.ssr) / (p2 - p1) as f64) / (large.ssr / large.dof as f64);
    Some((f, stats::f_p_value(f, p2 - p1, large.dof)))
}

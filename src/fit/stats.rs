//! Statistics of a least-squares fit (common practice; Bates & Watts
//! 1988, "Nonlinear Regression Analysis and Its Applications"; Burnham &
//! Anderson 2002 for the information criteria).
//!
//! - σ² = SSR / (n − p); covariance σ² (JᵀJ)⁻¹ from the SVD of J (singular
//!   values below 1e-12 of the largest are dropped and reported);
//! - asymptotic 95% intervals θ ± t(0.975, n − p) · se;
//! - AIC = n ln(SSR/n) + 2K, AICc = AIC + 2K(K + 1)/(n − K − 1),
//!   BIC = n ln(SSR/n) + K ln n, with K = p + 1 (σ is estimated too);
//! - the extra-sum-of-squares F test of nested models,
//!   F = ((SSR₁ − SSR₂)/(p₂ − p₁)) / (SSR₂/(n − p₂)).

use nalgebra::DMatrix;
use statrs::distribution::{ContinuousCDF, FisherSnedecor, StudentsT};

pub struct Summary {
    pub n: usize,
    pub dof: usize,
    pub sigma: f64,
    pub stderr: Vec<f64>,
    pub ci95: Vec<(f64, f64)>,
    pub correlation: Vec<Vec<f64>>,
    pub aic: f64,
    pub aicc: f64,
    pub bic: f64,
    /// Right singular vectors of near-zero singular values: the
    /// combinations of params the data do not determine.
    pub undetermined: Vec<Vec<f64>>,
}

/// The t quantile for a two-sided 95% interval with `dof` degrees of
/// freedom.
pub fn t_quantile_95(dof: usize) -> f64 {
    StudentsT::new(0.0, 1.0, dof.max(1) as f64)
        .map(|t| t.inverse_cdf(0.975))
        .unwrap_or(f64::NAN)
}

/// The 95% quantile of F(d1, d2).
pub fn f_quantile_95(d1: usize, d2: usize) -> f64 {
    FisherSnedecor::new(d1.max(1) as f64, d2.max(1) as f64)
        .map(|f| f.inverse_cdf(0.95))
        .unwrap_or(f64::NAN)
}

/// The upper tail probability of F(d1, d2) at `f`.
pub fn f_p_value(f: f64, d1: usize, d2: usize) -> f64 {
    FisherSnedecor::new(d1.max(1) as f64, d2.max(1) as f64)
        .map(|dist| 1.0 - dist.cdf(f))
        .unwrap_or(f64::NAN)
}

/// Statistics at an optimum: `values` the params, `jacobian` (row-major
/// `n × p`) the derivatives of the weighted residuals with respect to the
/// params themselves (not their logarithms).
pub fn summarize(values: &[f64], jacobian: &[f64], ssr: f64, n: usize) -> Summary {
    let p = values.len();
    let dof = n.saturating_sub(p);
    let sigma = if dof > 0 {
        (ssr / dof as f64).sqrt()
    } else {
        f64::NAN
    };
    let j = DMatrix::from_row_slice(n, p, jacobian);
    let svd = j.svd(false, true);
    let largest = svd.singular_values.iter().cloned().fold(0.0, f64::max);
    let v_t = svd.v_t.clone().unwrap_or_else(|| DMatrix::zeros(p, p));
    let mut covariance = DMatrix::zeros(p, p);
    let mut undetermined = Vec::new();
    for (k, s) in svd.singular_values.iter().enumerate() {
        let row: Vec<f64> = (0..p).map(|c| v_t[(k, c)]).collect();
        if *s <= 1e-12 * largest || *s == 0.0 {
            undetermined.push(row);
            continue;
        }
        for a in 0..p {
            for b in 0..p {
                covariance[(a, b)] += row[a] * row[b] / (s * s);
            }
        }
    }
    covariance *= sigma * sigma;
    let stderr: Vec<f64> = (0..p)
        .map(|a| {
            if undetermined.is_empty() {
                covariance[(a, a)].sqrt()
            } else {
                f64::NAN
            }
        })
        .collect();
    let t = t_quantile_95(dof);
    let ci95 = values
        .iter()
        .zip(&stderr)
        .map(|(v, se)| (v - t * se, v + t * se))
        .collect();
    let correlation = (0..p)
        .map(|a| {
            (0..p)
                .map(|b| covariance[(a, b)] / (stderr[a] * stderr[b]))
                .collect()
        })
        .collect();
    let k = (p + 1) as f64;
    let nf = n as f64;
    let log_term = nf * (ssr / nf).ln();
    let aic = log_term + 2.0 * k;
    let aicc = if nf - k - 1.0 > 0.0 {
        aic + 2.0 * k * (k + 1.0) / (nf - k - 1.0)
    } else {
        f64::INFINITY
    };
    let bic = log_term + k * nf.ln();
    Summary {
        n,
        dof,
        sigma,
        stderr,
        ci95,
        correlation,
        aic,
        aicc,
        bic,
        undetermined,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Student's t and F quantiles against printed tables (e.g. Abramowitz
    /// & Stegun 1964, tables 26.10 and 26.9; from memory).
    #[test]
    fn quantiles_match_the_tables() {
        assert!((t_quantile_95(10) - 2.228).abs() < 1e-3);
        assert!((t_quantile_95(1) - 12.706).abs() < 1e-3);
        assert!((f_quantile_95(1, 10) - 4.96).abs() < 1e-2);
        assert!((f_quantile_95(2, 20) - 3.49).abs() < 1e-2);
    }

    /// The line y = b x through (0,0), (1,1), (2,3): b = Σxy/Σx² = 7/5 with
    /// se = sqrt(σ²/Σx²), σ² = SSR/(n − 1) (common practice).
    #[test]
    fn standard_error_of_a_slope() {
        // Residuals of y = b x at b = 7/5: (0, 1 - 7/5, 3 - 14/5).
        let b: f64 = 7.0 / 5.0;
        let ssr = (1.0 - b).powi(2) + (3.0 - 2.0 * b).powi(2);
        let s = summarize(&[b], &[0.0, 1.0, 2.0], ssr, 3);
        assert!((s.stderr[0] - (ssr / 2.0 / 5.0).sqrt()).abs() < 1e-12);
        assert_eq!(s.dof, 2);
    }
}

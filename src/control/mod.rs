//! Metabolic control analysis at the steady state.
//!
//! Why: a modeller asks how control of a pathway's flux and of its
//! concentrations is shared among its steps. At the steady state of
//! `steady`, this stage gives the elasticities of each step's rate, the
//! flux and concentration control coefficients by the matrix method on the
//! reduced system (Reder 1988, "Metabolic control theory: a structural
//! approach", J. Theor. Biol. 135:175), the response coefficients to params,
//! and the residuals of the summation and connectivity theorems (Kacser &
//! Burns 1973; Heinrich & Rapoport 1974).
//!
//! With N = L N_R (N_R the rows of the independent species, L the link
//! matrix) and ε = ∂v/∂S (steps × species), unscaled
//! C^S = −L (N_R ε L)⁻¹ N_R and C^J = I + ε C^S. Scaled coefficients
//! multiply by v_k / J_j and v_k / S_i. The theorems in matrix form:
//! C^J K = K and C^S K = 0 for K the kernel of N (summation), C^J ε L = 0
//! and C^S ε L = −L (connectivity).
//!
//! Invariants: derivatives are symbolic (the rates' expressions with
//! derived params and observables inlined), evaluated at the steady state;
//! a scaled coefficient whose flux or concentration is zero is NaN (not
//! defined), never a division by zero; nothing here prints.

use crate::algebra::calculus::derivative;
use crate::diagnostics::{Code, Diagnostic};
use crate::fit::rates::inline;
use crate::model::{Expr, Model, Sym, coef_f64};
use crate::sim::steady::{Stability, steady_state};
use crate::sim::{Prepared, Settings};
use nalgebra::DMatrix;

pub struct ControlAnalysis {
    pub species: Vec<String>,
    pub steps: Vec<String>,
    /// Params some rate depends on.
    pub params: Vec<String>,
    pub state: Vec<f64>,
    pub fluxes: Vec<f64>,
    pub stability: Stability,
    /// Scaled, steps × species: ∂ln v_k / ∂ln S_i.
    pub elasticities: Vec<Vec<f64>>,
    /// Scaled, steps × params: ∂ln v_k / ∂ln p.
    pub param_elasticities: Vec<Vec<f64>>,
    /// Scaled, flux j × step k.
    pub flux_control: Vec<Vec<f64>>,
    /// Scaled, species i × step k.
    pub concentration_control: Vec<Vec<f64>>,
    /// Scaled response of each flux to each param: Σ_k C^J_jk ε^k_p.
    pub flux_response: Vec<Vec<f64>>,
    /// Scaled response of each species to each param.
    pub concentration_response: Vec<Vec<f64>>,
    /// Largest residual of each theorem (unscaled matrix forms): flux
    /// summation, concentration summation, flux connectivity,
    /// concentration connectivity.
    pub residuals: [f64; 4],
}

fn failure(message: String) -> Diagnostic {
    Diagnostic::error(Code::NoSteadyState, message)
}

/// The control analysis at the steady state reached from the model's
/// initial state.
pub fn control(model: &Model) -> Result<ControlAnalysis, Diagnostic> {
    let prepared = Prepared::reduced(model)?;
    let result = steady_state(&prepared, &Settings::default())
        .map_err(|e| Diagnostic::error(e.code(), e.to_string()))?;
    let reduced = crate::network::reduce(model)?;
    let m = &reduced.model;
    let (n, steps) = (m.species.len(), m.steps.len());
    if steps == 0 {
        return Err(failure(
            "the model has no steps, so nothing controls anything".into(),
        ));
    }
    let state: Vec<f64> = result.values[..n].to_vec();
    let value = |s: Sym| match s {
        Sym::Species(i) => state[i],
        other => m.initial_value(other),
    };
    let rates: Vec<Expr> = (0..steps).map(|k| inline(m, &m.step_rate(k))).collect();
    let fluxes: Vec<f64> = rates.iter().map(|r| r.eval(&value, 0.0)).collect();
    let mut params: Vec<usize> = (0..m.params.len())
        .filter(|&p| {
            rates
                .iter()
                .any(|r| crate::algebra::calculus::mentions(r, Sym::Param(p)))
        })
        .collect();
    params.sort_unstable();
    let eps = DMatrix::from_fn(steps, n, |k, i| {
        derivative(&rates[k], Sym::Species(i)).eval(&value, 0.0)
    });
    let eps_p = DMatrix::from_fn(steps, params.len(), |k, q| {
        derivative(&rates[k], Sym::Param(params[q])).eval(&value, 0.0)
    });
    // Stoichiometry and the link matrix.
    let stoich: Vec<Vec<f64>> = m
        .stoichiometry()
        .iter()
        .map(|row| row.iter().map(|c| coef_f64(*c)).collect())
        .collect();
    let full = DMatrix::from_fn(n, steps, |i, k| stoich[i][k]);
    let independent = &reduced.independent;
    let n_r = DMatrix::from_fn(independent.len(), steps, |a, k| stoich[independent[a]][k]);
    // L: each species' row of N as a combination of the independent rows.
    let svd = n_r.transpose().svd(true, true);
    let mut link = DMatrix::zeros(n, independent.len());
    for i in 0..n {
        let row = full.row(i).transpose();
        let x = svd
            .solve(&row, 1e-12)
            .map_err(|e| failure(format!("the link matrix cannot be formed: {e}")))?;
        for a in 0..independent.len() {
            link[(i, a)] = x[a];
        }
    }
    let jacobian = &n_r * &eps * &link;
    let Some(inverse) = jacobian.clone().try_inverse() else {
        return Err(failure(
            "the reduced Jacobian is singular at the steady state, so the control coefficients are not defined".into(),
        ));
    };
    let cs = -(&link * inverse * &n_r);
    let cj = DMatrix::identity(steps, steps) + &eps * &cs;
    // Theorems.
    // The kernel of N: eigenvectors of NᵀN with eigenvalue zero (a thin
    // SVD would not give them when there are more steps than species).
    let kernel = {
        let eigen = (full.transpose() * &full).symmetric_eigen();
        let largest = eigen.eigenvalues.iter().cloned().fold(0.0, f64::max);
        let columns: Vec<_> = (0..steps)
            .filter(|&r| eigen.eigenvalues[r].abs() <= 1e-12 * largest.max(1.0))
            .map(|r| eigen.eigenvectors.column(r).into_owned())
            .collect();
        if columns.is_empty() {
            DMatrix::zeros(steps, 0)
        } else {
            DMatrix::from_columns(&columns)
        }
    };
    let max_abs = |x: DMatrix<f64>| x.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let scale = |x: &DMatrix<f64>| x.iter().fold(1.0f64, |a, v| a.max(v.abs()));
    let residuals = [
        max_abs(&cj * &kernel - &kernel) / scale(&cj),
        max_abs(&cs * &kernel) / scale(&cs).max(1.0),
        max_abs(&cj * &eps * &link) / (scale(&cj) * scale(&eps)),
        max_abs(&cs * &eps * &link + &link) / (scale(&cs) * scale(&eps)).max(1.0),
    ];
    let ratio = |a: f64, b: f64| if b != 0.0 { a / b } else { f64::NAN };
    let elasticities = (0..steps)
        .map(|k| {
            (0..n)
                .map(|i| ratio(eps[(k, i)] * state[i], fluxes[k]))
                .collect()
        })
        .collect();
    let param_values: Vec<f64> = params.iter().map(|&p| m.params[p].value).collect();
    let param_elasticities: Vec<Vec<f64>> = (0..steps)
        .map(|k| {
            (0..params.len())
                .map(|q| ratio(eps_p[(k, q)] * param_values[q], fluxes[k]))
                .collect()
        })
        .collect();
    let flux_control = (0..steps)
        .map(|j| {
            (0..steps)
                .map(|k| ratio(cj[(j, k)] * fluxes[k], fluxes[j]))
                .collect()
        })
        .collect();
    let concentration_control = (0..n)
        .map(|i| {
            (0..steps)
                .map(|k| ratio(cs[(i, k)] * fluxes[k], state[i]))
                .collect()
        })
        .collect();
    // Responses (unscaled R = C · ∂v/∂p), then scaled by p / J or p / S.
    let rj = &cj * &eps_p;
    let rs = &cs * &eps_p;
    let flux_response = (0..steps)
        .map(|j| {
            (0..params.len())
                .map(|q| ratio(rj[(j, q)] * param_values[q], fluxes[j]))
                .collect()
        })
        .collect();
    let concentration_response = (0..n)
        .map(|i| {
            (0..params.len())
                .map(|q| ratio(rs[(i, q)] * param_values[q], state[i]))
                .collect()
        })
        .collect();
    Ok(ControlAnalysis {
        species: m.species.iter().map(|s| s.name.clone()).collect(),
        steps: m.steps.iter().map(|s| s.name.clone()).collect(),
        params: params.iter().map(|&p| m.params[p].name.clone()).collect(),
        state,
        fluxes,
        stability: result.stability,
        elasticities,
        param_elasticities,
        flux_control,
        concentration_control,
        flux_response,
        concentration_response,
        residuals,
    })
}

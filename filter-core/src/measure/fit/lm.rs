//! Levenberg–Marquardt on the normal equations (\[2\], \[3\] §15.5) and the covariance of the
//! result (\[3\] §15.6), with a sandwich form for deliberately down-weighted points.

use super::model::{Data, Model, Params, NPMAX};
use super::noise::{expected_ln_power, weights, Noise};
use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};
use std::f64::consts::LN_10;

/// One weighted least-squares problem: the data, the model, which θ are free, and the
/// weights (0 masks a point).
pub(super) struct Problem<'a> {
    pub data: &'a Data,
    pub model: &'a Model,
    /// Free θ indices.
    pub idx: Vec<usize>,
    pub wt: Vec<f64>,
    pub kappa: Vec<f64>,
    pub pn: f64,
}

/// Sums over the residuals at one parameter point (matrices over the free θ, in `idx` order).
struct Sums {
    /// Σr² (weighted).
    cost: f64,
    /// JᵀJ.
    a: DMatrix<f64>,
    /// Jᵀr.
    g: DVector<f64>,
    /// Σκ·JᵀJ (the middle of the sandwich covariance).
    b: DMatrix<f64>,
    /// Σr²/κ over points with κ > 0 (χ² under the estimated noise).
    chi2: f64,
    /// Residuals used.
    count: usize,
}

/// The solution of one problem.
pub(super) struct LmOut {
    pub params: Params,
    /// Number of residuals used (complex points count twice).
    pub residuals: usize,
    /// Free θ indices (order of `cov_unscaled`).
    pub idx: Vec<usize>,
    /// Covariance of the free θ before the noise scale: (JᵀJ)⁻¹·(ΣκJᵀJ)·(JᵀJ)⁻¹.
    pub cov_unscaled: DMatrix<f64>,
    /// χ² under the estimated noise (residuals divided by √κ).
    pub chi2: f64,
    pub converged: bool,
    pub iterations: usize,
}

impl LmOut {
    /// Covariance of θ slots `k` and `l` (zero when either is held), scaled by
    /// s² = χ²/(n − p).
    pub fn cov(&self, k: usize, l: usize) -> f64 {
        let dof = self.residuals.saturating_sub(self.idx.len()).max(1);
        let s2 = self.chi2 / dof as f64;
        let pos = |k: usize| self.idx.iter().position(|&x| x == k);
        match (pos(k), pos(l)) {
            (Some(r), Some(c)) => s2 * self.cov_unscaled[(r, c)],
            _ => 0.0,
        }
    }

    /// One-sigma uncertainty of θ slot `k` (zero when held).
    pub fn sd(&self, k: usize) -> f64 {
        self.cov(k, k).max(0.0).sqrt()
    }
}

impl Problem<'_> {
    /// Set up the problem with weights from the noise model at `p`.
    pub fn new<'a>(
        data: &'a Data,
        model: &'a Model,
        free: &[bool; NPMAX],
        p: &Params,
        noise: &Noise,
        mask: &[bool],
    ) -> Problem<'a> {
        let (wt, kappa) = weights(data, model, p, noise, mask);
        Problem {
            data,
            model,
            idx: (0..model.np()).filter(|&k| free[k]).collect(),
            wt,
            kappa,
            pn: noise.pn,
        }
    }

    /// Cost Σr² alone.
    fn cost(&self, p: &Params) -> f64 {
        let d = self.data;
        let q = self.model.pre(p);
        let mut cost = 0.0;
        for i in 0..d.n() {
            let wt = self.wt[i];
            if wt == 0.0 {
                continue;
            }
            let s = self.model.value(&q, d.w[i], d.u[i]);
            if d.complex {
                cost += ((d.s[i] - s) * wt).norm_sqr();
            } else {
                let (lnp, _) = expected_ln_power(s.norm_sqr(), self.pn);
                cost += ((d.db[i] - 10.0 / LN_10 * lnp) * wt).powi(2);
            }
        }
        cost
    }

    /// Cost Σr², JᵀJ, Jᵀr and the covariance sums.
    fn accumulate(&self, p: &Params) -> Sums {
        let m = self.idx.len();
        let mut cost = 0.0;
        let mut a = vec![0.0; m * m];
        let mut b = vec![0.0; m * m];
        let mut g = vec![0.0; m];
        let mut chi2 = 0.0;
        let mut count = 0;
        let d = self.data;
        let q = self.model.pre(p);
        let mut row = vec![0.0; m];
        let mut add = |r: f64, row: &[f64], kappa: f64| {
            cost += r * r;
            if kappa > 0.0 {
                chi2 += r * r / kappa;
            }
            for k in 0..m {
                g[k] += row[k] * r;
                for l in k..m {
                    let x = row[k] * row[l];
                    a[k * m + l] += x;
                    b[k * m + l] += kappa * x;
                }
            }
        };
        for i in 0..d.n() {
            let wt = self.wt[i];
            if wt == 0.0 {
                continue;
            }
            let kappa = self.kappa[i];
            let (s, ds) = self.model.eval_pre(&q, d.w[i], d.u[i]);
            if d.complex {
                let e = (d.s[i] - s) * wt;
                for (r, &k) in self.idx.iter().enumerate() {
                    row[r] = ds[k].re * wt;
                }
                add(e.re, &row, kappa);
                for (r, &k) in self.idx.iter().enumerate() {
                    row[r] = ds[k].im * wt;
                }
                add(e.im, &row, kappa);
                count += 2;
            } else {
                let (lnp, dlnp) = expected_ln_power(s.norm_sqr(), self.pn);
                let r = (d.db[i] - 10.0 / LN_10 * lnp) * wt;
                let c = 10.0 / LN_10 * 2.0 * dlnp * wt;
                for (r_, &k) in self.idx.iter().enumerate() {
                    row[r_] = c * (s.conj() * ds[k]).re;
                }
                add(r, &row, kappa);
                count += 1;
            }
        }
        let mut am = DMatrix::zeros(m, m);
        let mut bm = DMatrix::zeros(m, m);
        for k in 0..m {
            for l in k..m {
                am[(k, l)] = a[k * m + l];
                am[(l, k)] = a[k * m + l];
                bm[(k, l)] = b[k * m + l];
                bm[(l, k)] = b[k * m + l];
            }
        }
        Sums {
            cost,
            a: am,
            g: DVector::from_vec(g),
            b: bm,
            chi2,
            count,
        }
    }
}

/// Minimize the weighted cost from `p0`.
///
/// # Errors
/// Fewer residuals than free parameters.
pub(super) fn levenberg_marquardt(pr: &Problem, p0: Params) -> Result<LmOut> {
    let m = pr.idx.len();
    let mut theta = pr.model.theta(&p0);
    let mut p = p0;
    let mut sums = pr.accumulate(&p);
    let count = sums.count;
    if count <= m {
        return Err(Error::invalid(
            "trace points used",
            count,
            &format!("more than the {m} fitted parameters"),
        ));
    }
    // A step is negligible when it changes the model by less than 1 % of the parameter
    // uncertainty: δᵀ(JᵀJ)δ < 1e-4·s², s² = cost/(n − p).
    let negligible = |cost: f64| 1e-4 * cost / (count - m) as f64;
    let mut lambda = 1e-3;
    let mut converged = false;
    let mut iterations = 0;
    while iterations < 200 && !converged {
        iterations += 1;
        let mut accepted = false;
        for _ in 0..30 {
            let dmax = (0..m).map(|k| sums.a[(k, k)]).fold(0.0, f64::max);
            let mut mat = sums.a.clone();
            for k in 0..m {
                mat[(k, k)] += lambda * sums.a[(k, k)].max(1e-12 * dmax);
            }
            let Some(step) = mat.cholesky().map(|c| c.solve(&sums.g)) else {
                lambda *= 10.0;
                continue;
            };
            // δᵀ(JᵀJ)δ of this step, without the damping.
            let quad = step.dot(&(&sums.a * &step));
            let mut t2 = theta;
            for (r, &k) in pr.idx.iter().enumerate() {
                t2[k] += step[r];
            }
            let p2 = pr.model.params(&t2);
            if !pr.model.plausible(&p2) {
                lambda *= 10.0;
                continue;
            }
            let c2 = pr.cost(&p2);
            if c2.is_finite() && c2 <= sums.cost {
                theta = t2;
                p = p2;
                sums = pr.accumulate(&p);
                lambda = (lambda / 3.0).max(1e-12);
                accepted = true;
                converged = quad < negligible(sums.cost);
                break;
            }
            if quad < negligible(sums.cost) {
                // Even the rejected step is negligible: at the minimum to working precision.
                converged = true;
                break;
            }
            lambda *= 4.0;
        }
        if !accepted && !converged {
            break;
        }
    }
    let cov_unscaled = match sums.a.clone().cholesky().map(|c| c.inverse()) {
        Some(inv) => &inv * &sums.b * &inv,
        None => DMatrix::from_element(m, m, f64::INFINITY),
    };
    Ok(LmOut {
        params: p,
        residuals: count,
        idx: pr.idx.clone(),
        cov_unscaled,
        chi2: sums.chi2,
        converged,
        iterations,
    })
}

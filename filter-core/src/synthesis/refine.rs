//! Numerical refinement of a slope-parameter design on the exact model.
//!
//! The slope-parameter design is exact only for a narrow band and ideal inverters. With C0,
//! unequal crystals and spurious modes the analysed response drifts from the target: the ripple
//! grows, the bandwidth shifts and the skirts become asymmetric. Refinement adjusts the shunt
//! capacitors, the series tuning capacitors and the terminations so that the exact analysis
//! matches the target shape.
//!
//! Objective: at frequencies f(Ω) = fc + (B/2)·Ω·(1 + a·Ω) for a set of normalized
//! frequencies Ω across the passband and upper skirts of the prototype, the analysed loss
//! minus a flat offset L0 equals the prototype's loss at |Ω|. The centre fc, the asymmetry a
//! and L0 are free, so the passband may sit where the crystals put it and the two skirts may
//! differ; the −3 dB width (the points Ω = ±Ω3 map to a width B·Ω3 whatever a is) is pinned.
//! Levenberg–Marquardt on a forward-difference Jacobian; series capacitors enter as elastance
//! u² (so they stay positive and may vanish), the others as logarithms.

use super::{frequency_at_loss, ladder_of, lowpass, predict_ladder, LowpassData};
use crate::design::{Design, RefinementReport};
use crate::error::{Error, Result};
use crate::network::{db, Analyze, Ladder};
use nalgebra::{DMatrix, DVector};
use std::f64::consts::PI;

/// What the residuals measure.
#[derive(Clone, Copy, PartialEq)]
enum Objective {
    /// Loss at mapped frequencies against the prototype's shape.
    Shape,
    /// Equiripple conditions: every passband maximum at L0, every interior minimum at
    /// L0 + ripple, and the −3 dB width pinned (Chebyshev).
    Equiripple { ripple_db: f64, lossless: bool },
}

struct Problem<'a> {
    design: &'a Design,
    objective: Objective,
    target_b3: f64,
    /// The level (dB below the minimum loss) whose bandwidth is pinned, and that bandwidth.
    pin_level_db: f64,
    pin_bw: f64,
    omegas: Vec<f64>,
    weights: Vec<f64>,
    ideal_db: Vec<f64>,
    b_norm: f64,
    w0: f64,
}

impl Problem<'_> {
    fn n(&self) -> usize {
        self.design.order()
    }

    fn unpack(&self, p: &[f64]) -> (Vec<f64>, Vec<Option<f64>>, f64, f64) {
        let n = self.n();
        let shunt: Vec<f64> = p[..n - 1].iter().map(|x| x.exp()).collect();
        let series = p[n - 1..2 * n - 1]
            .iter()
            .map(|u| {
                let s = u * u;
                if s <= 0.0 {
                    None
                } else {
                    Some(1.0 / (self.w0 * s))
                }
            })
            .collect();
        (shunt, series, p[2 * n - 1].exp(), p[2 * n].exp())
    }

    fn ladder(&self, p: &[f64]) -> Result<Ladder> {
        let (shunt, series, rs, rl) = self.unpack(p);
        ladder_of(&self.design.crystals, &series, &shunt, rs, rl)
    }

    fn residual_count(&self) -> usize {
        match self.objective {
            Objective::Shape => self.omegas.len() + 1,
            Objective::Equiripple { .. } => 2 * self.n(),
        }
    }

    fn residuals(&self, p: &[f64], out: &mut DVector<f64>) -> Result<()> {
        match self.objective {
            Objective::Shape => self.shape_residuals(p, out),
            Objective::Equiripple {
                ripple_db,
                lossless,
            } => self.equiripple_residuals(p, out, ripple_db, lossless),
        }
    }

    fn equiripple_residuals(
        &self,
        p: &[f64],
        out: &mut DVector<f64>,
        ripple_db: f64,
        lossless: bool,
    ) -> Result<()> {
        let n = self.n();
        let lad = self.ladder(p)?;
        let fc = p[2 * n + 1];
        let l0 = if lossless { 0.0 } else { p[2 * n + 3] };
        let (_f, loss, a, b, bw) = self.passband(&lad, fc)?;
        // Extrema inside the band, refined by a parabola through three samples.
        let mut maxima = Vec::new();
        let mut minima = Vec::new();
        for i in a + 1..b {
            let (y0, y1, y2) = (loss[i - 1], loss[i], loss[i + 1]);
            let den = y0 - 2.0 * y1 + y2;
            let peak = if den.abs() > 0.0 {
                y1 - 0.125 * (y0 - y2).powi(2) / den
            } else {
                y1
            };
            if y1 < y0 && y1 <= y2 {
                maxima.push(peak);
            } else if y1 > y0 && y1 >= y2 {
                minima.push(peak);
            }
        }
        if maxima.len() != n || minima.len() + 1 != n {
            return Err(Error::numerical(format!(
                "expected {n} transmission maxima, found {}",
                maxima.len()
            )));
        }
        for (k, v) in maxima.iter().enumerate() {
            out[k] = v - l0;
        }
        for (k, v) in minima.iter().enumerate() {
            out[n + k] = v - l0 - ripple_db;
        }
        // 0.1 % of bandwidth weighs like 0.01 dB of ripple.
        out[2 * n - 1] = 10.0 * (bw / self.pin_bw - 1.0);
        Ok(())
    }

    /// Sample the loss around `fc` and find the −3 dB crossings: (frequencies, loss, index
    /// of the lower and upper crossing sample, −3 dB width).
    #[allow(clippy::type_complexity)]
    fn passband(&self, lad: &Ladder, fc: f64) -> Result<(Vec<f64>, Vec<f64>, usize, usize, f64)> {
        let m = 480;
        let (lo, hi) = (fc - 0.8 * self.target_b3, fc + 0.8 * self.target_b3);
        let f: Vec<f64> = (0..m)
            .map(|j| lo + (hi - lo) * j as f64 / (m - 1) as f64)
            .collect();
        let loss: Vec<f64> = lad.sweep_at(&f).s21.iter().map(|&x| -db(x)).collect();
        let lmin = loss.iter().cloned().fold(f64::INFINITY, f64::min);
        // Crossings of the pinned level by linear interpolation, walking out from the best point.
        let ibest = loss.iter().position(|&v| v == lmin).unwrap_or(m / 2);
        let level = lmin + self.pin_level_db;
        let mut a = ibest;
        while a > 0 && loss[a] < level {
            a -= 1;
        }
        let mut b = ibest;
        while b + 1 < m && loss[b] < level {
            b += 1;
        }
        if loss[a] < level || loss[b] < level {
            return Err(Error::numerical("passband left the refinement window"));
        }
        let cross =
            |i: usize, j: usize| f[i] + (level - loss[i]) * (f[j] - f[i]) / (loss[j] - loss[i]);
        let bw = cross(b, b - 1) - cross(a, a + 1);
        Ok((f, loss, a, b, bw))
    }

    fn shape_residuals(&self, p: &[f64], out: &mut DVector<f64>) -> Result<()> {
        let n = self.n();
        let lad = self.ladder(p)?;
        let (fc, a, l0) = (p[2 * n + 1], p[2 * n + 2], p[2 * n + 3]);
        let f: Vec<f64> = self
            .omegas
            .iter()
            .map(|&om| fc + 0.5 * self.b_norm * om * (1.0 + a * om))
            .collect();
        let s = lad.sweep_at(&f);
        for (j, x) in s.s21.iter().enumerate() {
            out[j] = self.weights[j] * (-db(*x) - l0 - self.ideal_db[j]);
        }
        let (_, _, _, _, bw) = self.passband(&lad, fc)?;
        // The −3 dB width is pinned: 0.01 % weighs like 0.03 dB of shape error.
        out[self.omegas.len()] = 300.0 * (bw / self.pin_bw - 1.0);
        if out.iter().any(|v| !v.is_finite()) {
            return Err(Error::numerical("refinement produced non-finite values"));
        }
        Ok(())
    }
}

/// The prototype's loss with uniform dissipation `d` in every element (s → s + d), dB.
fn dissipated_loss_db(g: &[f64], d: f64, w: f64) -> f64 {
    match super::lowpass_ladder(g, d) {
        Ok(l) => -db(l.response_w(w).s21),
        Err(_) => f64::NAN,
    }
}

pub(super) fn refine(
    design: &mut Design,
    lp_used: &LowpassData,
    b_norm: f64,
    b3_target: f64,
) -> Result<()> {
    let n = design.order();
    if n < 2 {
        // A single crystal has nothing to adjust against: its bandwidth is set by Rs + RL.
        return Ok(());
    }
    // The target shape: the plain prototype (predistorted designs aim at it plus a flat loss),
    // with the crystals' dissipation when the design is not predistorted.
    let lp = lowpass(&design.spec.family, n)?;
    let d = if design.spec.predistort {
        0.0
    } else {
        design.q0.map(|q0| 1.0 / (q0 / lp.w3)).unwrap_or(0.0)
    };
    let _ = lp_used;
    let om_max = frequency_at_loss(&lp.g, 20.0)?;
    let m = 161;
    let mut omegas = Vec::with_capacity(m);
    let mut weights = Vec::with_capacity(m);
    let mut ideal = Vec::with_capacity(m);
    for j in 0..m {
        let om = -om_max + 2.0 * om_max * j as f64 / (m - 1) as f64;
        // A hair off DC: the capacitors' impedance is infinite at exactly zero frequency.
        let l = dissipated_loss_db(&lp.g, d, om.abs().max(1e-9));
        omegas.push(om);
        // The passband counts most; the skirts only hold the shape together.
        weights.push(if l <= 3.5 { 1.0 } else { 0.03 });
        ideal.push(l);
    }
    let base_loss =
        dissipated_loss_db(&lp.g, d, 1e-9).min(ideal.iter().cloned().fold(f64::INFINITY, f64::min));
    for v in &mut ideal {
        *v -= base_loss;
    }
    // The bandwidth the user gave is the one held fixed.
    let (pin_level_db, pin_bw) = match design.spec.bandwidth_at {
        crate::design::BandwidthAt::Db6 => (6.0, design.spec.bandwidth_hz),
        crate::design::BandwidthAt::Db3 => (3.0, design.spec.bandwidth_hz),
        crate::design::BandwidthAt::Ripple => (3.0, b3_target),
    };
    // Pin the width of the target shape itself: with dissipation its corners are
    // rounded and its own −3 dB point lies inside the lossless one.
    let b_norm = if d > 0.0 {
        let rel = |w: f64| dissipated_loss_db(&lp.g, d, w.max(1e-9)) - base_loss - pin_level_db;
        let (mut a, mut b) = (1e-6, om_max);
        if rel(a) < 0.0 && rel(b) > 0.0 {
            for _ in 0..80 {
                let m = 0.5 * (a + b);
                if rel(m) < 0.0 {
                    a = m;
                } else {
                    b = m;
                }
            }
            pin_bw / (0.5 * (a + b))
        } else {
            b_norm
        }
    } else {
        b_norm
    };
    let w0 = 2.0 * PI * design.center_hz;
    let before = design.performance;
    let mut p: Vec<f64> = Vec::with_capacity(2 * n + 4);
    for c in &design.shunt_caps_f {
        p.push(c.ln());
    }
    for c in &design.series_caps_f {
        p.push(match c {
            Some(c) => (1.0 / (w0 * c)).sqrt(),
            None => 0.0,
        });
    }
    p.push(design.source_ohm.ln());
    p.push(design.load_ohm.ln());
    p.push(before.center_hz);
    p.push(0.0);
    p.push(before.insertion_loss_db);
    let mut prob = Problem {
        design,
        objective: Objective::Shape,
        target_b3: b3_target,
        pin_level_db,
        pin_bw,
        omegas,
        weights,
        ideal_db: ideal,
        b_norm,
        w0,
    };
    let mut iterations = 0;
    if let crate::design::ResponseFamily::Chebyshev { ripple_db } = design.spec.family {
        let lossless = design.q0.is_none();
        prob.objective = Objective::Equiripple {
            ripple_db,
            lossless,
        };
        match levenberg_marquardt(&prob, &p) {
            Ok((q, it)) => {
                p = q;
                iterations += it;
            }
            Err(_) => {
                // The passband lost its shape: fit the shape first, then try again.
                prob.objective = Objective::Shape;
                let (q, it) = levenberg_marquardt(&prob, &p)?;
                p = q;
                iterations += it;
                prob.objective = Objective::Equiripple {
                    ripple_db,
                    lossless,
                };
                if let Ok((q, it)) = levenberg_marquardt(&prob, &p) {
                    p = q;
                    iterations += it;
                }
            }
        }
    } else {
        let (q, it) = levenberg_marquardt(&prob, &p)?;
        p = q;
        iterations += it;
    }
    let (shunt, mut series, rs, rl) = prob.unpack(&p);
    // A series capacitor of under a milliohm of reactance is a wire (it would be farads); its
    // effect on the response is below 1e-5 of the mesh's terminating resistance.
    for c in series.iter_mut() {
        if matches!(c, Some(cap) if 1.0 / (w0 * *cap) < 1e-3) {
            *c = None;
        }
    }
    let lad = ladder_of(&prob.design.crystals, &series, &shunt, rs, rl)?;
    let after = predict_ladder(&lad, p[2 * n + 1], b3_target)?;
    let mut max_change: f64 = 0.0;
    for (a, b) in shunt.iter().zip(&design.shunt_caps_f) {
        max_change = max_change.max((a / b - 1.0).abs());
    }
    // Series capacitors by their reactance (elastance 1/C, zero for a wire), so a capacitor
    // that became a wire counts as a 100 % change rather than an infinite one.
    for (a, b) in series.iter().zip(&design.series_caps_f) {
        let ea = a.map_or(0.0, |c| 1.0 / c);
        let eb = b.map_or(0.0, |c| 1.0 / c);
        let big = ea.max(eb);
        if big > 0.0 {
            max_change = max_change.max((ea - eb).abs() / big);
        }
    }
    let report = RefinementReport {
        iterations,
        ripple_db: [before.ripple_db, after.ripple_db],
        bw_3db_hz: [before.bw_3db_hz, after.bw_3db_hz],
        max_cap_change: max_change,
        termination_change: [rs / design.source_ohm - 1.0, rl / design.load_ohm - 1.0],
    };
    design.shunt_caps_f = shunt;
    design.series_caps_f = series;
    design.source_ohm = rs;
    design.load_ohm = rl;
    design.performance = after;
    design.refinement = Some(report);
    super::check_terminations(rs, rl)?;
    Ok(())
}

/// Levenberg–Marquardt on a forward-difference Jacobian. Returns the parameters and the
/// number of iterations.
fn levenberg_marquardt(prob: &Problem<'_>, start: &[f64]) -> Result<(Vec<f64>, usize)> {
    let n = prob.n();
    let m = prob.residual_count();
    let np = start.len();
    let mut p = start.to_vec();
    let mut r = DVector::zeros(m);
    prob.residuals(&p, &mut r)?;
    let mut cost = r.norm_squared();
    let mut lambda = 1e-3;
    let mut jac = DMatrix::zeros(m, np);
    let mut rp = DVector::zeros(m);
    let mut iterations = 0;
    for it in 0..80 {
        iterations = it + 1;
        for k in 0..np {
            let h = match k {
                k if k == 2 * n + 1 => 1e-4 * prob.b_norm,
                k if (n - 1..2 * n - 1).contains(&k) => 1e-6 * p[k].abs().max(1.0),
                _ => 1e-7 * p[k].abs().max(1e-3),
            };
            let mut q = p.clone();
            q[k] += h;
            if prob.residuals(&q, &mut rp).is_err() {
                q[k] -= 2.0 * h;
                prob.residuals(&q, &mut rp)?;
                for j in 0..m {
                    jac[(j, k)] = (r[j] - rp[j]) / h;
                }
                continue;
            }
            for j in 0..m {
                jac[(j, k)] = (rp[j] - r[j]) / h;
            }
        }
        let jt = jac.transpose();
        let jtj = &jt * &jac;
        let g = &jt * &r;
        let mut improved = false;
        let mut rel = 1.0;
        for _ in 0..14 {
            let mut a = jtj.clone();
            for k in 0..np {
                a[(k, k)] += lambda * jtj[(k, k)].max(1e-12) + 1e-12;
            }
            let step = match a.lu().solve(&(-&g)) {
                Some(s) => s,
                None => break,
            };
            let q: Vec<f64> = p.iter().zip(step.iter()).map(|(x, s)| x + s).collect();
            if prob.residuals(&q, &mut rp).is_ok() && rp.norm_squared() < cost {
                rel = (cost - rp.norm_squared()) / cost.max(1e-300);
                p = q;
                r.copy_from(&rp);
                cost = r.norm_squared();
                lambda = (lambda * 0.3).max(1e-12);
                improved = true;
                break;
            }
            lambda *= 10.0;
        }
        if !improved || cost < 1e-16 || rel < 1e-9 {
            break;
        }
    }
    Ok((p, iterations))
}

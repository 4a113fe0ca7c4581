//! The noise of a trace: estimation, the weights it gives, and the expected level of a noisy
//! magnitude reading.

use super::model::{Data, Model, Params};
use std::f64::consts::{LN_10, LN_2, PI};

/// dB per neper of amplitude: 20/ln 10.
const DB_PER_NP: f64 = 20.0 / LN_10;
/// Smallest relative noise assumed (−80 dB, 0.001 dB), so a noiseless trace keeps finite weights.
const MIN_RELATIVE_NOISE: f64 = 1e-4;
/// Median of χ²₁ (squared real Gaussian deviates, unit variance).
const MEDIAN_CHI2_1: f64 = 0.454_936_4;
/// Euler–Mascheroni constant γ.
const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;

/// Noise of the trace: σ² = sa² + sr²·|S21|² per complex component (or of the amplitude), and
/// the noise power pn (mean |noise|²) that a magnitude reading sits on.
#[derive(Debug, Clone, Copy)]
pub(super) struct Noise {
    pub sa: f64,
    pub sr: f64,
    pub pn: f64,
    /// Smallest `sa` used for weights (60 dB under the peak).
    pub deep: f64,
}

impl Noise {
    /// `sa`, but not below the deep floor (for weights).
    fn sa_eff(&self) -> f64 {
        self.sa.max(self.deep)
    }

    /// Noise σ of an amplitude reading at model level |S21|² = `s2` (deep floor applied).
    pub fn sigma_amplitude(&self, s2: f64) -> f64 {
        (self.sa_eff().powi(2) + self.sr.powi(2) * s2).sqrt()
    }

    /// Noise floor (rms noise power) in dB.
    pub fn floor_db(&self) -> f64 {
        10.0 * self.pn.max(1e-300).log10()
    }
}

/// Median of a slice (sorted in place); 0 when empty.
pub(super) fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Centred moving average over `k` points (fewer at the ends).
pub(super) fn smooth(x: &[f64], k: usize) -> Vec<f64> {
    let h = k / 2;
    let n = x.len();
    let mut pre = vec![0.0; n + 1];
    for i in 0..n {
        pre[i + 1] = pre[i] + x[i];
    }
    (0..n)
        .map(|i| {
            let a = i.saturating_sub(h);
            let b = (i + h + 1).min(n);
            (pre[b] - pre[a]) / (b - a) as f64
        })
        .collect()
}

/// Factor from the median of per-point squared deviations to their variance.
fn median_scale(complex: bool) -> f64 {
    if complex {
        // |complex deviate|²/2 per component is exponential: median = ln 2 · mean.
        1.0 / LN_2
    } else {
        1.0 / MEDIAN_CHI2_1
    }
}

/// Noise estimate from second differences of the trace: Δ²y = y[i−1] − 2y[i] + y[i+1] has
/// variance 6σ² for white noise. The fifth of the points with the lowest local power gives the
/// floor, the highest tenth the relative part.
pub(super) fn initial_noise(data: &Data) -> Noise {
    let n = data.n();
    // Group the points by their local mean power (9-point average), not by their own level,
    // which would pick the low draws of the noise.
    let p2: Vec<f64> = data.amp.iter().map(|a| a * a).collect();
    let local = smooth(&p2, 9);
    let mut e: Vec<(f64, f64, f64)> = Vec::with_capacity(n); // (local power, v, power)
    for i in 1..n - 1 {
        let v = if data.complex {
            let d = data.s[i - 1] - data.s[i] * 2.0 + data.s[i + 1];
            d.norm_sqr() / 12.0
        } else {
            let d = data.amp[i - 1] - 2.0 * data.amp[i] + data.amp[i + 1];
            d * d / 6.0
        };
        e.push((local[i], v, p2[i]));
    }
    e.sort_by(|a, b| a.0.total_cmp(&b.0));
    let m = e.len();
    let nl = (m / 5).max(4).min(m);
    let nh = (m / 10).max(4).min(m);
    let scale = median_scale(data.complex);
    let low = &e[..nl];
    let high = &e[m - nh..];
    let var_low = median(&mut low.iter().map(|x| x.1).collect::<Vec<_>>()) * scale;
    let l2_low = low.iter().map(|x| x.2).sum::<f64>() / nl as f64;
    // Relative part: the median of v/|S|² point by point (the levels of the highest tenth
    // still differ widely), less what the floor contributes.
    let rel = median(&mut high.iter().map(|x| x.1 / x.0).collect::<Vec<_>>()) * scale;
    let inv = median(&mut high.iter().map(|x| 1.0 / x.0).collect::<Vec<_>>());
    let sr2 = (rel - var_low * inv).max(0.0);
    let sa2 = (var_low - sr2 * l2_low).max(0.0);
    let (sa, pn) = if data.complex {
        (sa2.sqrt(), 2.0 * sa2)
    } else {
        // At the floor the amplitude is Rayleigh: var = (2 − π/2)·σc², mean square 2·σc².
        // The mean square of the lowest points bounds the noise power from above.
        let pn = l2_low.min(2.0 * var_low / (2.0 - PI / 2.0));
        ((pn / 2.0).sqrt(), pn)
    };
    Noise {
        sa,
        sr: sr2.sqrt().max(MIN_RELATIVE_NOISE),
        pn,
        deep: 0.0,
    }
}

/// Re-estimate the noise from the residuals: the floor from the points the model puts well
/// below it (chosen by the model, not by their own level, so the choice does not bias the
/// mean), the relative part from the highest tenth (second differences there can be dominated
/// by the curvature of a sparsely sampled peak).
pub(super) fn reestimate_noise(
    data: &Data,
    m: &Model,
    p: &Params,
    noise: &mut Noise,
    mask: &[bool],
) {
    let v = m.values(p, data);
    let mut sum = 0.0;
    let mut count = 0usize;
    for i in 0..data.n() {
        if mask[i] && v[i].norm_sqr() < 0.1 * noise.pn {
            sum += if data.complex {
                (data.s[i] - v[i]).norm_sqr()
            } else {
                data.amp[i] * data.amp[i] - v[i].norm_sqr()
            };
            count += 1;
        }
    }
    if count >= 20 && sum > 0.0 {
        noise.pn = sum / count as f64;
        noise.sa = (noise.pn / 2.0).sqrt();
    }
    let mut e: Vec<(f64, f64)> = Vec::new();
    for i in 0..data.n() {
        if !mask[i] {
            continue;
        }
        let a2 = v[i].norm_sqr();
        let r = if data.complex {
            (data.s[i] - v[i]).norm_sqr() / 2.0
        } else {
            (data.amp[i] - (a2 + noise.pn).sqrt()).powi(2)
        };
        e.push((a2, r));
    }
    if e.len() < 40 {
        return;
    }
    e.sort_by(|a, b| a.0.total_cmp(&b.0));
    let nh = e.len() / 10;
    let high = &e[e.len() - nh..];
    let scale = median_scale(data.complex);
    let rel = median(&mut high.iter().map(|x| x.1 / x.0).collect::<Vec<_>>()) * scale;
    let inv = median(&mut high.iter().map(|x| 1.0 / x.0).collect::<Vec<_>>());
    let sr2 = (rel - noise.sa * noise.sa * inv).max(0.0);
    noise.sr = sr2.sqrt().max(MIN_RELATIVE_NOISE);
}

/// Weight 1/σ of each point at parameters `p` (per complex component, or of the dB level),
/// with σ from the noise model but `sa` not below the deep floor; and κ = (σ_noise/σ)², the
/// variance of a weighted residual under the estimated noise itself (κ < 1 where the deep
/// floor down-weights a point), for the covariance.
pub(super) fn weights(
    data: &Data,
    m: &Model,
    p: &Params,
    noise: &Noise,
    mask: &[bool],
) -> (Vec<f64>, Vec<f64>) {
    let v = m.values(p, data);
    let honest = Noise {
        deep: 0.0,
        ..*noise
    };
    (0..data.n())
        .map(|i| {
            if !mask[i] {
                return (0.0, 0.0);
            }
            let s2 = v[i].norm_sqr();
            let (used, true_sigma) = if data.complex {
                (sigma_complex(s2, noise), sigma_complex(s2, &honest))
            } else {
                (sigma_db(s2, noise), sigma_db(s2, &honest))
            };
            (1.0 / used, (true_sigma / used).powi(2).min(1.0))
        })
        .unzip()
}

/// Noise σ per complex component at model level |S21|² = `s2`.
fn sigma_complex(s2: f64, noise: &Noise) -> f64 {
    (noise.sa_eff().powi(2) + noise.sr.powi(2) * s2).sqrt()
}

/// Expected scatter of a dB reading at model level |S21|² = `s2`.
pub(super) fn sigma_db(s2: f64, noise: &Noise) -> f64 {
    let a2 = s2 + noise.pn;
    DB_PER_NP * ((noise.sa_eff().powi(2) + noise.sr.powi(2) * a2) / a2).sqrt()
}

/// Exponential integral E1(x), x > 1, by its continued fraction (modified Lentz), \[3\] §6.3.
fn e1_above_one(x: f64) -> f64 {
    let mut b = x + 1.0;
    let mut c = 1.0 / 1e-300;
    let mut d = 1.0 / b;
    let mut h = d;
    for i in 1..200 {
        let an = -((i * i) as f64);
        b += 2.0;
        d = 1.0 / (an * d + b);
        c = b + an / c;
        let del = c * d;
        h *= del;
        if (del - 1.0).abs() < 1e-15 {
            break;
        }
    }
    h * (-x).exp()
}

/// Σ_{k≥1} (−1)^(k+1)·x^k/(k·k!), so that E1(x) = −γ − ln x + this (power series, x ≤ 1).
fn e1_series_tail(x: f64) -> f64 {
    let mut sum = 0.0;
    let mut term = 1.0; // x^k/k!
    for k in 1..40 {
        term *= x / k as f64;
        let t = term / k as f64;
        sum += if k % 2 == 1 { t } else { -t };
        if t < 1e-17 * sum.abs() {
            break;
        }
    }
    sum
}

/// Expected natural log of a measured power |S + n|² for a signal power `s2` in complex
/// circular Gaussian noise of power `pn`, and its derivative with respect to `s2`:
/// E[ln|S + n|²] = ln s2 + E1(s2/pn). The floor pulls a dB trace up, and the log of a noisy
/// power averages γ (2.5 dB) below the log of its mean.
#[inline]
pub(super) fn expected_ln_power(s2: f64, pn: f64) -> (f64, f64) {
    if pn <= 0.0 {
        return (s2.ln(), 1.0 / s2);
    }
    let k = s2 / pn;
    if k > 50.0 {
        (s2.ln(), 1.0 / s2)
    } else if k <= 1.0 {
        (
            pn.ln() - EULER_GAMMA + e1_series_tail(k),
            -(-k).exp_m1() / s2,
        )
    } else {
        (s2.ln() + e1_above_one(k), -(-k).exp_m1() / s2)
    }
}

/// Model level of a magnitude reading in dB (see [`expected_ln_power`]).
#[inline]
pub(super) fn model_db(s2: f64, pn: f64) -> f64 {
    10.0 / LN_10 * expected_ln_power(s2, pn).0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exponential_integral_against_published_values() {
        // Source: M. Abramowitz, I. A. Stegun, Handbook of Mathematical Functions, 1964,
        // table 5.1 (E1(0.5) = 0.5597736, E1(1) = 0.2193839, x·e^x·E1(x) at x = 2:
        // 0.7226572, at x = 5: 0.8521109); the values are from memory and agree to all
        // seven digits with scipy.special.exp1 (scipy 1.17.1).
        let e1 = |x: f64| {
            if x <= 1.0 {
                -EULER_GAMMA - x.ln() + e1_series_tail(x)
            } else {
                e1_above_one(x)
            }
        };
        assert!((e1(0.5) - 0.559_773_6).abs() < 1e-7);
        assert!((e1(1.0) - 0.219_383_9).abs() < 1e-7);
        assert!((2.0 * 2f64.exp() * e1(2.0) - 0.722_657_2).abs() < 1e-7);
        assert!((5.0 * 5f64.exp() * e1(5.0) - 0.852_110_9).abs() < 1e-7);
        // The two forms meet at x = 1.
        assert!((e1_above_one(1.0 + 1e-12) - e1(1.0)).abs() < 1e-10);
    }

    #[test]
    fn expected_log_power_matches_a_simulation() {
        use crate::measure::synthetic::rng;
        use rand::Rng;
        use rand_distr::StandardNormal;
        let mut g = rng(1);
        for k in [0.0f64, 0.3, 1.0, 3.0, 10.0] {
            let n = 200_000;
            let mut acc = 0.0;
            for _ in 0..n {
                let a: f64 = g.sample(StandardNormal);
                let b: f64 = g.sample(StandardNormal);
                // Noise power 1 (0.5 per component), signal power k.
                let re = k.sqrt() + a * 0.5f64.sqrt();
                let im = b * 0.5f64.sqrt();
                acc += (re * re + im * im).ln();
            }
            let mean = acc / n as f64;
            let (pred, _) = expected_ln_power(k.max(1e-300), 1.0);
            // Standard error of the mean of ln|·|² is below 1.3/√n = 0.003.
            assert!((mean - pred).abs() < 0.012, "K = {k}: {mean} vs {pred}");
        }
    }
}

//! Spurious responses: found as bumps of the trace (data) and as excess over the fitted
//! response (residual), then started as extra motional branches.

use super::model::{Branch, Data, Model, Params};
use super::noise::{model_db, smooth, Noise};
use std::f64::consts::PI;

/// A secondary resonance seen in the trace.
#[derive(Debug, Clone, Copy)]
pub(super) struct Candidate {
    /// Index range the response occupies (masked when it is not fitted).
    pub i_lo: usize,
    pub i_hi: usize,
    /// Frequency of its maximum, Hz.
    pub f_hz: f64,
    /// Measured level there, dB.
    pub level_db: f64,
    /// How far it stands out (prominence or excess over the model), dB.
    pub strength_db: f64,
    /// Rough −3 dB width, Hz.
    pub width_hz: f64,
}

impl Candidate {
    fn overlaps(&self, lo: f64, hi: f64, data: &Data) -> bool {
        data.f[self.i_hi] >= lo && data.f[self.i_lo] <= hi
    }
}

/// Frequency windows a candidate may not fall in (main peak, known spurious responses).
pub(super) type Windows = Vec<(f64, f64)>;

fn excluded(f: f64, windows: &Windows) -> bool {
    windows.iter().any(|&(a, b)| f >= a && f <= b)
}

/// Parabolic interpolation of the maximum of `y` at `i` on the grid `f`.
fn refine_max(f: &[f64], y: &[f64], i: usize) -> f64 {
    if i == 0 || i + 1 >= y.len() {
        return f[i];
    }
    let (y0, y1, y2) = (y[i - 1], y[i], y[i + 1]);
    let den = y0 - 2.0 * y1 + y2;
    if den >= 0.0 {
        return f[i];
    }
    let t = (0.5 * (y0 - y2) / den).clamp(-1.0, 1.0);
    let h = if t >= 0.0 {
        f[i + 1] - f[i]
    } else {
        f[i] - f[i - 1]
    };
    f[i] + t * h
}

/// Width between the points where `y` falls `drop` below `y[i]` on either side (or to where
/// it stops falling), Hz.
fn width_at(f: &[f64], y: &[f64], i: usize, drop: f64) -> f64 {
    let t = y[i] - drop;
    let mut a = i;
    while a > 0 && y[a - 1] > t && y[a - 1] <= y[a] + 1e-12 {
        a -= 1;
    }
    let mut b = i;
    while b + 1 < y.len() && y[b + 1] > t && y[b + 1] <= y[b] + 1e-12 {
        b += 1;
    }
    (f[b] - f[a]).max(f[(i + 1).min(f.len() - 1)] - f[i.saturating_sub(1)])
}

/// Local maxima of the smoothed trace (other than in `windows`) that rise clearly above their
/// surroundings and above the fitted response: prominence at least 1 dB, and in amplitude at
/// least six times the noise of the smoothed level (dips of a noisy trace are deep in dB, so
/// the test is made in amplitude); 10 dB above the noise floor; and at least 4σ above the
/// model at `p`.
pub(super) fn bumps(
    data: &Data,
    m: &Model,
    p: &Params,
    noise: &Noise,
    k: usize,
    windows: &Windows,
) -> Vec<Candidate> {
    let n = data.n();
    let sm_amp = smooth(&data.amp, k);
    let v = m.values(p, data);
    let sm: Vec<f64> = sm_amp
        .iter()
        .map(|a| 20.0 * a.max(1e-300).log10())
        .collect();
    let floor = noise.floor_db();
    let mut out = Vec::new();
    for i in 2..n.saturating_sub(2) {
        if !(sm[i] > sm[i - 1] && sm[i] >= sm[i + 1]) || excluded(data.f[i], windows) {
            continue;
        }
        if sm[i] < floor + 10.0 {
            continue;
        }
        // Prominence: the lowest point on each side before the trace rises above sm[i] again.
        let mut lo = i;
        let mut left_min = sm[i];
        while lo > 0 && sm[lo - 1] <= sm[i] {
            lo -= 1;
            left_min = left_min.min(sm[lo]);
        }
        let mut hi = i;
        let mut right_min = sm[i];
        while hi + 1 < n && sm[hi + 1] <= sm[i] {
            hi += 1;
            right_min = right_min.min(sm[hi]);
        }
        let prominence = sm[i] - left_min.max(right_min);
        let base_amp = 10f64.powf(left_min.max(right_min) / 20.0);
        let sd = noise.sigma_amplitude(sm_amp[i] * sm_amp[i]) / (k as f64).sqrt();
        let model_amp = (v[i].norm_sqr() + noise.pn).sqrt();
        if prominence < 1.0 || sm_amp[i] - base_amp < 6.0 * sd || sm_amp[i] - model_amp < 4.0 * sd {
            continue;
        }
        let width = width_at(&data.f, &sm, i, 3.0_f64.min(0.5 * prominence));
        let span_pts = ((width / (data.f[1] - data.f[0]).abs()).ceil() as usize).max(3);
        out.push(Candidate {
            i_lo: i.saturating_sub(2 * span_pts),
            i_hi: (i + 2 * span_pts).min(n - 1),
            f_hz: refine_max(&data.f, &sm, i),
            level_db: sm[i],
            strength_db: prominence,
            width_hz: width,
        });
    }
    out
}

/// Regions where the trace stands significantly above the fitted response, outside
/// `windows`: |z| > 4 on the 3-point smoothed normalized dB residual marks a region, and a
/// region with z > 6 and at least 0.5 dB of excess is a spurious response (z in amplitude,
/// against the noise σ at that level).
pub(super) fn excess(
    data: &Data,
    m: &Model,
    p: &Params,
    noise: &Noise,
    windows: &Windows,
) -> Vec<Candidate> {
    let n = data.n();
    let v = m.values(p, data);
    let mut exc = Vec::with_capacity(n);
    let mut z = Vec::with_capacity(n);
    for (i, vi) in v.iter().enumerate() {
        let s2 = vi.norm_sqr();
        exc.push(data.db[i] - model_db(s2, noise.pn));
        // Significance in amplitude: a response far above a low model level is judged
        // against the noise there, not against the dB scatter of the model level.
        let a = (s2 + noise.pn).sqrt();
        z.push((data.amp[i] - a) / noise.sigma_amplitude(s2));
    }
    let exc = smooth(&exc, 3);
    let z = smooth(&z, 3);
    let flagged = |i: usize| z[i].abs() > 4.0 && !excluded(data.f[i], windows);
    let mut out = Vec::new();
    let mut i = 0;
    while i < n {
        if !flagged(i) {
            i += 1;
            continue;
        }
        // A run of flagged points, gaps of up to 3 allowed.
        let lo = i;
        let mut hi = i;
        let mut j = i + 1;
        while j < n && j <= hi + 4 {
            if flagged(j) {
                hi = j;
            }
            j += 1;
        }
        i = hi + 1;
        let Some(top) = (lo..=hi)
            .filter(|&k| z[k] > 6.0 && exc[k] > 0.5)
            .max_by(|&a, &b| exc[a].total_cmp(&exc[b]))
        else {
            continue;
        };
        let a = top.saturating_sub(1);
        let b = (top + 1).min(n - 1);
        let level_db = data.db[a..=b].iter().sum::<f64>() / (b - a + 1) as f64;
        let pad = ((hi - lo) / 2).max(3);
        out.push(Candidate {
            i_lo: lo.saturating_sub(pad),
            i_hi: (hi + pad).min(n - 1),
            f_hz: refine_max(&data.f, &exc, top),
            level_db,
            strength_db: exc[top],
            width_hz: width_at(&data.f, &exc, top, 0.5 * exc[top]),
        });
    }
    out
}

/// Merge candidate lists, dropping any that overlaps a stronger one.
pub(super) fn merge(mut all: Vec<Candidate>, data: &Data) -> Vec<Candidate> {
    all.sort_by(|a, b| b.strength_db.total_cmp(&a.strength_db));
    let mut kept: Vec<Candidate> = Vec::new();
    for c in all {
        if !kept
            .iter()
            .any(|k| c.overlaps(data.f[k.i_lo], data.f[k.i_hi], data))
        {
            kept.push(c);
        }
    }
    kept
}

/// Starting values of a motional branch for candidate `c`: at resonance it adds 1/R to the
/// crystal's admittance, so R is the value that lifts the model to the measured level (found
/// by bisection on ln R); L follows from the width as for the main mode.
pub(super) fn starting_branch(data: &Data, m: &Model, p: &Params, c: &Candidate) -> Option<Branch> {
    let w = 2.0 * PI * c.f_hz;
    let i = data.f.partition_point(|&f| f < c.f_hz).min(data.n() - 1);
    let a = i.saturating_sub(1);
    let b = (i + 1).min(data.n() - 1);
    let measured = data.amp[a..=b].iter().sum::<f64>()
        / (b - a + 1) as f64
        / Model::level_factor(p, data.u[i]);
    let y_rest = m.crystal_admittance(&p.bare(), w);
    let level = |r: f64| (m.two_r0 / ((y_rest + 1.0 / r).inv() + m.rt)).norm();
    let (mut lo, mut hi) = (0.1f64.ln(), 1e7f64.ln());
    if level(hi.exp()) >= measured || level(lo.exp()) <= measured {
        return None;
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if level(mid.exp()) > measured {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let rm = (0.5 * (lo + hi)).exp();
    let lm = (rm + m.rt) / (2.0 * PI * c.width_hz.max(1e-9));
    (lm.is_finite() && lm > 0.0).then_some(Branch { fs: c.f_hz, lm, rm })
}

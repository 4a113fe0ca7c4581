//! The trace as the fit sees it, and the fixture model with its derivatives.
//!
//! Admittance form: Y = 1/zm + jωC0 + Σ 1/zk (main branch zm, spurious branches zk),
//! Z = 1/Y, S21 = G/(Z + Rt) with the fixture factor G = 2·R0·e^(jφ)·e^(κ·u) (phase offset φ,
//! level slope κ in nepers per unit of u = (f − f_peak)/span). Every derivative follows from
//! ∂S/∂θ = (S/(Z + Rt))·Z²·∂Y/∂θ.

use crate::error::{Error, Result};
use crate::io::MeasuredTrace;
use num_complex::Complex64;
use std::f64::consts::{LN_10, PI};

/// Fewest points a trace may have.
pub(super) const MIN_POINTS: usize = 16;
/// Parameters of the main branch and fixture: fs, ln Lm, ln Rm, ln C0, slope (dB), phase.
pub(super) const NP_MAIN: usize = 6;
/// Spurious branches fitted at most (further ones are masked out).
pub(super) const MAX_SPURS: usize = 3;
/// Parameter slots: main, then (fs, ln L, ln R) per spurious branch.
pub(super) const NPMAX: usize = NP_MAIN + 3 * MAX_SPURS;
/// θ index of the fixture slope.
pub(super) const I_SLOPE: usize = 4;
/// θ index of C0.
pub(super) const I_C0: usize = 3;
/// θ index of the phase offset.
pub(super) const I_PHASE: usize = 5;

/// The trace in the form the fit uses.
pub(super) struct Data {
    pub f: Vec<f64>,
    pub w: Vec<f64>,
    /// (f − f_peak)/span, set once the peak is known.
    pub u: Vec<f64>,
    pub amp: Vec<f64>,
    pub db: Vec<f64>,
    /// Complex S21 (empty for a magnitude fit).
    pub s: Vec<Complex64>,
    pub complex: bool,
}

impl Data {
    pub fn new(trace: &MeasuredTrace, use_phase: bool) -> Result<Self> {
        let n = trace.f_hz.len();
        if n < MIN_POINTS {
            return Err(Error::invalid(
                "trace points",
                n,
                &format!("at least {MIN_POINTS} points across the resonance"),
            ));
        }
        if trace.s21_db.len() != n {
            return Err(Error::invalid(
                "trace s21_db length",
                trace.s21_db.len(),
                &format!("{n}, one level per frequency"),
            ));
        }
        for (i, &f) in trace.f_hz.iter().enumerate() {
            if !(f.is_finite() && f > 0.0) {
                return Err(Error::invalid(
                    &format!("trace f_hz[{i}]"),
                    f,
                    "a finite frequency above 0 Hz",
                ));
            }
            if i > 0 && f <= trace.f_hz[i - 1] {
                return Err(Error::invalid(
                    &format!("trace f_hz[{i}]"),
                    format!("{f} Hz"),
                    &format!(
                        "frequencies strictly increasing (the point before is {} Hz)",
                        trace.f_hz[i - 1]
                    ),
                ));
            }
        }
        for (i, &d) in trace.s21_db.iter().enumerate() {
            if !(d.is_finite() && d < 300.0) {
                return Err(Error::invalid(
                    &format!("trace s21_db[{i}]"),
                    d,
                    "a finite level in dB (below +300 dB)",
                ));
            }
        }
        let amp: Vec<f64> = trace.s21_db.iter().map(|d| 10f64.powf(d / 20.0)).collect();
        let mut s = Vec::new();
        if use_phase {
            if let Some(ph) = &trace.s21_deg {
                if ph.len() != n {
                    return Err(Error::invalid(
                        "trace s21_deg length",
                        ph.len(),
                        &format!("{n}, one phase per frequency"),
                    ));
                }
                for (i, (&a, &deg)) in amp.iter().zip(ph).enumerate() {
                    if !deg.is_finite() {
                        return Err(Error::invalid(
                            &format!("trace s21_deg[{i}]"),
                            deg,
                            "a finite phase in degrees",
                        ));
                    }
                    s.push(Complex64::from_polar(a, deg.to_radians()));
                }
            }
        }
        Ok(Data {
            w: trace.f_hz.iter().map(|f| 2.0 * PI * f).collect(),
            u: vec![0.0; n],
            f: trace.f_hz.clone(),
            db: trace.s21_db.clone(),
            amp,
            complex: !s.is_empty(),
            s,
        })
    }

    pub fn n(&self) -> usize {
        self.f.len()
    }
}

/// A motional branch in physical units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Branch {
    pub fs: f64,
    pub lm: f64,
    pub rm: f64,
}

impl Branch {
    /// Loaded −3 dB bandwidth of the branch alone in the loop resistance `rt`, Hz.
    pub fn bw3(&self, rt: f64) -> f64 {
        (self.rm + rt) / (2.0 * PI * self.lm)
    }
}

/// All fitted quantities in physical units.
#[derive(Debug, Clone, Copy)]
pub(super) struct Params {
    pub main: Branch,
    pub c0: f64,
    pub slope_db: f64,
    pub phase: f64,
    pub spurs: [Branch; MAX_SPURS],
    pub n_spurs: usize,
}

impl Params {
    /// The same crystal without the fixture terms.
    pub fn bare(&self) -> Params {
        Params {
            slope_db: 0.0,
            phase: 0.0,
            ..*self
        }
    }
}

/// Scaling of one branch's θ: frequency offset in units of `bw`, logs relative to references.
#[derive(Debug, Clone, Copy)]
pub(super) struct Scale {
    pub fs: f64,
    pub bw: f64,
    pub lm: f64,
    pub rm: f64,
}

impl Scale {
    pub fn of(b: &Branch, bw: f64) -> Scale {
        Scale {
            fs: b.fs,
            bw,
            lm: b.lm,
            rm: b.rm,
        }
    }
}

/// The fixture model and the scaling of θ.
pub(super) struct Model {
    pub two_r0: f64,
    pub rt: f64,
    pub main: Scale,
    pub c0_ref: f64,
    pub spur: Vec<Scale>,
    pub f_lo: f64,
    pub f_hi: f64,
}

/// Constants of one parameter point (see [`Model::pre`]).
pub(super) struct Pre {
    branches: [PreBranch; 1 + MAX_SPURS],
    nb: usize,
    c0: f64,
    /// 2·R0·e^(jφ).
    gain: Complex64,
    /// Slope in nepers per unit of u.
    slope_k: f64,
}

#[derive(Clone, Copy, Default)]
struct PreBranch {
    ws2: f64,
    lm: f64,
    rm: f64,
    /// ∂X/∂θ_fs times ω.
    dfs_k: f64,
}

impl Model {
    /// Number of θ slots in use.
    pub fn np(&self) -> usize {
        NP_MAIN + 3 * self.spur.len()
    }

    pub fn theta(&self, p: &Params) -> [f64; NPMAX] {
        let mut t = [0.0; NPMAX];
        t[0] = (p.main.fs - self.main.fs) / self.main.bw;
        t[1] = (p.main.lm / self.main.lm).ln();
        t[2] = (p.main.rm / self.main.rm).ln();
        t[3] = (p.c0 / self.c0_ref).ln();
        t[4] = p.slope_db;
        t[5] = p.phase;
        for (k, sc) in self.spur.iter().enumerate() {
            let b = &p.spurs[k];
            t[NP_MAIN + 3 * k] = (b.fs - sc.fs) / sc.bw;
            t[NP_MAIN + 3 * k + 1] = (b.lm / sc.lm).ln();
            t[NP_MAIN + 3 * k + 2] = (b.rm / sc.rm).ln();
        }
        t
    }

    pub fn params(&self, t: &[f64; NPMAX]) -> Params {
        let branch = |sc: &Scale, a: f64, b: f64, c: f64| Branch {
            fs: sc.fs + a * sc.bw,
            lm: sc.lm * b.exp(),
            rm: sc.rm * c.exp(),
        };
        let mut spurs = [Branch {
            fs: 1.0,
            lm: 1.0,
            rm: 1.0,
        }; MAX_SPURS];
        for (k, sc) in self.spur.iter().enumerate() {
            let i = NP_MAIN + 3 * k;
            spurs[k] = branch(sc, t[i], t[i + 1], t[i + 2]);
        }
        Params {
            main: branch(&self.main, t[0], t[1], t[2]),
            c0: self.c0_ref * t[3].exp(),
            slope_db: t[4],
            phase: t[5],
            spurs,
            n_spurs: self.spur.len(),
        }
    }

    /// Whether `p` is usable: finite, positive, the branches not absurdly far outside the
    /// sweep, and each spurious branch clear of the main resonance.
    pub fn plausible(&self, p: &Params) -> bool {
        let span = self.f_hi - self.f_lo;
        let ok = |b: &Branch| {
            [b.fs, b.lm, b.rm].iter().all(|v| v.is_finite())
                && b.lm > 0.0
                && b.fs > self.f_lo - 2.0 * span
                && b.fs < self.f_hi + 2.0 * span
        };
        let bw_main = p.main.bw3(self.rt);
        ok(&p.main)
            && p.c0.is_finite()
            && p.c0 > 0.0
            && p.slope_db.is_finite()
            && p.phase.is_finite()
            && p.spurs[..p.n_spurs]
                .iter()
                .all(|b| ok(b) && (b.fs - p.main.fs).abs() > bw_main)
    }

    /// The per-parameter-point constants of [`Model::value`] and [`Model::eval_pre`].
    pub fn pre(&self, p: &Params) -> Pre {
        let mut branches = [PreBranch::default(); 1 + MAX_SPURS];
        let mk = |b: &Branch, bw: f64| {
            let ws = 2.0 * PI * b.fs;
            PreBranch {
                ws2: ws * ws,
                lm: b.lm,
                rm: b.rm,
                dfs_k: -b.lm * 2.0 * ws * 2.0 * PI * bw,
            }
        };
        branches[0] = mk(&p.main, self.main.bw);
        for (k, sc) in self.spur.iter().enumerate() {
            branches[k + 1] = mk(&p.spurs[k], sc.bw);
        }
        Pre {
            branches,
            nb: 1 + self.spur.len(),
            c0: p.c0,
            gain: Complex64::from_polar(self.two_r0, p.phase),
            slope_k: p.slope_db * LN_10 / 20.0,
        }
    }

    #[inline]
    fn gain(q: &Pre, u: f64) -> Complex64 {
        if q.slope_k == 0.0 {
            q.gain
        } else {
            q.gain * (q.slope_k * u).exp()
        }
    }

    /// S21 at angular frequency `w`, slope coordinate `u`.
    #[inline]
    pub fn value(&self, q: &Pre, w: f64, u: f64) -> Complex64 {
        let mut y = Complex64::new(0.0, w * q.c0);
        for b in &q.branches[..q.nb] {
            y += Complex64::new(b.rm, b.lm * (w - b.ws2 / w)).inv();
        }
        Self::gain(q, u) / (y.inv() + self.rt)
    }

    /// S21 and its derivatives with respect to θ (slots beyond [`Model::np`] are zero).
    #[inline]
    pub fn eval_pre(&self, q: &Pre, w: f64, u: f64) -> (Complex64, [Complex64; NPMAX]) {
        let j = Complex64::new(0.0, 1.0);
        let mut inv_z = [Complex64::new(0.0, 0.0); 1 + MAX_SPURS];
        let mut xs = [0.0; 1 + MAX_SPURS];
        let mut y = Complex64::new(0.0, w * q.c0);
        for (k, b) in q.branches[..q.nb].iter().enumerate() {
            let x = b.lm * (w - b.ws2 / w);
            let iz = Complex64::new(b.rm, x).inv();
            xs[k] = x;
            inv_z[k] = iz;
            y += iz;
        }
        let z = y.inv();
        let it = (z + self.rt).inv();
        let s = Self::gain(q, u) * it;
        // ∂S/∂Y = (S/(Z + Rt))·Z².
        let ds_dy = s * it * z * z;
        let mut d = [Complex64::new(0.0, 0.0); NPMAX];
        for (k, b) in q.branches[..q.nb].iter().enumerate() {
            // ∂Y/∂z = −1/z².
            let k_ = -ds_dy * inv_z[k] * inv_z[k];
            let base = if k == 0 { 0 } else { NP_MAIN + 3 * (k - 1) };
            d[base] = k_ * Complex64::new(0.0, b.dfs_k / w);
            d[base + 1] = k_ * (j * xs[k]);
            d[base + 2] = k_ * b.rm;
        }
        d[I_C0] = ds_dy * Complex64::new(0.0, w * q.c0);
        d[I_SLOPE] = s * (LN_10 / 20.0 * u);
        d[I_PHASE] = j * s;
        (s, d)
    }

    /// Admittance of the crystal (all branches and C0) at angular frequency `w`.
    pub fn crystal_admittance(&self, p: &Params, w: f64) -> Complex64 {
        let q = self.pre(p);
        let mut y = Complex64::new(0.0, w * q.c0);
        for b in &q.branches[..q.nb] {
            y += Complex64::new(b.rm, b.lm * (w - b.ws2 / w)).inv();
        }
        y
    }

    /// |G|/(2·R0): the fixture's level factor at slope coordinate `u`.
    pub fn level_factor(p: &Params, u: f64) -> f64 {
        (p.slope_db * LN_10 / 20.0 * u).exp()
    }

    /// S21 of the model at every point of `data`.
    pub fn values(&self, p: &Params, data: &Data) -> Vec<Complex64> {
        let q = self.pre(p);
        data.w
            .iter()
            .zip(&data.u)
            .map(|(&w, &u)| self.value(&q, w, u))
            .collect()
    }

    /// Largest |S21| of the bare model (no fixture terms) near `f0`, searched over
    /// `f0 − below .. f0 + above` by golden section: (frequency, |S21|).
    pub fn local_peak(&self, p: &Params, f0: f64, below: f64, above: f64) -> (f64, f64) {
        let q = self.pre(&p.bare());
        let amp = |f: f64| self.value(&q, 2.0 * PI * f, 0.0).norm();
        let (mut a, mut b) = (f0 - below, f0 + above);
        let g = (5f64.sqrt() - 1.0) / 2.0;
        for _ in 0..100 {
            let c = b - g * (b - a);
            let d = a + g * (b - a);
            if amp(c) > amp(d) {
                b = d;
            } else {
                a = c;
            }
        }
        let f = 0.5 * (a + b);
        (f, amp(f))
    }

    /// Transmission peak of the main response: (frequency, |S21|).
    pub fn main_peak(&self, p: &Params) -> (f64, f64) {
        let bw = p.main.bw3(self.rt);
        self.local_peak(p, p.main.fs, bw, 0.5 * bw)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn jacobian_matches_finite_differences() {
        let main = Branch {
            fs: 9.0002e6,
            lm: 14e-3,
            rm: 12.0,
        };
        let spur = Branch {
            fs: 9.041e6,
            lm: 0.3,
            rm: 300.0,
        };
        let m = Model {
            two_r0: 100.0,
            rt: 103.0,
            main: Scale {
                fs: 9e6,
                bw: 900.0,
                lm: 15e-3,
                rm: 10.0,
            },
            c0_ref: 4e-12,
            spur: vec![Scale {
                fs: 9.04e6,
                bw: 200.0,
                lm: 0.25,
                rm: 350.0,
            }],
            f_lo: 8.99e6,
            f_hi: 9.05e6,
        };
        let mut spurs = [spur; MAX_SPURS];
        spurs[0] = spur;
        let p = Params {
            main,
            c0: 3.5e-12,
            slope_db: 0.3,
            phase: 0.1,
            spurs,
            n_spurs: 1,
        };
        for f in [8.995e6, 9.0001e6, 9.0004e6, 9.02e6, 9.041e6] {
            let (w, u) = (2.0 * PI * f, 0.2);
            let q = m.pre(&p);
            let (s, ds) = m.eval_pre(&q, w, u);
            assert!((s - m.value(&q, w, u)).norm() < 1e-12 * s.norm());
            let t = m.theta(&p);
            for k in 0..m.np() {
                let h = 1e-6;
                let mut tp = t;
                tp[k] += h;
                let mut tm = t;
                tm[k] -= h;
                let sp = m.value(&m.pre(&m.params(&tp)), w, u);
                let sm = m.value(&m.pre(&m.params(&tm)), w, u);
                let num = (sp - sm) / (2.0 * h);
                // Central difference with h = 1e-6: truncation ~h² relative, rounding
                // ~1e-16/h = 1e-10 of |S| (more in the fs slots, which lose digits in
                // ω − ωs²/ω): 1e-5 relative plus 1e-8 of |S|.
                let err = (num - ds[k]).norm();
                assert!(
                    err < 1e-5 * ds[k].norm() + 1e-8 * s.norm(),
                    "f {f} θ[{k}]: {num} vs {}",
                    ds[k]
                );
            }
        }
    }
}

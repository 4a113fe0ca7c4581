//! The ladder fast path: a cascade of series and shunt branches analysed by chain matrices.

use super::{Analyze, Branch, FrequencyGrid, Response, Sweep};
use crate::error::{require_positive, Result};
use num_complex::Complex64;
use std::f64::consts::PI;

/// One stage of a ladder.
#[derive(Debug, Clone, PartialEq)]
pub enum Stage {
    /// A branch in the signal path.
    Series(Branch),
    /// A branch from the signal path to ground.
    Shunt(Branch),
}

/// A ladder two-port between a source resistance and a load resistance.
#[derive(Debug, Clone, PartialEq)]
pub struct Ladder {
    source_ohm: f64,
    load_ohm: f64,
    stages: Vec<Stage>,
    /// The stages precompiled for the hot loop (same order as `stages`).
    fast: Vec<Fast>,
}

/// A stage reduced to the constants the inner loop needs: no divisions by part values, no
/// recursion, for the two shapes a crystal ladder is made of.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Fast {
    /// Series: an optional lossless capacitor (1/C, 0 for none) and a crystal without
    /// spurious modes.
    SeriesCrystal {
        inv_cs: f64,
        rm: f64,
        lm: f64,
        inv_cm: f64,
        c0: f64,
    },
    /// Shunt: a lossless capacitor.
    ShuntCap { c: f64 },
    /// Anything else: the general branch evaluation of stage `index`.
    General { index: usize },
}

fn compile(stages: &[Stage]) -> Vec<Fast> {
    use super::{Element, Loss};
    let xtal = |x: &crate::crystal::Crystal, inv_cs: f64| Fast::SeriesCrystal {
        inv_cs,
        rm: x.motional.rm_ohm,
        lm: x.motional.lm_h,
        inv_cm: 1.0 / x.motional.cm_f,
        c0: x.c0_f,
    };
    stages
        .iter()
        .enumerate()
        .map(|(index, s)| match s {
            Stage::Series(Branch::Element(Element::Crystal(x))) if x.spurious.is_empty() => {
                xtal(x, 0.0)
            }
            Stage::Series(Branch::Series(parts)) => match parts.as_slice() {
                [Branch::Element(Element::Capacitor(c, Loss::Lossless)), Branch::Element(Element::Crystal(x))]
                    if x.spurious.is_empty() =>
                {
                    xtal(x, 1.0 / c)
                }
                _ => Fast::General { index },
            },
            Stage::Shunt(Branch::Element(Element::Capacitor(c, Loss::Lossless))) => {
                Fast::ShuntCap { c: *c }
            }
            _ => Fast::General { index },
        })
        .collect()
}

/// 1/z with one division.
#[inline(always)]
fn recip(z: C) -> C {
    let s = 1.0 / (z.re * z.re + z.im * z.im);
    C::new(z.re * s, -z.im * s)
}

type C = Complex64;

impl Ladder {
    /// A ladder of `stages` in signal order between `source_ohm` and `load_ohm`.
    ///
    /// # Errors
    /// When a termination is not finite and positive.
    pub fn new(source_ohm: f64, load_ohm: f64, stages: Vec<Stage>) -> Result<Self> {
        require_positive("source resistance", source_ohm)?;
        require_positive("load resistance", load_ohm)?;
        let fast = compile(&stages);
        Ok(Ladder {
            source_ohm,
            load_ohm,
            stages,
            fast,
        })
    }

    /// Source resistance, Ω.
    pub fn source_ohm(&self) -> f64 {
        self.source_ohm
    }

    /// Load resistance, Ω.
    pub fn load_ohm(&self) -> f64 {
        self.load_ohm
    }

    /// The stages in signal order.
    pub fn stages(&self) -> &[Stage] {
        &self.stages
    }

    /// Chain matrix [A, B, C, D] and its derivative with respect to ω at `w` (rad/s).
    #[inline]
    pub fn abcd(&self, w: f64) -> ([C; 4], [C; 4]) {
        let one = C::new(1.0, 0.0);
        let zero = C::new(0.0, 0.0);
        let (mut a, mut b, mut c, mut d) = (one, zero, zero, one);
        let (mut da, mut db, mut dc, mut dd) = (zero, zero, zero, zero);
        let inv_w = 1.0 / w;
        for f in &self.fast {
            let (series, z, dz) = match *f {
                Fast::SeriesCrystal {
                    inv_cs,
                    rm,
                    lm,
                    inv_cm,
                    c0,
                } => {
                    // Motional branch, C0 across it (see Crystal::z_dz), then the series
                    // capacitor: x = −1/(ωC), dx/dω = 1/(ω²C).
                    let zm = C::new(rm, w * lm - inv_cm * inv_w);
                    let dzm = C::new(0.0, lm + inv_cm * inv_w * inv_w);
                    let inv = recip(C::new(1.0 - w * c0 * zm.im, w * c0 * zm.re));
                    let jc0 = C::new(0.0, c0);
                    let zx = zm * inv;
                    let dzx = (dzm - jc0 * zm * zm) * inv * inv;
                    let zc = inv_cs * inv_w;
                    (
                        true,
                        C::new(zx.re, zx.im - zc),
                        C::new(dzx.re, dzx.im + zc * inv_w),
                    )
                }
                Fast::ShuntCap { c } => (false, C::new(0.0, w * c), C::new(0.0, c)),
                Fast::General { index } => match &self.stages[index] {
                    Stage::Series(br) => {
                        let (z, dz) = br.z_dz(w);
                        (true, z, dz)
                    }
                    Stage::Shunt(br) => {
                        let (y, dy) = br.y_dy(w);
                        (false, y, dy)
                    }
                },
            };
            if series {
                // [a b; c d]·[1 z; 0 1] = [a, a·z + b; c, c·z + d]
                db = da * z + a * dz + db;
                dd = dc * z + c * dz + dd;
                b += a * z;
                d += c * z;
            } else {
                // [a b; c d]·[1 0; y 1] = [a + b·y, b; c + d·y, d]  (z holds y here)
                da = da + db * z + b * dz;
                dc = dc + dd * z + d * dz;
                a += b * z;
                c += d * z;
            }
        }
        ([a, b, c, d], [da, db, dc, dd])
    }

    /// Analyse at angular frequency `w` (rad/s).
    #[inline]
    pub fn response_w(&self, w: f64) -> Response {
        let ([a, b, c, d], [da, db, dc, dd]) = self.abcd(w);
        let (rs, rl) = (self.source_ohm, self.load_ohm);
        let ar = a * rl;
        let crr = c * (rs * rl);
        let dr = d * rs;
        let den = ar + b + crr + dr;
        let dden = da * rl + db + dc * (rs * rl) + dd * rs;
        let inv = recip(den);
        Response {
            f_hz: w / (2.0 * PI),
            s21: inv * (2.0 * (rs * rl).sqrt()),
            s11: (ar + b - crr - dr) * inv,
            s22: (-ar + b - crr + dr) * inv,
            group_delay_s: (dden * inv).im,
        }
    }
}

/// Frequencies analysed together by the structure-of-arrays path.
const LANES: usize = 8;

/// One complex number per lane, real and imaginary parts apart, so that every operation is a
/// loop over `LANES` contiguous doubles the compiler can vectorize.
#[derive(Clone, Copy)]
struct Lanes {
    re: [f64; LANES],
    im: [f64; LANES],
}

impl Lanes {
    #[inline(always)]
    fn splat(re: f64, im: f64) -> Self {
        Lanes {
            re: [re; LANES],
            im: [im; LANES],
        }
    }
}

/// `acc += x·y` lane by lane (complex).
#[inline(always)]
fn mul_add(acc: &mut Lanes, x: &Lanes, y: &Lanes) {
    for k in 0..LANES {
        let re = x.re[k] * y.re[k] - x.im[k] * y.im[k];
        let im = x.re[k] * y.im[k] + x.im[k] * y.re[k];
        acc.re[k] += re;
        acc.im[k] += im;
    }
}

impl Ladder {
    /// True when every stage has a precompiled form, so the structure-of-arrays path applies.
    fn all_fast(&self) -> bool {
        self.fast.iter().all(|f| !matches!(f, Fast::General { .. }))
    }

    /// Analyse `LANES` angular frequencies at once (only when [`Ladder::all_fast`]). The lane
    /// loops index several arrays in step, which is what lets them vectorize.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn response_lanes(&self, w: &[f64; LANES], out: &mut Sweep) {
        let mut inv_w = [0.0; LANES];
        for k in 0..LANES {
            inv_w[k] = 1.0 / w[k];
        }
        let (mut a, mut b, mut c, mut d) = (
            Lanes::splat(1.0, 0.0),
            Lanes::splat(0.0, 0.0),
            Lanes::splat(0.0, 0.0),
            Lanes::splat(1.0, 0.0),
        );
        let zero = Lanes::splat(0.0, 0.0);
        let (mut da, mut db, mut dc, mut dd) = (zero, zero, zero, zero);
        let mut z = zero;
        let mut dz = zero;
        for f in &self.fast {
            match *f {
                Fast::SeriesCrystal {
                    inv_cs,
                    rm,
                    lm,
                    inv_cm,
                    c0,
                } => {
                    for k in 0..LANES {
                        // As in `abcd`: motional branch, C0 across, series capacitor.
                        let (zr, zi) = (rm, w[k] * lm - inv_cm * inv_w[k]);
                        let dzi = lm + inv_cm * inv_w[k] * inv_w[k];
                        let (er, ei) = (1.0 - w[k] * c0 * zi, w[k] * c0 * zr);
                        let s = 1.0 / (er * er + ei * ei);
                        let (ir, ii) = (er * s, -ei * s);
                        let (xr, xi) = (zr * ir - zi * ii, zr * ii + zi * ir);
                        // dzm − jC0·zm²
                        let (qr, qi) = (zr * zr - zi * zi, 2.0 * zr * zi);
                        let (nr, ni) = (c0 * qi, dzi - c0 * qr);
                        let (i2r, i2i) = (ir * ir - ii * ii, 2.0 * ir * ii);
                        let zc = inv_cs * inv_w[k];
                        z.re[k] = xr;
                        z.im[k] = xi - zc;
                        dz.re[k] = nr * i2r - ni * i2i;
                        dz.im[k] = nr * i2i + ni * i2r + zc * inv_w[k];
                    }
                    // b += a·z, d += c·z, with derivatives.
                    mul_add(&mut db, &da, &z);
                    mul_add(&mut db, &a, &dz);
                    mul_add(&mut dd, &dc, &z);
                    mul_add(&mut dd, &c, &dz);
                    mul_add(&mut b, &a, &z);
                    mul_add(&mut d, &c, &z);
                }
                Fast::ShuntCap { c: cap } => {
                    // a += b·y, c += d·y with y = jωC, dy/dω = jC.
                    for k in 0..LANES {
                        let y = w[k] * cap;
                        da.re[k] += -db.im[k] * y - b.im[k] * cap;
                        da.im[k] += db.re[k] * y + b.re[k] * cap;
                        dc.re[k] += -dd.im[k] * y - d.im[k] * cap;
                        dc.im[k] += dd.re[k] * y + d.re[k] * cap;
                        a.re[k] += -b.im[k] * y;
                        a.im[k] += b.re[k] * y;
                        c.re[k] += -d.im[k] * y;
                        c.im[k] += d.re[k] * y;
                    }
                }
                Fast::General { .. } => unreachable!("response_lanes needs an all-fast ladder"),
            }
        }
        let (rs, rl) = (self.source_ohm, self.load_ohm);
        let rsrl = rs * rl;
        let gain = 2.0 * rsrl.sqrt();
        for k in 0..LANES {
            let ar = C::new(a.re[k] * rl, a.im[k] * rl);
            let bb = C::new(b.re[k], b.im[k]);
            let crr = C::new(c.re[k] * rsrl, c.im[k] * rsrl);
            let dr = C::new(d.re[k] * rs, d.im[k] * rs);
            let den = ar + bb + crr + dr;
            let dden = C::new(
                da.re[k] * rl + db.re[k] + dc.re[k] * rsrl + dd.re[k] * rs,
                da.im[k] * rl + db.im[k] + dc.im[k] * rsrl + dd.im[k] * rs,
            );
            let inv = recip(den);
            out.f_hz.push(w[k] / (2.0 * PI));
            out.s21.push(inv * gain);
            out.s11.push((ar + bb - crr - dr) * inv);
            out.s22.push((-ar + bb - crr + dr) * inv);
            out.group_delay_s.push((dden * inv).im);
        }
    }

    /// All points, `LANES` at a time (the last chunk padded with its last frequency; the
    /// extra points are dropped by the caller).
    #[inline(always)]
    fn chunks(&self, n: usize, w_at: &impl Fn(usize) -> f64, out: &mut Sweep) {
        let mut i = 0;
        let mut w = [0.0; LANES];
        while i < n {
            for (k, wk) in w.iter_mut().enumerate() {
                *wk = w_at((i + k).min(n - 1));
            }
            self.response_lanes(&w, out);
            i += LANES;
        }
    }

    /// [`Ladder::chunks`] compiled for AVX2 (4-wide double vectors), chosen at run time; the
    /// portable build stays SSE2. No FMA, so the results are bit-identical to the portable path.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn chunks_avx2(&self, n: usize, w_at: &impl Fn(usize) -> f64, out: &mut Sweep) {
        self.chunks(n, w_at, out)
    }

    fn sweep_angular(&self, n: usize, w_at: impl Fn(usize) -> f64) -> Sweep {
        let mut out = Sweep::with_capacity(n + LANES);
        if self.all_fast() {
            #[cfg(target_arch = "x86_64")]
            {
                if std::arch::is_x86_feature_detected!("avx2") {
                    // SAFETY: the CPU has just been found to support AVX2.
                    unsafe { self.chunks_avx2(n, &w_at, &mut out) };
                } else {
                    self.chunks(n, &w_at, &mut out);
                }
            }
            #[cfg(not(target_arch = "x86_64"))]
            self.chunks(n, &w_at, &mut out);
            out.f_hz.truncate(n);
            out.s21.truncate(n);
            out.s11.truncate(n);
            out.s22.truncate(n);
            out.group_delay_s.truncate(n);
        } else {
            for i in 0..n {
                out.push(self.response_w(w_at(i)));
            }
        }
        // Report the frequencies exactly as given, not as round-tripped through ω.
        out
    }
}

impl Analyze for Ladder {
    #[inline]
    fn response(&self, f_hz: f64) -> Response {
        self.response_w(2.0 * PI * f_hz)
    }

    fn sweep(&self, grid: &FrequencyGrid) -> Sweep {
        let mut s = self.sweep_angular(grid.points(), |i| 2.0 * PI * grid.at(i));
        for (i, f) in s.f_hz.iter_mut().enumerate() {
            *f = grid.at(i);
        }
        s
    }

    fn sweep_at(&self, f_hz: &[f64]) -> Sweep {
        if f_hz.is_empty() {
            return Sweep::default();
        }
        let mut s = self.sweep_angular(f_hz.len(), |i| 2.0 * PI * f_hz[i]);
        s.f_hz.copy_from_slice(f_hz);
        s
    }
}

//! The ladder fast path: a cascade of series and shunt branches analysed by chain matrices.

use super::{Analyze, Branch, FrequencyGrid, Outputs, Response, Sweep};
use crate::error::{require_positive, Result};
use num_complex::Complex64;
use std::f64::consts::PI;
use std::mem::MaybeUninit;

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

/// Impedance of a crystal (motional branch Rm, Lm, 1/Cm with C0 across it, see
/// `Crystal::z_dz`) in series with a capacitor of inverse value `inv_cs` (0 for none), and its
/// ω-derivative, at `w` (rad/s) with `inv_w` = 1/w: `[Re Z, Im Z, Re dZ/dω, Im dZ/dω]`.
///
/// zm = Rm + j(ωLm − 1/(ωCm)), Z = zm/(1 + jωC0·zm) − j/(ωCs), and
/// dZ/dω = (dzm/dω − jC0·zm²)/(1 + jωC0·zm)² + 1/(ω²Cs). Written in real arithmetic with one
/// division, so that the lane loop that calls it per lane vectorizes; the scalar path calls
/// the same function, so both give the same bits.
#[inline(always)]
fn crystal_z_dz(
    rm: f64,
    lm: f64,
    inv_cm: f64,
    c0: f64,
    inv_cs: f64,
    w: f64,
    inv_w: f64,
) -> [f64; 4] {
    let (zr, zi) = (rm, w * lm - inv_cm * inv_w);
    let dzi = lm + inv_cm * inv_w * inv_w;
    // 1/(1 + jωC0·zm)
    let (er, ei) = (1.0 - w * c0 * zi, w * c0 * zr);
    let s = 1.0 / (er * er + ei * ei);
    let (ir, ii) = (er * s, -ei * s);
    let (xr, xi) = (zr * ir - zi * ii, zr * ii + zi * ir);
    // dzm − jC0·zm², over the square of the denominator
    let (qr, qi) = (zr * zr - zi * zi, 2.0 * zr * zi);
    let (nr, ni) = (c0 * qi, dzi - c0 * qr);
    let (i2r, i2i) = (ir * ir - ii * ii, 2.0 * ir * ii);
    let zc = inv_cs * inv_w;
    [
        xr,
        xi - zc,
        nr * i2r - ni * i2i,
        nr * i2i + ni * i2r + zc * inv_w,
    ]
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

    /// The immittance of one precompiled stage at `w` (rad/s) and its ω-derivative: `(true,
    /// Z, dZ/dω)` for a series stage, `(false, Y, dY/dω)` for a shunt one.
    #[inline(always)]
    fn stage_immittance(&self, f: &Fast, w: f64, inv_w: f64) -> (bool, C, C) {
        match *f {
            Fast::SeriesCrystal {
                inv_cs,
                rm,
                lm,
                inv_cm,
                c0,
            } => {
                let [zr, zi, dzr, dzi] = crystal_z_dz(rm, lm, inv_cm, c0, inv_cs, w, inv_w);
                (true, C::new(zr, zi), C::new(dzr, dzi))
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
        }
    }

    /// Analyse at angular frequency `w` (rad/s).
    ///
    /// The chain matrix M = [A B; C D] of the whole ladder is never formed: two column vectors
    /// are carried from the load to the source instead, u = M·[RL; 1] = [A·RL + B; C·RL + D]
    /// with its ω-derivative, and u' = M·[−RL; 1]. A series Z maps [v; i] to [v + Z·i; i], a
    /// shunt Y to [v; i + Y·v]. Then, with Δ = v + Rs·i = A·RL + B + C·Rs·RL + D·Rs:
    /// S21 = 2·√(Rs·RL)/Δ, S11 = (v − Rs·i)/Δ, S22 = (v' + Rs·i')/Δ and the group delay
    /// τ = −d arg S21/dω = Im(dΔ/dω / Δ). (Half the work of multiplying out M.)
    #[inline]
    pub fn response_w(&self, w: f64) -> Response {
        let (rs, rl) = (self.source_ohm, self.load_ohm);
        let zero = C::new(0.0, 0.0);
        let (mut v, mut i, mut dv, mut di) = (C::new(rl, 0.0), C::new(1.0, 0.0), zero, zero);
        let (mut v2, mut i2) = (C::new(-rl, 0.0), C::new(1.0, 0.0));
        let inv_w = 1.0 / w;
        for f in self.fast.iter().rev() {
            let (series, x, dx) = self.stage_immittance(f, w, inv_w);
            if series {
                dv += dx * i + x * di;
                v += x * i;
                v2 += x * i2;
            } else {
                di += dx * v + x * dv;
                i += x * v;
                i2 += x * v2;
            }
        }
        let den = v + i * rs;
        let dden = dv + di * rs;
        let inv = recip(den);
        Response {
            f_hz: w / (2.0 * PI),
            s21: inv * (2.0 * (rs * rl).sqrt()),
            s11: (v - i * rs) * inv,
            s22: (v2 + i2 * rs) * inv,
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

    /// Analyse `LANES` frequencies (Hz) at once (only when [`Ladder::all_fast`]). The lane
    /// loops index several arrays in step, which is what lets them vectorize.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn response_lanes<const S22: bool>(&self, f: &[f64; LANES], out: &mut Rows<'_>, at: usize) {
        let mut w = [0.0; LANES];
        for k in 0..LANES {
            w[k] = 2.0 * PI * f[k];
        }
        let mut inv_w = [0.0; LANES];
        for k in 0..LANES {
            inv_w[k] = 1.0 / w[k];
        }
        // As in `response_w`: two column vectors carried from the load to the source.
        let (rs, rl) = (self.source_ohm, self.load_ohm);
        let zero = Lanes::splat(0.0, 0.0);
        let (mut v, mut i, mut dv, mut di) =
            (Lanes::splat(rl, 0.0), Lanes::splat(1.0, 0.0), zero, zero);
        let (mut v2, mut i2) = (Lanes::splat(-rl, 0.0), Lanes::splat(1.0, 0.0));
        let mut z = zero;
        let mut dz = zero;
        for f in self.fast.iter().rev() {
            match *f {
                Fast::SeriesCrystal {
                    inv_cs,
                    rm,
                    lm,
                    inv_cm,
                    c0,
                } => {
                    for k in 0..LANES {
                        let [zr, zi, dzr, dzi] =
                            crystal_z_dz(rm, lm, inv_cm, c0, inv_cs, w[k], inv_w[k]);
                        z.re[k] = zr;
                        z.im[k] = zi;
                        dz.re[k] = dzr;
                        dz.im[k] = dzi;
                    }
                    // v += z·i with dv += dz·i + z·di; v' += z·i'.
                    mul_add(&mut dv, &dz, &i);
                    mul_add(&mut dv, &z, &di);
                    mul_add(&mut v, &z, &i);
                    if S22 {
                        mul_add(&mut v2, &z, &i2);
                    }
                }
                Fast::ShuntCap { c: cap } => {
                    // i += y·v with y = jωC, dy/dω = jC; i' += y·v'.
                    for k in 0..LANES {
                        let y = w[k] * cap;
                        di.re[k] += -dv.im[k] * y - v.im[k] * cap;
                        di.im[k] += dv.re[k] * y + v.re[k] * cap;
                        i.re[k] += -v.im[k] * y;
                        i.im[k] += v.re[k] * y;
                        if S22 {
                            i2.re[k] += -v2.im[k] * y;
                            i2.im[k] += v2.re[k] * y;
                        }
                    }
                }
                Fast::General { .. } => unreachable!("response_lanes needs an all-fast ladder"),
            }
        }
        let gain = 2.0 * (rs * rl).sqrt();
        for k in 0..LANES {
            let vk = C::new(v.re[k], v.im[k]);
            let ik = C::new(i.re[k] * rs, i.im[k] * rs);
            let den = vk + ik;
            let dden = C::new(dv.re[k] + di.re[k] * rs, dv.im[k] + di.im[k] * rs);
            let inv = recip(den);
            let at = at + k;
            out.f_hz[at].write(f[k]);
            out.s21[at].write(inv * gain);
            out.s11[at].write((vk - ik) * inv);
            if S22 {
                let v2k = C::new(v2.re[k] + i2.re[k] * rs, v2.im[k] + i2.im[k] * rs);
                out.s22[at].write(v2k * inv);
            }
            out.group_delay_s[at].write((dden * inv).im);
        }
    }

    /// The `n` points of the sweep, `LANES` at a time, into `rows` (whose length is `n` rounded
    /// up to a multiple of `LANES`); lanes past point `n - 1` repeat its frequency and are
    /// dropped by the caller. `S22`: whether to compute S22 (else `rows.s22` is not touched).
    #[inline(always)]
    fn chunks<const S22: bool>(&self, n: usize, f_at: &impl Fn(usize) -> f64, rows: &mut Rows<'_>) {
        let mut f = [0.0; LANES];
        let mut at = 0;
        while at < rows.f_hz.len() {
            for (k, fk) in f.iter_mut().enumerate() {
                *fk = f_at((at + k).min(n - 1));
            }
            self.response_lanes::<S22>(&f, rows, at);
            at += LANES;
        }
    }

    /// [`Ladder::chunks`] compiled for AVX2 (4-wide double vectors), chosen at run time; the
    /// portable build stays SSE2. No FMA, so the results are bit-identical to the portable path.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn chunks_avx2<const S22: bool>(
        &self,
        n: usize,
        f_at: &impl Fn(usize) -> f64,
        rows: &mut Rows<'_>,
    ) {
        self.chunks::<S22>(n, f_at, rows)
    }

    /// [`Ladder::chunks`] compiled for AVX-512 (8-wide double vectors, 32 registers: one lane
    /// group per register, so the 16 chain-matrix accumulators stay in registers), chosen at
    /// run time. Still no FMA contraction, so bit-identical to the other paths.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx512f")]
    unsafe fn chunks_avx512<const S22: bool>(
        &self,
        n: usize,
        f_at: &impl Fn(usize) -> f64,
        rows: &mut Rows<'_>,
    ) {
        self.chunks::<S22>(n, f_at, rows)
    }

    /// [`Ladder::chunks`] on the widest vectors this CPU has.
    fn chunks_best<const S22: bool>(
        &self,
        n: usize,
        f_at: &impl Fn(usize) -> f64,
        rows: &mut Rows<'_>,
    ) {
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx512f") {
                // SAFETY: the CPU has just been found to support AVX-512F.
                unsafe { self.chunks_avx512::<S22>(n, f_at, rows) };
                return;
            }
            if std::arch::is_x86_feature_detected!("avx2") {
                // SAFETY: the CPU has just been found to support AVX2.
                unsafe { self.chunks_avx2::<S22>(n, f_at, rows) };
                return;
            }
        }
        self.chunks::<S22>(n, f_at, rows);
    }

    fn sweep_hz(&self, n: usize, f_at: impl Fn(usize) -> f64) -> Sweep {
        let mut out = Sweep::default();
        self.sweep_hz_into(n, f_at, Outputs::All, &mut out);
        out
    }

    /// The sweep into `out`, whose allocations are reused (cleared first, grown if short).
    fn sweep_hz_into(
        &self,
        n: usize,
        f_at: impl Fn(usize) -> f64,
        outputs: Outputs,
        out: &mut Sweep,
    ) {
        let s22 = outputs == Outputs::All;
        out.f_hz.clear();
        out.s21.clear();
        out.s11.clear();
        out.s22.clear();
        out.group_delay_s.clear();
        if !self.all_fast() {
            for i in 0..n {
                let f = f_at(i);
                let mut r = self.response_w(2.0 * PI * f);
                // Report the frequency exactly as given, not as round-tripped through ω.
                r.f_hz = f;
                out.push(r);
            }
            if !s22 {
                out.s22.clear();
            }
            return;
        }
        let padded = n.div_ceil(LANES) * LANES;
        out.f_hz.reserve(padded);
        out.s21.reserve(padded);
        out.s11.reserve(padded);
        if s22 {
            out.s22.reserve(padded);
        }
        out.group_delay_s.reserve(padded);
        // The columns are written in place, left uninitialised until then (zeroing them first
        // would touch every page twice).
        let mut rows = Rows {
            f_hz: &mut out.f_hz.spare_capacity_mut()[..padded],
            s21: &mut out.s21.spare_capacity_mut()[..padded],
            s11: &mut out.s11.spare_capacity_mut()[..padded],
            s22: if s22 {
                &mut out.s22.spare_capacity_mut()[..padded]
            } else {
                &mut []
            },
            group_delay_s: &mut out.group_delay_s.spare_capacity_mut()[..padded],
        };
        if s22 {
            self.chunks_best::<true>(n, &f_at, &mut rows);
        } else {
            self.chunks_best::<false>(n, &f_at, &mut rows);
        }
        // SAFETY: `chunks` has written every one of the first `padded` elements of each column
        // it was given (it covers `0..padded` in whole chunks of `LANES` and writes every lane;
        // S22 only when asked for, and then its column was given); `n <= padded`.
        unsafe {
            out.f_hz.set_len(n);
            out.s21.set_len(n);
            out.s11.set_len(n);
            if s22 {
                out.s22.set_len(n);
            }
            out.group_delay_s.set_len(n);
        }
    }
}

/// The output columns of a run of points, written in place.
struct Rows<'a> {
    f_hz: &'a mut [MaybeUninit<f64>],
    s21: &'a mut [MaybeUninit<Complex64>],
    s11: &'a mut [MaybeUninit<Complex64>],
    s22: &'a mut [MaybeUninit<Complex64>],
    group_delay_s: &'a mut [MaybeUninit<f64>],
}

impl Analyze for Ladder {
    #[inline]
    fn response(&self, f_hz: f64) -> Response {
        self.response_w(2.0 * PI * f_hz)
    }

    fn sweep(&self, grid: &FrequencyGrid) -> Sweep {
        let mut s = Sweep::default();
        self.sweep_into(grid, &mut s);
        s
    }

    fn sweep_into(&self, grid: &FrequencyGrid, out: &mut Sweep) {
        self.sweep_hz_into(grid.points(), |i| grid.at(i), Outputs::All, out);
    }

    fn sweep_outputs_into(&self, grid: &FrequencyGrid, outputs: Outputs, out: &mut Sweep) {
        self.sweep_hz_into(grid.points(), |i| grid.at(i), outputs, out);
    }

    fn sweep_at(&self, f_hz: &[f64]) -> Sweep {
        if f_hz.is_empty() {
            return Sweep::default();
        }
        self.sweep_hz(f_hz.len(), |i| f_hz[i])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{Element, Loss};

    /// An all-fast ladder of `n` unequal crystals with series and shunt capacitors.
    fn ladder(n: usize) -> Ladder {
        let mut stages = Vec::new();
        for i in 0..n {
            let x = crate::crystal::Crystal::from_fs_lm(
                "x",
                9e6 + 17.0 * i as f64,
                15e-3 + 7e-4 * i as f64,
                8.0 + i as f64,
                3.5e-12,
            )
            .unwrap();
            let cs = Branch::Element(Element::Capacitor(
                90e-12 + 5e-12 * i as f64,
                Loss::Lossless,
            ));
            stages.push(Stage::Series(Branch::Series(vec![
                cs,
                Element::Crystal(x).into(),
            ])));
            if i + 1 < n {
                stages.push(Stage::Shunt(Branch::Element(Element::Capacitor(
                    150e-12 + 9e-12 * i as f64,
                    Loss::Lossless,
                ))));
            }
        }
        let lad = Ladder::new(240.0, 310.0, stages).unwrap();
        assert!(lad.all_fast());
        lad
    }

    fn same(a: &Sweep, b: &Sweep) -> bool {
        let bits = |s: &Sweep| -> Vec<u64> {
            s.f_hz
                .iter()
                .chain(&s.group_delay_s)
                .copied()
                .chain(
                    s.s21
                        .iter()
                        .chain(&s.s11)
                        .chain(&s.s22)
                        .flat_map(|z| [z.re, z.im]),
                )
                .map(f64::to_bits)
                .collect()
        };
        bits(a) == bits(b)
    }

    /// Runs `chunks_*` over all points into a fresh sweep (one share).
    fn by(lad: &Ladder, n: usize, run: impl Fn(&Ladder, &mut Rows<'_>)) -> Sweep {
        let padded = n.div_ceil(LANES) * LANES;
        let mut s = Sweep::with_capacity(padded);
        let mut rows = Rows {
            f_hz: &mut s.f_hz.spare_capacity_mut()[..padded],
            s21: &mut s.s21.spare_capacity_mut()[..padded],
            s11: &mut s.s11.spare_capacity_mut()[..padded],
            s22: &mut s.s22.spare_capacity_mut()[..padded],
            group_delay_s: &mut s.group_delay_s.spare_capacity_mut()[..padded],
        };
        run(lad, &mut rows);
        // SAFETY: one share covers all `padded` rows and `chunks` writes every lane.
        unsafe {
            s.f_hz.set_len(n);
            s.s21.set_len(n);
            s.s11.set_len(n);
            s.s22.set_len(n);
            s.group_delay_s.set_len(n);
        }
        s
    }

    #[test]
    fn sweeping_into_a_used_buffer_gives_the_same_bits() {
        let lad = ladder(5);
        let mut out = Sweep::default();
        for points in [1001, 17, 3, 2000] {
            let g = FrequencyGrid::linear(8.999e6, 9.001e6, points).unwrap();
            lad.sweep_into(&g, &mut out);
            assert!(same(&out, &lad.sweep(&g)), "{points} points");
        }
        // The general (per-point) path too: a crystal with a spurious mode.
        let x = crate::crystal::Crystal::from_fs_lm("x", 9e6, 15e-3, 10.0, 3e-12)
            .unwrap()
            .with_spurious(9.05e6, 40e-3, 60.0)
            .unwrap();
        let general =
            Ladder::new(50.0, 50.0, vec![Stage::Series(Element::Crystal(x).into())]).unwrap();
        assert!(!general.all_fast());
        let g = FrequencyGrid::linear(8.99e6, 9.06e6, 301).unwrap();
        general.sweep_into(&g, &mut out);
        assert!(same(&out, &general.sweep(&g)));
    }

    #[test]
    fn leaving_out_s22_changes_nothing_else() {
        let x = crate::crystal::Crystal::from_fs_lm("x", 9e6, 15e-3, 10.0, 3e-12)
            .unwrap()
            .with_spurious(9.05e6, 40e-3, 60.0)
            .unwrap();
        let general =
            Ladder::new(50.0, 50.0, vec![Stage::Series(Element::Crystal(x).into())]).unwrap();
        for lad in [ladder(8), general] {
            for points in [1, 9, 1001] {
                let g = FrequencyGrid::linear(8.999e6, 9.001e6, points).unwrap();
                let all = lad.sweep(&g);
                let mut part = Sweep::default();
                lad.sweep_outputs_into(&g, Outputs::NoS22, &mut part);
                assert!(part.s22.is_empty());
                let mut expect = all.clone();
                expect.s22.clear();
                assert!(same(&part, &expect), "{points} points");
                // And back: a buffer that held a partial sweep takes a full one.
                lad.sweep_outputs_into(&g, Outputs::All, &mut part);
                assert!(same(&part, &all));
            }
        }
    }

    #[test]
    fn every_vector_width_gives_the_same_bits() {
        let lad = ladder(8);
        let n = 1001;
        let f = |i: usize| 8.998e6 + 3.1 * i as f64;
        let portable = by(&lad, n, |l, r| l.chunks::<true>(n, &f, r));
        assert!(same(&portable, &lad.sweep_hz(n, f)));
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx2") {
                // SAFETY: checked just above.
                let v = by(&lad, n, |l, r| unsafe { l.chunks_avx2::<true>(n, &f, r) });
                assert!(same(&portable, &v), "AVX2 path differs");
            }
            if std::arch::is_x86_feature_detected!("avx512f") {
                // SAFETY: checked just above.
                let v = by(&lad, n, |l, r| unsafe { l.chunks_avx512::<true>(n, &f, r) });
                assert!(same(&portable, &v), "AVX-512 path differs");
            }
        }
    }
}

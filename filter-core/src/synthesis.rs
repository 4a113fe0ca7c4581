//! From a target response and the crystals on the bench to every component of the ladder.
//!
//! # The ladder
//! ```text
//! Rs ─[Cs1]─X1─┬─[Cs2]─X2─┬─ … ─┬─[Csn]─Xn─ RL
//!              C12        C23       C(n−1,n)
//!              ⏚          ⏚         ⏚
//! ```
//!
//! # Method (reactance-slope parameters, after Matthaei, Young & Jones [1, §8.02, §8.11])
//! Each crystal with its series capacitor is a series resonator. A shunt capacitor C to ground
//! is an impedance inverter K = 1/(ω0·C) plus a capacitor +C in series with each of the two
//! resonators beside it [1, fig. 8.03-1]. So each *mesh* (crystal i, its series capacitor and
//! the shunt capacitors on both sides, in series via ground) must resonate at the common centre
//! ω0, including C0 and spurious modes of that crystal:
//!
//! ```text
//! X_i(ω0) = 1/(ω0·Cs_i) + K(i−1,i) + K(i,i+1)
//! K(i,i+1) = w·sqrt(x_i·x_(i+1) / (g_i·g_(i+1)))
//! R_source = x_1·w / (g0·g1),   R_load = x_n·w / (g_n·g_(n+1))
//! ```
//!
//! where X_i is the crystal's reactance, x_i = (ω/2)·dX_i/dω its reactance slope parameter
//! (both at ω0 and with C0: C0 raises the slope by about (1 + ω0·C0·X)²), g the lowpass
//! prototype and w the fractional bandwidth the g-values are normalized to (the ripple
//! bandwidth for Chebyshev, the −3 dB bandwidth for Butterworth).
//!
//! A series capacitor must be positive (or absent), so every mesh needs X_i ≥ K(i−1,i) +
//! K(i,i+1). X_i grows with frequency above fs, so the centre is chosen as the **lowest**
//! frequency at which every mesh can be tuned; the critical mesh then has no series capacitor.
//! Because C0 makes both X and x grow towards fp, a solution exists only while the ripple
//! bandwidth is below about (fp − fs)/(2κ), κ the largest k(i−1,i) + k(i,i+1) of the prototype
//! (k = 1/sqrt(g·g)): the realizability limit.
//!
//! When the crystals have motional resistance, the end meshes' Rm is taken out of the
//! terminations so that the loaded Q of the end resonators stays as the prototype wants.
//! With `predistort`, the prototype's poles are first moved right by the crystals' normalized
//! dissipation 1/q0 (q0 = Qu·w) and the predistorted prototype is realized; its response then
//! has the ideal shape with a flat extra loss [2, §4.13].
//!
//! # References
//! 1. G. L. Matthaei, L. Young, E. M. T. Jones, *Microwave Filters, Impedance-Matching Networks,
//!    and Coupling Structures*, McGraw-Hill, 1964.
//! 2. A. I. Zverev, *Handbook of Filter Synthesis*, Wiley, 1967.
//! 3. S. B. Cohn, "Dissipation loss in multiple-coupled-resonator filters", Proc. IRE 47, 1959.
//! 4. M. Dishal, "Design of dissipative band-pass filters producing desired exact amplitude-
//!    frequency characteristics", Proc. IRE 37, 1949.

mod refine;

use crate::crystal::Crystal;
use crate::design::{
    ladder_from_parts, BandwidthAt, Design, DesignSpec, ResponseFamily, DESIGN_SCHEMA_VERSION,
};
use crate::error::{require_positive, Error, ErrorKind, Result};
use crate::metrics::{evaluate, Performance};
use crate::network::{Analyze, Branch, Element, Ladder, Loss, Stage};
use crate::prototype::{Family, Prototype, MAX_ORDER};
use nalgebra::DMatrix;
use num_complex::Complex64;
use std::f64::consts::PI;

/// Terminations outside this range are refused (a builder cannot use them sensibly).
pub const TERMINATION_RANGE_OHM: (f64, f64) = (1.0, 100e3);

/// A request for a ladder design: response, order, bandwidth and the crystals, in signal order.
#[derive(Debug, Clone, PartialEq)]
pub struct LadderSpec {
    /// The response family.
    pub family: ResponseFamily,
    /// The bandwidth, Hz.
    pub bandwidth_hz: f64,
    /// Which bandwidth `bandwidth_hz` is.
    pub bandwidth_at: BandwidthAt,
    /// Predistort the prototype for the crystals' Qu.
    pub predistort: bool,
    /// Refine the values on the exact model.
    pub refine: bool,
    /// The crystals, one per position; the order is their number.
    pub crystals: Vec<Crystal>,
}

/// The lowpass prototype a design realizes, with the figures the realization needs.
#[derive(Debug, Clone)]
pub(crate) struct LowpassData {
    pub g: Vec<f64>,
    pub poles: Vec<Complex64>,
    /// Normalized −3 dB and −6 dB frequencies.
    pub w3: f64,
    pub w6: f64,
}

impl LadderSpec {
    /// The same crystal at every one of `order` positions (ids get a position suffix).
    pub fn identical(
        family: ResponseFamily,
        order: usize,
        bandwidth_hz: f64,
        bandwidth_at: BandwidthAt,
        crystal: &Crystal,
    ) -> Self {
        let crystals = (1..=order)
            .map(|i| {
                let mut c = crystal.clone();
                c.id = format!("{}{}", crystal.id, i);
                c
            })
            .collect();
        LadderSpec {
            family,
            bandwidth_hz,
            bandwidth_at,
            predistort: false,
            refine: false,
            crystals,
        }
    }

    /// Synthesize the ladder: prototype, centre, couplings, tuning, terminations, predicted
    /// performance, and (when asked) refinement.
    ///
    /// # Errors
    /// A bad spec (order, bandwidth, ripple), an unrealizable bandwidth for these crystals,
    /// terminations out of range, q0 ≤ q_min with predistortion; each error says what to change.
    pub fn synthesize(&self) -> Result<Design> {
        let n = self.crystals.len();
        if n == 0 || n > MAX_ORDER {
            return Err(Error::invalid(
                "order",
                n,
                &format!("1 to {MAX_ORDER} crystals"),
            ));
        }
        require_positive("bandwidth", self.bandwidth_hz)?;
        let lp = lowpass(&self.family, n)?;
        let w_at = match self.bandwidth_at {
            BandwidthAt::Db3 => lp.w3,
            BandwidthAt::Db6 => lp.w6,
            BandwidthAt::Ripple => match self.family {
                ResponseFamily::Chebyshev { .. } => 1.0,
                _ => {
                    return Err(Error::invalid(
                        "bandwidth-at",
                        "ripple",
                        "3db or 6db for a response without passband ripple",
                    ))
                }
            },
        };
        // The bandwidth at which the prototype's normalized frequency is 1.
        let b_norm = self.bandwidth_hz / w_at;
        let qu = mean_qu(&self.crystals);
        let mut warnings = Vec::new();
        let mut lp_used = lp.clone();
        let fs_max = self.crystals.iter().map(|c| c.fs_hz()).fold(0.0, f64::max);
        let q_min_proto = 1.0
            / lp.poles
                .iter()
                .map(|p| p.re.abs())
                .fold(f64::INFINITY, f64::min);
        if self.predistort {
            if !qu.is_finite() {
                return Err(Error::invalid(
                    "predistort",
                    "crystals with Rm = 0",
                    "crystals with a finite Qu (Rm > 0); lossless crystals need no predistortion",
                ));
            }
            if matches!(self.family, ResponseFamily::EqualC) {
                return Err(Error::invalid(
                    "predistort",
                    "equal-c",
                    "a family defined by its poles (butterworth, chebyshev, bessel, gaussian, legendre)",
                ));
            }
            let q0 = qu * b_norm / fs_max;
            if q0 <= q_min_proto {
                return Err(Error::unrealizable(format!(
                    "predistortion needs normalized crystal Q q0 = Qu·w = {q0:.3} above q_min = {q_min_proto:.3}"
                ))
                .with_hint(format!(
                    "use a bandwidth above {:.0} Hz, crystals with Qu above {:.0}, a lower order, or a gentler family (Bessel, Gaussian)",
                    self.bandwidth_hz * q_min_proto / q0,
                    qu * q_min_proto / q0
                )));
            }
            let pre = predistorted(&self.family, n, 1.0 / q0)?;
            lp_used = LowpassData {
                w3: lp.w3,
                w6: lp.w6,
                ..pre
            };
        }
        let tuned = tune(&self.crystals, &lp_used.g, b_norm, !self.predistort)?;
        check_terminations(tuned.source_ohm, tuned.load_ohm)?;
        let f0 = tuned.center_hz;
        // k and q on the half-power scale of the published k–q tables (|S21|² = 1/2, i.e.
        // 3.0103 dB; the metrics' "−3 dB" is 3.000 dB by this project's convention).
        let w3 = frequency_at_loss(&lp.g, 10.0 * 2f64.log10())?;
        let (k, q) = coupling_and_q(&lp_used.g, w3);
        let q_min = q_min_proto * w3;
        let b3 = b_norm * w3;
        let q0 = (qu.is_finite()).then(|| qu * b3 / f0);
        let cohn = qu
            .is_finite()
            .then(|| 4.343 * lp.g[1..=n].iter().sum::<f64>() / (qu * b_norm / f0));
        if let Some(q0) = q0 {
            if !self.predistort && q0 < 2.0 * q_min {
                warnings.push(format!(
                    "crystal Q is marginal for this response: q0 = {q0:.2} is below 2·q_min = {:.2}; expect rounded corners and extra loss (consider --predistort or a wider bandwidth)",
                    2.0 * q_min
                ));
            } else if self.predistort && q0 < 2.0 * q_min {
                warnings.push(format!(
                    "q0 = {q0:.2} is below 2·q_min = {:.2}: the predistorted design has a high flat loss and is sensitive to Qu",
                    2.0 * q_min
                ));
            }
        }
        let spread = fp_minus_fs(&self.crystals);
        if b_norm > 0.17 * spread {
            warnings.push(format!(
                "bandwidth is large for these crystals ({:.0} Hz against fp − fs = {:.0} Hz): the skirts are strongly asymmetric; refinement is advised",
                b_norm, spread
            ));
        }
        let mut design = Design {
            schema_version: DESIGN_SCHEMA_VERSION,
            spec: DesignSpec {
                family: self.family.clone(),
                order: n,
                bandwidth_hz: self.bandwidth_hz,
                bandwidth_at: self.bandwidth_at,
                predistort: self.predistort,
                refine: self.refine,
            },
            center_hz: f0,
            source_ohm: tuned.source_ohm,
            load_ohm: tuned.load_ohm,
            crystals: self.crystals.clone(),
            shunt_caps_f: tuned.shunt_caps_f,
            series_caps_f: tuned.series_caps_f,
            k,
            q,
            g: lp_used.g.clone(),
            q_min,
            q0,
            cohn_loss_db: cohn,
            performance: placeholder_performance(),
            warnings,
            refinement: None,
        };
        // The −3 dB width asked for (3.000 dB scale), which sizes the analysis windows.
        let b3_target = b_norm * lp.w3;
        design.performance = predict_ladder(&design.to_ladder()?, f0, b3_target)?;
        if self.refine {
            refine::refine(&mut design, &lp_used, b_norm, b3_target).map_err(|e| {
                if e.kind() == ErrorKind::Numerical {
                    // Say what the user can do: the plain synthesis is still available.
                    Error::unrealizable(format!(
                        "refinement on the exact model did not succeed for this request ({})",
                        e.message()
                    ))
                    .with_hint(
                        "design without --refine, or with a narrower bandwidth or a lower order",
                    )
                } else {
                    e
                }
            })?;
        }
        check_against_spec(&mut design, b_norm, &lp)?;
        Ok(design)
    }
}

fn placeholder_performance() -> Performance {
    Performance {
        insertion_loss_db: 0.0,
        ripple_db: 0.0,
        bw_3db_hz: 0.0,
        bw_6db_hz: 0.0,
        bw_60db_hz: None,
        shape_factor_60_6: None,
        center_hz: 0.0,
        return_loss_db: 0.0,
        edges_3db_hz: [0.0; 2],
        edges_6db_hz: [0.0; 2],
        edges_60db_hz: None,
        group_delay_center_s: 0.0,
        group_delay_variation_s: 0.0,
    }
}

/// Predicted performance of a design on the exact model, with the analysis window chosen
/// from the design's own bandwidth.
///
/// # Errors
/// When the analysis finds no passband (a broken record).
pub fn predict(design: &Design) -> Result<Performance> {
    let ladder = design.to_ladder()?;
    predict_ladder(&ladder, design.center_hz, nominal_b3(design))
}

/// The −3 dB bandwidth the design was asked for, Hz (used to size analysis windows).
pub fn nominal_b3(design: &Design) -> f64 {
    match lowpass(&design.spec.family, design.order()) {
        Ok(lp) => match design.spec.bandwidth_at {
            BandwidthAt::Db3 => design.spec.bandwidth_hz,
            BandwidthAt::Db6 => design.spec.bandwidth_hz * lp.w3 / lp.w6,
            BandwidthAt::Ripple => design.spec.bandwidth_hz * lp.w3,
        },
        Err(_) => design.spec.bandwidth_hz,
    }
}

/// Predicted performance of a ladder whose mesh-tuning centre is `f0` and whose −3 dB width is
/// about `b3` (it sizes the analysis window).
///
/// # Errors
/// When no passband of about that width lies in the window.
pub fn predict_ladder(ladder: &Ladder, f0: f64, b3: f64) -> Result<Performance> {
    // The passband lies within about a bandwidth of the mesh-tuning centre; the skirt search
    // in `evaluate` walks further out for the −60 dB points.
    let half = 2.5 * b3;
    // ~120 points per bandwidth: ten or more per ripple at order 12; every crossing and
    // extremum is then refined on the circuit itself.
    evaluate(ladder, f0 - half, f0 + half, 601).map_err(|e| {
        // The window is the design's own, so a passband that does not fit in it ("sweep
        // range", or a band lost while refining the crossings) means the ladder is nothing
        // like the bandwidth asked for (typically tuned past the crystals' limit, where the
        // meshes only resonate close to fp); the window is not the user's. Other errors
        // (component values out of range) pass through.
        let window = e.kind() == ErrorKind::Numerical || e.message().starts_with("sweep range");
        if !window {
            return e;
        }
        Error::unrealizable(format!(
            "the ladder has no passband of about {b3:.1} Hz (−3 dB) within {half:.1} Hz of its centre {f0:.1} Hz ({})",
            e.message()
        ))
        .with_hint("the crystals cannot hold this bandwidth: use a narrower bandwidth, a lower order, or crystals with a larger Cm/C0 ratio")
    })
}

/// Relative shortfall of the analysed bandwidth beyond which a request over the crystals'
/// limit is refused rather than returned with a warning.
const REFUSED_SHORTFALL: f64 = 0.3;

fn check_against_spec(design: &mut Design, b_norm: f64, lp: &LowpassData) -> Result<()> {
    let p = &design.performance;
    if matches!(design.spec.family, ResponseFamily::EqualC) && p.ripple_db > 1.0 {
        design.warnings.push(format!(
            "an equal-capacitor ladder of order {} has {:.1} dB of passband ripple (inherent with equal couplings); a chebyshev design with unequal couplings avoids it",
            design.order(),
            p.ripple_db
        ));
    }
    let (got, level) = match design.spec.bandwidth_at {
        BandwidthAt::Db3 => (p.bw_3db_hz, "−3 dB"),
        BandwidthAt::Db6 => (p.bw_6db_hz, "−6 dB"),
        BandwidthAt::Ripple => (p.bw_3db_hz / lp.w3, "ripple (from −3 dB)"),
    };
    let err = got / design.spec.bandwidth_hz - 1.0;
    // A mesh tuning can exist beyond the (fp − fs)/(2κ) limit (near fp), but the ladder it
    // gives is far narrower than asked: past the limit, a large shortfall is an error.
    let limit = bandwidth_limit_hz(&design.crystals, &design.g);
    let over_limit = limit.is_finite() && b_norm > limit;
    if over_limit && err < -REFUSED_SHORTFALL {
        let e = unrealizable_error(&design.crystals, &design.g, b_norm);
        return Err(Error::unrealizable(format!(
            "{} (the nearest tuning gives a {level} bandwidth of {got:.0} Hz, {:.0} % of the {:.0} Hz asked for)",
            e.message(),
            100.0 * got / design.spec.bandwidth_hz,
            design.spec.bandwidth_hz
        ))
        .with_hint("use a narrower bandwidth, a lower order, crystals with a larger Cm/C0 ratio, or a family with weaker couplings (Bessel, Gaussian)"));
    }
    if err.abs() > 0.02 {
        let advice = if over_limit {
            format!(
                "; the request is beyond what these crystals allow (about {limit:.0} Hz at the prototype edge, {b_norm:.0} Hz needed): a narrower bandwidth or a lower order gets closer"
            )
        } else if design.spec.refine {
            String::new()
        } else {
            "; --refine corrects this on the exact model".to_string()
        };
        design.warnings.push(format!(
            "the analysed {level} bandwidth is {got:.1} Hz, {:+.1} % from the {:.1} Hz asked for{advice}",
            100.0 * err,
            design.spec.bandwidth_hz,
        ));
    }
    if let ResponseFamily::Chebyshev { ripple_db } = design.spec.family {
        if !design.spec.predistort && p.ripple_db > ripple_db * 1.5 + 0.05 {
            design.warnings.push(format!(
                "the analysed ripple is {:.2} dB against {ripple_db} dB asked for{}",
                p.ripple_db,
                if design.spec.refine {
                    ""
                } else {
                    "; --refine corrects this"
                }
            ));
        }
    }
    Ok(())
}

fn mean_qu(crystals: &[Crystal]) -> f64 {
    let s: f64 = crystals.iter().map(|c| 1.0 / c.qu()).sum();
    crystals.len() as f64 / s
}

fn fp_minus_fs(crystals: &[Crystal]) -> f64 {
    crystals
        .iter()
        .map(|c| c.fp_hz() - c.fs_hz())
        .fold(f64::INFINITY, f64::min)
}

fn check_terminations(rs: f64, rl: f64) -> Result<()> {
    let (lo, hi) = TERMINATION_RANGE_OHM;
    for (name, r) in [("source termination", rs), ("load termination", rl)] {
        if !(r.is_finite() && (lo..=hi).contains(&r)) {
            return Err(Error::unrealizable(format!(
                "the {name} would be {r:.3} Ω, outside {lo} Ω to {} kΩ",
                hi / 1e3
            ))
            .with_hint(
                "a wider bandwidth raises the terminations, a narrower one lowers them; crystals with lower Rm or a matching network also help",
            ));
        }
    }
    Ok(())
}

/// k(i,i+1) and [q_in, q_out] for prototype `g`, normalized so that `w_ref` is the bandwidth.
pub(crate) fn coupling_and_q(g: &[f64], w_ref: f64) -> (Vec<f64>, [f64; 2]) {
    let n = g.len() - 2;
    let k = (1..n)
        .map(|i| 1.0 / (w_ref * (g[i] * g[i + 1]).sqrt()))
        .collect();
    (k, [g[0] * g[1] * w_ref, g[n] * g[n + 1] * w_ref])
}

/// The lowpass prototype for a family: g-values, poles and its −3/−6 dB frequencies.
pub(crate) fn lowpass(family: &ResponseFamily, n: usize) -> Result<LowpassData> {
    let (g, poles) = match family {
        ResponseFamily::EqualC => {
            let g = vec![1.0; n + 2];
            let poles = poles_of_ladder(&g)?;
            (g, poles)
        }
        other => {
            let p = to_family(other)?.prototype(n)?;
            (p.g, p.poles)
        }
    };
    let w3 = frequency_at_loss(&g, 3.0)?;
    let w6 = frequency_at_loss(&g, 6.0)?;
    Ok(LowpassData { g, poles, w3, w6 })
}

fn predistorted(family: &ResponseFamily, n: usize, d: f64) -> Result<LowpassData> {
    let p: Prototype = to_family(family)?.prototype(n)?.predistorted(d)?;
    let w3 = frequency_at_loss(&p.g, 3.0)?;
    let w6 = frequency_at_loss(&p.g, 6.0)?;
    Ok(LowpassData {
        g: p.g,
        poles: p.poles,
        w3,
        w6,
    })
}

fn to_family(f: &ResponseFamily) -> Result<Family> {
    Ok(match f {
        ResponseFamily::Butterworth => Family::Butterworth,
        ResponseFamily::Chebyshev { ripple_db } => Family::Chebyshev {
            ripple_db: *ripple_db,
        },
        ResponseFamily::Bessel => Family::Bessel,
        ResponseFamily::Gaussian => Family::Gaussian,
        ResponseFamily::Legendre => Family::Legendre,
        ResponseFamily::Poles { re, im } => {
            if re.len() != im.len() {
                return Err(Error::invalid(
                    "poles",
                    format!("{} real and {} imaginary parts", re.len(), im.len()),
                    "as many imaginary parts as real parts",
                ));
            }
            Family::Poles(
                re.iter()
                    .zip(im)
                    .map(|(&a, &b)| Complex64::new(a, b))
                    .collect(),
            )
        }
        ResponseFamily::EqualC => {
            return Err(Error::invalid("family", "equal-c", "a pole-defined family"))
        }
    })
}

/// The lowpass LC ladder of prototype `g` (g1 a shunt capacitor), for analysis at ω = 2π·f,
/// with uniform dissipation `d` (s → s + d: a conductance g·d across each capacitor, a
/// resistance g·d in series with each inductor); `d = 0` gives the lossless prototype.
pub(crate) fn lowpass_ladder(g: &[f64], d: f64) -> Result<Ladder> {
    let n = g.len() - 2;
    let mut stages = Vec::with_capacity(n + 1);
    for (i, &gi) in g[1..=n].iter().enumerate() {
        if i % 2 == 0 {
            let c = Branch::Element(Element::Capacitor(gi, Loss::Lossless));
            stages.push(Stage::Shunt(if d > 0.0 {
                Branch::Parallel(vec![c, Branch::Element(Element::Resistor(1.0 / (gi * d)))])
            } else {
                c
            }));
        } else {
            let l = Branch::Element(Element::Inductor(gi, Loss::Lossless));
            stages.push(Stage::Series(if d > 0.0 {
                Branch::Series(vec![l, Branch::Element(Element::Resistor(gi * d))])
            } else {
                l
            }));
        }
    }
    // g(n+1) is a resistance after a shunt capacitor, a conductance after a series inductor.
    let load = if n % 2 == 1 { g[n + 1] } else { 1.0 / g[n + 1] };
    if n == 1 {
        // A lone shunt capacitor has no series stage; a zero-ohm series stage keeps the cascade
        // well formed without changing it.
        stages.push(Stage::Series(Branch::Element(Element::Resistor(0.0))));
    }
    Ladder::new(g[0], load, stages)
}

/// Loss in dB of prototype ladder `g` at normalized frequency `w`, relative to full power.
pub(crate) fn lowpass_loss_db(lad: &Ladder, w: f64) -> f64 {
    -crate::network::db(lad.response_w(w).s21)
}

/// The highest normalized frequency at which the prototype's loss is `loss_db` below its peak.
pub(crate) fn frequency_at_loss(g: &[f64], loss_db: f64) -> Result<f64> {
    let lad = lowpass_ladder(g, 0.0)?;
    // 2.3 % steps over five decades, then bisection: prototype responses are smooth on that
    // scale beyond the last ripple.
    let steps = 500;
    let (lo, hi): (f64, f64) = (1e-3, 1e2);
    let at = |k: usize| lo * (hi / lo).powf(k as f64 / steps as f64);
    let mut peak = f64::INFINITY;
    for k in 0..=steps {
        peak = peak.min(lowpass_loss_db(&lad, at(k)));
    }
    let level = peak + loss_db;
    let mut last_below = None;
    for k in 0..steps {
        if lowpass_loss_db(&lad, at(k)) <= level {
            last_below = Some(k);
        }
    }
    let k = last_below.ok_or_else(|| Error::numerical("prototype response has no passband"))?;
    if k + 1 > steps {
        return Err(Error::numerical(
            "prototype passband extends beyond the search range",
        ));
    }
    let (mut a, mut b) = (at(k), at(k + 1));
    for _ in 0..80 {
        let m = 0.5 * (a + b);
        if lowpass_loss_db(&lad, m) <= level {
            a = m;
        } else {
            b = m;
        }
    }
    Ok(0.5 * (a + b))
}

/// Poles of a prototype ladder `g`: roots of Δ(s) = A·RL + B + C·Rs·RL + D·Rs.
fn poles_of_ladder(g: &[f64]) -> Result<Vec<Complex64>> {
    let n = g.len() - 2;
    // Polynomials in s, lowest power first.
    let mul = |a: &[f64], b: &[f64]| {
        let mut r = vec![0.0; a.len() + b.len() - 1];
        for (i, x) in a.iter().enumerate() {
            for (j, y) in b.iter().enumerate() {
                r[i + j] += x * y;
            }
        }
        r
    };
    let add = |a: &[f64], b: &[f64]| {
        let mut r = vec![0.0; a.len().max(b.len())];
        for (i, x) in a.iter().enumerate() {
            r[i] += x;
        }
        for (i, y) in b.iter().enumerate() {
            r[i] += y;
        }
        r
    };
    let (mut a, mut b, mut c, mut d) = (vec![1.0], vec![0.0], vec![0.0], vec![1.0]);
    for (i, &gi) in g[1..=n].iter().enumerate() {
        let e = vec![0.0, gi];
        if i % 2 == 0 {
            // shunt C: [a + b·y, b; c + d·y, d]
            a = add(&a, &mul(&b, &e));
            c = add(&c, &mul(&d, &e));
        } else {
            b = add(&b, &mul(&a, &e));
            d = add(&d, &mul(&c, &e));
        }
    }
    let rl = if n % 2 == 1 { g[n + 1] } else { 1.0 / g[n + 1] };
    let rs = g[0];
    let scale = |p: &[f64], k: f64| p.iter().map(|x| x * k).collect::<Vec<_>>();
    let den = add(
        &add(&scale(&a, rl), &b),
        &add(&scale(&c, rs * rl), &scale(&d, rs)),
    );
    polynomial_roots(&den)
}

/// Roots of a real polynomial (lowest power first) from its companion matrix.
pub(crate) fn polynomial_roots(p: &[f64]) -> Result<Vec<Complex64>> {
    let mut p = p.to_vec();
    while p.len() > 1 && p[p.len() - 1] == 0.0 {
        p.pop();
    }
    let deg = p.len() - 1;
    if deg == 0 {
        return Ok(Vec::new());
    }
    let lead = p[deg];
    let mut m = DMatrix::<f64>::zeros(deg, deg);
    for i in 1..deg {
        m[(i, i - 1)] = 1.0;
    }
    for i in 0..deg {
        m[(i, deg - 1)] = -p[i] / lead;
    }
    let roots: Vec<Complex64> = m.complex_eigenvalues().iter().copied().collect();
    if roots.iter().any(|r| !r.re.is_finite() || !r.im.is_finite()) {
        return Err(Error::numerical("polynomial roots did not converge"));
    }
    Ok(roots)
}

/// The result of mesh tuning: centre, capacitors and terminations.
#[derive(Debug, Clone)]
pub(crate) struct Tuned {
    pub center_hz: f64,
    pub shunt_caps_f: Vec<f64>,
    pub series_caps_f: Vec<Option<f64>>,
    pub source_ohm: f64,
    pub load_ohm: f64,
}

/// Mesh tuning by the slope-parameter method for prototype `g` and bandwidth `b_norm` (Hz at
/// normalized frequency 1). `subtract_rm` takes the end crystals' Rm out of the terminations.
pub(crate) fn tune(
    crystals: &[Crystal],
    g: &[f64],
    b_norm: f64,
    subtract_rm: bool,
) -> Result<Tuned> {
    let n = crystals.len();
    let equal_c = g.len() == n + 2
        && g[1..=n].iter().all(|&x| x == 1.0)
        && g[0] == 1.0
        && g[n + 1] == 1.0
        && n > 2;
    // Margin of the tightest mesh at a trial centre: min_i X_i − ΣK (Ω). Every mesh can be
    // tuned with a positive (or no) series capacitor when it is ≥ 0.
    let inverters = |f: f64| -> Vec<f64> {
        let w = b_norm / f;
        let x: Vec<f64> = crystals.iter().map(|c| c.reactance_slope(f)).collect();
        if equal_c {
            let xm = x.iter().sum::<f64>() / n as f64;
            vec![w * xm; n - 1]
        } else {
            (0..n.saturating_sub(1))
                .map(|i| w * (x[i] * x[i + 1] / (g[i + 1] * g[i + 2])).sqrt())
                .collect()
        }
    };
    let margins = |f: f64| -> Vec<f64> {
        let k = inverters(f);
        (0..n)
            .map(|i| {
                let mut m = crystals[i].impedance(f).im;
                if i > 0 {
                    m -= k[i - 1];
                }
                if i + 1 < n {
                    m -= k[i];
                }
                m
            })
            .collect()
    };
    let h = |f: f64| margins(f).into_iter().fold(f64::INFINITY, f64::min);
    let fs_max = crystals.iter().map(|c| c.fs_hz()).fold(0.0, f64::max);
    let fp_min = crystals
        .iter()
        .map(|c| c.fp_hz())
        .fold(f64::INFINITY, f64::min);
    let f_hi = fp_min.min(fs_max * 1.05);
    let span = f_hi - fs_max;
    // Offsets from fs_max, log-spaced from 1e-9 of the span (13 % steps); the margin is
    // smooth and rises then falls, so a coarse scan finds the first feasible step, and a
    // golden-section search finds a narrow feasible window the scan stepped over.
    let steps = 160;
    let at = |k: usize| fs_max + span * 1e-9f64.powf(1.0 - k as f64 / steps as f64);
    let mut found = None;
    let mut best = (f64::NEG_INFINITY, 0usize);
    for k in 0..=steps {
        let v = h(at(k));
        if v > best.0 {
            best = (v, k);
        }
        if v >= 0.0 {
            found = Some((at(k.saturating_sub(1)), at(k)));
            break;
        }
    }
    if found.is_none() {
        let k = best.1;
        let (mut a, mut b) = (at(k.saturating_sub(1)), at((k + 1).min(steps)));
        for _ in 0..100 {
            let m1 = b - 0.618_033_988_749_895 * (b - a);
            let m2 = a + 0.618_033_988_749_895 * (b - a);
            if h(m1) > h(m2) {
                b = m2;
            } else {
                a = m1;
            }
        }
        let top = 0.5 * (a + b);
        if h(top) >= 0.0 {
            found = Some((at(k.saturating_sub(1)), top));
        }
    }
    let (lo, hi) = match found {
        Some(x) => x,
        None => return Err(unrealizable_error(crystals, g, b_norm)),
    };
    let mut f0 = hi;
    if h(lo) < 0.0 {
        let (mut a, mut b) = (lo, hi);
        for _ in 0..100 {
            let m = 0.5 * (a + b);
            if h(m) >= 0.0 {
                b = m;
            } else {
                a = m;
            }
        }
        f0 = b;
    }
    let w0 = 2.0 * PI * f0;
    let kk = inverters(f0);
    let m = margins(f0);
    let series_caps_f = m
        .iter()
        .enumerate()
        .map(|(i, &mi)| {
            let x = crystals[i].impedance(f0).im.abs();
            if mi <= 1e-9 * x {
                None
            } else {
                Some(1.0 / (w0 * mi))
            }
        })
        .collect();
    let shunt_caps_f = kk.iter().map(|k| 1.0 / (w0 * k)).collect();
    let w = b_norm / f0;
    let x1 = crystals[0].reactance_slope(f0);
    let xn = crystals[n - 1].reactance_slope(f0);
    let mut rs = x1 * w / (g[0] * g[1]);
    let mut rl = xn * w / (g[n] * g[n + 1]);
    if subtract_rm {
        rs -= crystals[0].rm_ohm();
        rl -= crystals[n - 1].rm_ohm();
    }
    Ok(Tuned {
        center_hz: f0,
        shunt_caps_f,
        series_caps_f,
        source_ohm: rs,
        load_ohm: rl,
    })
}

/// The ripple-bandwidth limit (fp − fs)/(2κ) for these crystals and prototype, Hz.
pub fn bandwidth_limit_hz(crystals: &[Crystal], g: &[f64]) -> f64 {
    let n = crystals.len();
    let mut kappa: f64 = 0.0;
    for i in 1..=n {
        let mut s = 0.0;
        if i > 1 {
            s += 1.0 / (g[i - 1] * g[i]).sqrt();
        }
        if i < n {
            s += 1.0 / (g[i] * g[i + 1]).sqrt();
        }
        kappa = kappa.max(s);
    }
    fp_minus_fs(crystals) / (2.0 * kappa)
}

fn unrealizable_error(crystals: &[Crystal], g: &[f64], b_norm: f64) -> Error {
    // A crystal is inductive somewhere only while 2·Rm·ω·C0 < 1: Im(1/Z) = ω·C0 − X/(Rm² + X²)
    // and X/(Rm² + X²) peaks at 1/(2·Rm). A crystal that never is cannot be tuned at any
    // bandwidth, so say that rather than quote a bandwidth limit.
    for c in crystals {
        let product = 2.0 * c.rm_ohm() * 2.0 * PI * c.fs_hz() * c.c0_f;
        if product >= 1.0 {
            return Error::unrealizable(format!(
                "crystal '{}' is never inductive, so no mesh can be tuned with it: 2·Rm·ω·C0 = {product:.3} at fs (Rm = {:.1} Ω, C0 = {:.3} pF) must be below 1",
                c.id,
                c.rm_ohm(),
                c.c0_f * 1e12
            ))
            .with_hint("use crystals with a lower Rm (a higher Qu) or a smaller C0");
        }
    }
    let limit = bandwidth_limit_hz(crystals, g);
    if !limit.is_finite() {
        // One crystal (no coupling) or C0 = 0 (no fp): no fp − fs limit applies.
        return Error::unrealizable(format!(
            "the crystals cannot be tuned for this bandwidth: no frequency up to 5 % above fs lets every mesh resonate at a prototype-edge bandwidth of {b_norm:.0} Hz"
        ))
        .with_hint("use a narrower bandwidth or a lower order");
    }
    Error::unrealizable(format!(
        "the crystals cannot be tuned for this bandwidth: it needs a prototype-edge bandwidth of {b_norm:.0} Hz, but these crystals (fp − fs = {:.0} Hz) allow about {limit:.0} Hz",
        fp_minus_fs(crystals)
    ))
    .with_hint("use a narrower bandwidth, a lower order, crystals with a larger Cm/C0 ratio, or a family with weaker couplings (Bessel, Gaussian)")
}

/// The ladder of a design with its capacitors given explicitly (used by refinement and re-tuning).
pub(crate) fn ladder_of(
    crystals: &[Crystal],
    series: &[Option<f64>],
    shunt: &[f64],
    rs: f64,
    rl: f64,
) -> Result<Ladder> {
    ladder_from_parts(crystals, series, shunt, rs, rl, Loss::Lossless)
}

/// Analyse a design at one frequency (convenience for callers that hold a design).
///
/// # Errors
/// As [`Design::to_ladder`].
pub fn response_at(design: &Design, f_hz: f64) -> Result<crate::network::Response> {
    Ok(design.to_ladder()?.response(f_hz))
}

#[cfg(test)]
mod tests;

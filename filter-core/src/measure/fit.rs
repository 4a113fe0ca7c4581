//! Least-squares fit of the BVD model to a series-fixture sweep (parent module docs).

mod lm;
mod model;
mod noise;
mod spur;

use super::{fmt_hz, peak_shift_hz, FixtureSpec};
use crate::crystal::Crystal;
use crate::error::{require_positive, Error, Result};
use crate::io::MeasuredTrace;
use lm::{levenberg_marquardt, LmOut, Problem};
use model::{
    Branch, Data, Model, Params, Scale, I_C0, I_PHASE, I_SLOPE, MAX_SPURS, NPMAX, NP_MAIN,
};
use noise::{initial_noise, model_db, reestimate_noise, sigma_db, smooth, Noise};
use num_complex::Complex64;
use spur::Candidate;
use std::f64::consts::PI;
use std::fmt;

/// Points more than this far below the peak are weighted as if at the noise floor (amplitude
/// ratio, 60 dB).
const DEEP_FLOOR: f64 = 1e-3;
/// A point is counted in the rms residual when it lies this many dB above the noise floor
/// (there, noise alone scatters the level by at most 0.3 dB).
const RMS_ABOVE_FLOOR_DB: f64 = 26.0;
/// rms residual above which the fit is reported as poor, dB.
const POOR_FIT_DB: f64 = 0.5;
/// Standard sweep lengths offered in recommendations.
const STANDARD_POINTS: [usize; 9] = [201, 401, 801, 1001, 1601, 2001, 4001, 8001, 10001];

/// Choices for [`fit_sweep_with`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitOptions {
    /// A known C0, F: the starting value, and the value held when the sweep misses the notch.
    pub c0_hint_f: Option<f64>,
    /// Whether to fit a linear level slope of the fixture across the sweep (zero at the peak).
    pub fixture_slope: FixtureSlope,
    /// Use the phase of the trace when it has one (complex fit); `false` fits magnitude only.
    pub use_phase: bool,
}

impl Default for FitOptions {
    /// No C0 hint, slope fitted when the trace shows one, phase used when present.
    fn default() -> Self {
        FitOptions {
            c0_hint_f: None,
            fixture_slope: FixtureSlope::Auto,
            use_phase: true,
        }
    }
}

/// How the fit treats a linear level slope of the fixture across the sweep.
///
/// The slope is zero at the transmission peak, so it never changes the peak level that sets
/// Rm. It can trade against C0 when the notch is buried in noise (C0 then rests on the levels
/// on either side of the resonance), which is why it is not always fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FixtureSlope {
    /// Fit the slope only when it differs from zero by more than 3σ and 0.05 dB across the
    /// sweep (then a warning says so).
    #[default]
    Auto,
    /// Always fit the slope.
    Fitted,
    /// Assume the fixture is flat.
    Zero,
}

/// One-sigma uncertainties of the fitted parameters, from the covariance s²·(JᵀJ)⁻¹.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitSigma {
    /// Of fs, Hz.
    pub fs_hz: f64,
    /// Of Rm, Ω.
    pub rm_ohm: f64,
    /// Of Lm, H.
    pub lm_h: f64,
    /// Of Cm, F (correlations with fs and Lm included).
    pub cm_f: f64,
    /// Of C0, F (zero when C0 was held).
    pub c0_f: f64,
}

/// A secondary resonance (spurious mode) seen in the trace.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpuriousResponse {
    /// Series resonance of the fitted spurious branch, Hz (for a response that could not be
    /// fitted: where the trace stands highest above the fitted main response).
    pub f_hz: f64,
    /// |S21| of the fitted model at the top of the response, dB (same scale as the trace;
    /// for a response that could not be fitted, the measured level).
    pub level_db: f64,
    /// How far it lies below the main transmission peak, dB (positive).
    pub below_peak_db: f64,
}

/// A linear sweep to take: start, stop and number of points.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SweepPlan {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Last frequency, Hz.
    pub stop_hz: f64,
    /// Number of points.
    pub points: usize,
}

impl SweepPlan {
    /// Centre frequency, Hz.
    pub fn centre_hz(&self) -> f64 {
        0.5 * (self.start_hz + self.stop_hz)
    }
    /// Span, Hz.
    pub fn span_hz(&self) -> f64 {
        self.stop_hz - self.start_hz
    }
}

impl fmt::Display for SweepPlan {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "centre {}, span {}, {} points",
            fmt_hz(self.centre_hz()),
            fmt_hz(self.span_hz()),
            self.points
        )
    }
}

/// The result of [`fit_sweep`].
#[derive(Debug, Clone, PartialEq)]
pub struct FitReport {
    /// The fitted crystal: main branch, C0, and the spurious modes that were fitted as
    /// branches.
    pub crystal: Crystal,
    /// Series resonance of the model, Hz (not the transmission peak).
    pub fs_hz: f64,
    /// Parallel resonance fs·sqrt(1 + Cm/C0) of the model, Hz.
    pub fp_hz: f64,
    /// One-sigma uncertainties.
    pub sigma: FitSigma,
    /// rms of the dB residual over the points used, at least 26 dB above the noise floor, dB.
    pub rms_residual_db: f64,
    /// `rms_residual_db` above 0.5 dB: the model does not describe the trace well.
    pub poor_fit: bool,
    /// What was doubtful and what sweep to take instead.
    pub warnings: Vec<String>,
    /// Secondary resonances found above the fitted response.
    pub spurious: Vec<SpuriousResponse>,
    /// Transmission peak of the fitted model in this fixture, Hz (below fs; for reference).
    pub peak_hz: f64,
    /// Whether the phase of the trace was used (complex fit).
    pub used_phase: bool,
    /// Whether C0 was held at [`FitOptions::c0_hint_f`] rather than fitted.
    pub c0_held: bool,
    /// Fitted fixture level slope, dB from the first to the last point.
    pub fixture_slope_db: f64,
    /// Fitted fixture phase offset, degrees (zero for a magnitude fit).
    pub phase_offset_deg: f64,
    /// Noise floor estimated from the trace (rms noise power), dB.
    pub noise_floor_db: f64,
    /// The sweep we would take for this crystal.
    pub recommended_sweep: SweepPlan,
}

/// Fit the BVD parameters of one crystal to its series-fixture trace, with default options.
///
/// See [`fit_sweep_with`].
///
/// # Errors
/// As [`fit_sweep_with`].
pub fn fit_sweep(trace: &MeasuredTrace, fixture: &FixtureSpec, id: &str) -> Result<FitReport> {
    fit_sweep_with(trace, fixture, id, &FitOptions::default())
}

/// Least variation of a trace's level, dB, for it to show a resonance. Across a crystal's
/// series resonance in a series fixture the level changes by far more (the peak stands tens of
/// dB above the C0 feedthrough a few bandwidths away; common practice); a sweep that stays
/// within its −3 dB band cannot size the crystal either.
const MIN_LEVEL_RANGE_DB: f64 = 3.0;

/// Refuse a trace that shows no resonance at all: a flat line fits any crystal equally badly.
fn require_resonance(trace: &MeasuredTrace) -> Result<()> {
    let finite = trace.s21_db.iter().copied().filter(|v| v.is_finite());
    let (lo, hi) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    if hi - lo >= MIN_LEVEL_RANGE_DB {
        return Ok(());
    }
    Err(Error::invalid(
        "sweep",
        format!(
            "a flat trace with no resonance in it (its level varies by only {:.2} dB, from \
             {lo:.2} to {hi:.2} dB)",
            hi - lo
        ),
        &format!(
            "a series-fixture S21 sweep across one crystal's series resonance, whose peak \
             stands at least {MIN_LEVEL_RANGE_DB} dB above the level away from it"
        ),
    )
    .with_hint(
        "check that the crystal is in the fixture; sweep wider, centred on its marked \
         frequency (a few kHz for a crystal near 10 MHz)",
    ))
}

/// Fit the BVD parameters (fs, Rm, Lm, Cm, C0) of one crystal to its series-fixture trace.
///
/// Closed-form starting values (peak loss, −3 dB width, notch), then Levenberg–Marquardt on
/// the whole trace, weighted by the estimated noise of each point. Secondary resonances
/// (spurious modes), found as bumps of the trace or as excess over the fitted response, are
/// fitted as extra motional branches (up to three; further ones are masked out) and returned
/// in `crystal.spurious` and `spurious` (parent module docs). fs is the model's series
/// resonance, not the transmission peak. When the sweep misses the peak, a −3 dB point or the
/// notch, `warnings` says so and names the sweep to take. When it misses the notch, C0 is held
/// at `options.c0_hint_f` if given, else fitted from the level away from resonance (and said
/// to be weak).
///
/// # Errors
/// An invalid fixture or option; a trace with fewer than 16 points, mismatched lengths,
/// non-finite values or frequencies not strictly increasing; a trace whose level varies by
/// less than 3 dB (no resonance in it); a fit that does not produce finite parameters.
pub fn fit_sweep_with(
    trace: &MeasuredTrace,
    fixture: &FixtureSpec,
    id: &str,
    options: &FitOptions,
) -> Result<FitReport> {
    fixture.validate()?;
    if let Some(c0) = options.c0_hint_f {
        require_positive("c0_hint_f", c0)?;
    }
    let use_phase = options.use_phase && trace.s21_deg.is_some();
    let mut data = Data::new(trace, use_phase)?;
    require_resonance(trace)?;
    let mut warnings = Vec::new();
    if let Some(r) = trace.reference_ohm {
        if (r - fixture.r0_ohm).abs() > 1e-9 * fixture.r0_ohm.max(r) {
            warnings.push(format!(
                "the trace states a reference of {r} Ω but the fixture R0 is {} Ω; the fit \
                 uses R0 = {} Ω",
                fixture.r0_ohm, fixture.r0_ohm
            ));
        }
    }

    let mut noise = initial_noise(&data);
    let start = starting_values(&data, fixture, options, &noise)?;
    noise.deep = DEEP_FLOOR * start.peak_amp;
    let n = data.n();
    let span = data.f[n - 1] - data.f[0];
    for i in 0..n {
        data.u[i] = (data.f[i] - start.f_peak) / span;
    }
    let mut model = Model {
        two_r0: 2.0 * fixture.r0_ohm,
        rt: fixture.loop_resistance_ohm(),
        main: Scale::of(&start.params.main, start.bw3),
        c0_ref: start.params.c0,
        spur: Vec::new(),
        f_lo: data.f[0],
        f_hi: data.f[n - 1],
    };
    let mut free = [false; NPMAX];
    free[..NP_MAIN].iter_mut().for_each(|x| *x = true);
    free[I_C0] = !start.c0_held;
    free[I_SLOPE] = options.fixture_slope == FixtureSlope::Fitted;
    free[I_PHASE] = data.complex;

    // First fit, then the noise from its residuals.
    let mut mask = vec![true; n];
    let mut out = levenberg_marquardt(
        &Problem::new(&data, &model, &free, &start.params, &noise, &mask),
        start.params,
    )?;
    reestimate_noise(&data, &model, &out.params, &mut noise, &mask);

    // Spurious responses: add each new one as a branch (or mask it), refit, look again.
    let mut masked: Vec<Candidate> = Vec::new();
    let mut fitted: Vec<Candidate> = Vec::new();
    for _round in 0..3 {
        let windows = exclusion_windows(&model, &out.params, &start, &fitted, &masked, &data);
        let found = spur::merge(
            [
                spur::bumps(
                    &data,
                    &model,
                    &out.params,
                    &noise,
                    start.smoothing,
                    &windows,
                ),
                spur::excess(&data, &model, &out.params, &noise, &windows),
            ]
            .concat(),
            &data,
        );
        if found.is_empty() {
            break;
        }
        let mut p = out.params;
        for c in found {
            let branch = (model.spur.len() < MAX_SPURS)
                .then(|| spur::starting_branch(&data, &model, &p, &c))
                .flatten();
            match branch {
                Some(b) => {
                    p.spurs[model.spur.len()] = b;
                    model.spur.push(Scale::of(&b, b.bw3(model.rt)));
                    p.n_spurs = model.spur.len();
                    fitted.push(c);
                }
                None => {
                    mask[c.i_lo..=c.i_hi].iter_mut().for_each(|m| *m = false);
                    masked.push(c);
                }
            }
        }
        free[NP_MAIN..model.np()].iter_mut().for_each(|f| *f = true);
        out = fit_checked(
            &data,
            &mut model,
            &mut free,
            p,
            &noise,
            &mut mask,
            &mut fitted,
            &mut masked,
        )?;
    }
    // Settle the weights on the final parameters.
    out = levenberg_marquardt(
        &Problem::new(&data, &model, &free, &out.params, &noise, &mask),
        out.params,
    )?;
    if options.fixture_slope == FixtureSlope::Auto {
        // Try the slope; keep it only when the trace clearly has one.
        let mut with = free;
        with[I_SLOPE] = true;
        let o = levenberg_marquardt(
            &Problem::new(&data, &model, &with, &out.params, &noise, &mask),
            out.params,
        )?;
        let s = o.params.slope_db;
        let sd = o.sd(I_SLOPE);
        if s.abs() > 3.0 * sd && s.abs() > 0.05 {
            warnings.push(format!(
                "the trace shows a fixture level slope of {s:+.2} dB across the sweep \
                 (±{sd:.2} dB); it was fitted, zero at the peak"
            ));
            out = o;
        }
    }
    if !out.converged {
        warnings.push(format!(
            "the fit stopped after {} iterations without converging; treat the values as rough",
            out.iterations
        ));
    }
    report(
        id, &data, &model, &out, &noise, &mask, &start, options, &masked, warnings,
    )
}

/// Frequency windows where no new spurious response is looked for: the main peak (±3 BW3, as
/// measured from the trace, so that a fit pulled by a strong spurious mode cannot hide it)
/// and the responses already known.
fn exclusion_windows(
    m: &Model,
    p: &Params,
    start: &Start,
    fitted: &[Candidate],
    masked: &[Candidate],
    data: &Data,
) -> spur::Windows {
    let bw = start.bw3;
    let mut w = vec![(start.f_peak - 3.0 * bw, start.f_peak + 3.0 * bw)];
    for b in &p.spurs[..p.n_spurs] {
        let bwk = b.bw3(m.rt);
        w.push((b.fs - 3.0 * bwk, b.fs + 3.0 * bwk));
    }
    for c in fitted.iter().chain(masked) {
        w.push((data.f[c.i_lo], data.f[c.i_hi]));
    }
    w
}

/// Fit with the current spurious branches; a branch that wanders off its response (more than
/// three widths plus its own bandwidth from where it was found) or onto the main resonance is
/// dropped, its region masked instead, and the fit repeated.
#[allow(clippy::too_many_arguments)]
fn fit_checked(
    data: &Data,
    model: &mut Model,
    free: &mut [bool; NPMAX],
    mut p: Params,
    noise: &Noise,
    mask: &mut [bool],
    fitted: &mut Vec<Candidate>,
    masked: &mut Vec<Candidate>,
) -> Result<LmOut> {
    loop {
        let out = levenberg_marquardt(&Problem::new(data, model, free, &p, noise, mask), p)?;
        let bad = (0..model.spur.len()).find(|&k| {
            let b = &out.params.spurs[k];
            let c = &fitted[k];
            let reach = 3.0 * c.width_hz + b.bw3(model.rt);
            (b.fs - c.f_hz).abs() >= reach || !b.rm.is_finite() || b.rm <= 0.0
        });
        let Some(k) = bad else {
            return Ok(out);
        };
        // Drop branch k: shift the later ones down.
        let c = fitted.remove(k);
        mask[c.i_lo..=c.i_hi].iter_mut().for_each(|m| *m = false);
        masked.push(c);
        model.spur.remove(k);
        p = out.params;
        for j in k..MAX_SPURS - 1 {
            p.spurs[j] = p.spurs[j + 1];
        }
        p.n_spurs = model.spur.len();
        for (i, f) in free.iter_mut().enumerate().skip(NP_MAIN) {
            *f = i < model.np();
        }
    }
}

/// Assemble the report from the final fit.
#[allow(clippy::too_many_arguments)]
fn report(
    id: &str,
    data: &Data,
    model: &Model,
    out: &LmOut,
    noise: &Noise,
    mask: &[bool],
    start: &Start,
    options: &FitOptions,
    masked: &[Candidate],
    mut warnings: Vec<String>,
) -> Result<FitReport> {
    let p = out.params;
    let invalid = |e: Error| {
        Error::numerical(format!(
            "the fit produced an invalid crystal ({})",
            e.message()
        ))
        .with_hint("take a sweep that covers the transmission peak and the notch")
    };
    let mut crystal =
        Crystal::from_fs_lm(id, p.main.fs, p.main.lm, p.main.rm, p.c0).map_err(invalid)?;
    for b in &p.spurs[..p.n_spurs] {
        crystal = crystal.with_spurious(b.fs, b.lm, b.rm).map_err(invalid)?;
    }
    // Extreme traces can give values whose derived quantities overflow (Cm = 0, fs = ∞).
    let cm = crystal.cm_f();
    if !(cm.is_finite() && cm > 0.0 && crystal.fs_hz().is_finite()) {
        return Err(invalid(Error::invalid(
            "fitted cm_f",
            cm,
            "a finite motional capacitance above 0 F",
        )));
    }
    let sigma = main_sigmas(out, model, &p);
    let (peak_hz, peak_amp) = model.main_peak(&p);
    let peak_db = 20.0 * peak_amp.log10();
    let rms = rms_residual_db(data, model, &p, noise, mask, start.peak_amp);
    let poor_fit = rms > POOR_FIT_DB;
    let bw3 = p.main.bw3(model.rt);

    // What the trace covers, judged from the data and the fitted model.
    let c0_sd_finite = sigma.c0_f.is_finite();
    let c0_weak = start.c0_held || !c0_sd_finite || sigma.c0_f > 0.3 * p.c0;
    let plan = recommend(&crystal, bw3, c0_weak, options.c0_hint_f);
    let (f_lo, f_hi) = (model.f_lo, model.f_hi);
    // A fit that ran away from the trace (a file of garbage levels, a frequency typed ten
    // times too low) leaves figures no crystal has; refuse it instead of reporting NaN.
    let figures = [peak_hz, peak_db, bw3, rms, plan.start_hz, plan.stop_hz];
    if figures.iter().any(|v| !v.is_finite()) {
        return Err(Error::invalid(
            "sweep",
            format!(
                "a trace the fit ran away on (fs = {:.6e} Hz, Rm = {:.3e} Ω, Lm = {:.3e} H)",
                p.main.fs, p.main.rm, p.main.lm
            ),
            "a series-fixture S21 sweep over one crystal's resonance",
        )
        .with_hint("check the file's frequencies and levels; sweep across the transmission peak and the notch above it"));
    }
    let degenerate = [sigma.fs_hz, sigma.lm_h, sigma.rm_ohm, sigma.c0_f]
        .iter()
        .any(|s| !s.is_finite());
    if start.peak_at_edge || peak_hz < f_lo || peak_hz > f_hi {
        warnings.push(format!(
            "the sweep misses the transmission peak (the trace is highest at its edge); take \
             a sweep with {plan}"
        ));
    } else {
        let (lo3, hi3) = (peak_hz - 0.5 * bw3, peak_hz + 0.5 * bw3);
        if lo3 < f_lo || hi3 > f_hi {
            let which = match (lo3 < f_lo, hi3 > f_hi) {
                (true, true) => "both −3 dB points",
                (true, false) => "the lower −3 dB point",
                _ => "the upper −3 dB point",
            };
            warnings.push(format!(
                "the sweep misses {which} (BW3 ≈ {}); take a sweep with {plan}",
                fmt_hz(bw3)
            ));
        }
        let step = (f_hi - f_lo) / (data.n() - 1) as f64;
        let across = (bw3 / step).floor();
        if across < 8.0 {
            warnings.push(format!(
                "only {across} points lie within the −3 dB bandwidth of {}; Lm and Rm need \
                 more: take a sweep with {plan}",
                fmt_hz(bw3)
            ));
        }
    }
    let fp = crystal.fp_hz();
    if start.notch_missing || fp > f_hi {
        let c0_note = if start.c0_held {
            format!(
                "C0 was held at the given {:.3} pF",
                options.c0_hint_f.unwrap_or(p.c0) * 1e12
            )
        } else {
            format!(
                "C0 = {:.3} ± {:.3} pF comes from the level away from resonance only (give a \
                 C0 hint to hold it)",
                p.c0 * 1e12,
                sigma.c0_f * 1e12
            )
        };
        warnings.push(format!(
            "the sweep misses the notch (parallel resonance) above the peak, so C0 cannot be \
             determined from it; {c0_note}; take a sweep with {plan}"
        ));
    } else if c0_sd_finite && sigma.c0_f > 0.1 * p.c0 {
        warnings.push(format!(
            "C0 is poorly determined (±{:.0} %); a sweep with {plan} would help",
            100.0 * sigma.c0_f / p.c0
        ));
    }
    if degenerate {
        warnings.push(
            "some parameters are not determined by this trace (singular fit); the values are \
             guesses"
                .to_string(),
        );
    }
    if start.peak_above_lossless {
        warnings.push(format!(
            "the peak level ({:.2} dB) is at or above what a lossless crystal could give in \
             this fixture; check the calibration, R0 and the extra series resistance",
            20.0 * start.peak_amp.log10()
        ));
    }
    if poor_fit {
        warnings.push(format!(
            "rms residual {rms:.2} dB exceeds {POOR_FIT_DB} dB: the BVD model does not describe \
             this trace well (fixture resonance, wrong R0, or a spurious mode at the peak)"
        ));
    }
    if !masked.is_empty() {
        warnings.push(format!(
            "{} secondary response(s) could not be fitted as spurious modes and were left out \
             of the fit",
            masked.len()
        ));
    }
    let mut spurious: Vec<SpuriousResponse> = p.spurs[..p.n_spurs]
        .iter()
        .map(|b| {
            let bw = b.bw3(model.rt);
            let (_, a) = model.local_peak(&p, b.fs, bw, bw);
            let level_db = 20.0 * a.log10();
            SpuriousResponse {
                f_hz: b.fs,
                level_db,
                below_peak_db: peak_db - level_db,
            }
        })
        .chain(masked.iter().map(|c| SpuriousResponse {
            f_hz: c.f_hz,
            level_db: c.level_db,
            below_peak_db: peak_db - c.level_db,
        }))
        .collect();
    if spurious
        .iter()
        .any(|r| !(r.f_hz.is_finite() && r.level_db.is_finite()))
    {
        return Err(Error::invalid(
            "sweep",
            "a trace whose secondary responses the fit cannot size (their level is undefined)",
            "a series-fixture S21 sweep with finite, plausible levels",
        )
        .with_hint("check the file for stray values far below the rest of the trace"));
    }
    spurious.sort_by(|a, b| a.f_hz.total_cmp(&b.f_hz));
    Ok(FitReport {
        fs_hz: crystal.fs_hz(),
        fp_hz: fp,
        crystal,
        sigma,
        rms_residual_db: rms,
        poor_fit,
        warnings,
        spurious,
        peak_hz,
        used_phase: data.complex,
        c0_held: start.c0_held,
        fixture_slope_db: p.slope_db,
        phase_offset_deg: p.phase.to_degrees(),
        noise_floor_db: noise.floor_db(),
        recommended_sweep: plan,
    })
}

/// One-sigma uncertainties of the main parameters, mapped from θ to physical units.
fn main_sigmas(o: &LmOut, m: &Model, p: &Params) -> FitSigma {
    // ln Cm = −2·ln fs − ln Lm + const; d ln fs = (bw_ref/fs)·dθ0.
    let g0 = -2.0 * m.main.bw / p.main.fs;
    let var_ln_cm = g0 * g0 * o.cov(0, 0) + o.cov(1, 1) + 2.0 * g0 * o.cov(0, 1);
    let cm = 1.0 / ((2.0 * PI * p.main.fs).powi(2) * p.main.lm);
    // An undetermined parameter has an infinite uncertainty, never NaN (0·∞ for Rm = 0) nor
    // zero (`max` would turn a NaN variance into 0).
    let undetermined = |s: f64| if s.is_nan() { f64::INFINITY } else { s };
    let sd_ln_cm = if var_ln_cm.is_nan() {
        f64::INFINITY
    } else {
        var_ln_cm.max(0.0).sqrt()
    };
    FitSigma {
        fs_hz: undetermined(m.main.bw * o.sd(0)),
        rm_ohm: undetermined(p.main.rm * o.sd(2)),
        lm_h: undetermined(p.main.lm * o.sd(1)),
        cm_f: undetermined(cm * sd_ln_cm),
        c0_f: undetermined(p.c0 * o.sd(I_C0)),
    }
}

// ---------------------------------------------------------------------------------------------
// Starting values

struct Start {
    params: Params,
    f_peak: f64,
    bw3: f64,
    peak_amp: f64,
    /// Moving-average length used on the trace (points).
    smoothing: usize,
    peak_at_edge: bool,
    notch_missing: bool,
    c0_held: bool,
    peak_above_lossless: bool,
}

/// Frequency where `sm` first falls below `target` walking from `i` up or down.
fn crossing(f: &[f64], sm: &[f64], i: usize, target: f64, up: bool) -> Option<f64> {
    let n = sm.len();
    let mut j = i;
    loop {
        let next = if up {
            (j + 1 < n).then_some(j + 1)
        } else {
            j.checked_sub(1)
        }?;
        if sm[next] < target {
            let t = (sm[j] - target) / (sm[j] - sm[next]);
            return Some(f[j] + t * (f[next] - f[j]));
        }
        j = next;
    }
}

/// Peak, −3 dB width and notch of the trace, and the closed-form parameters from them.
fn starting_values(
    data: &Data,
    fixture: &FixtureSpec,
    options: &FitOptions,
    noise: &Noise,
) -> Result<Start> {
    let n = data.n();
    let f = &data.f;
    let span = f[n - 1] - f[0];
    let step = span / (n - 1) as f64;
    let rt = fixture.loop_resistance_ohm();
    let two_r0 = 2.0 * fixture.r0_ohm;

    let find = |k: usize| -> (usize, Vec<f64>) {
        let sm = smooth(&data.amp, k);
        let mut ip = 0;
        for i in 1..n {
            if sm[i] > sm[ip] {
                ip = i;
            }
        }
        (ip, sm)
    };
    let width = |ip: usize, sm: &[f64]| -> f64 {
        let t = sm[ip] / 2f64.sqrt();
        match (crossing(f, sm, ip, t, false), crossing(f, sm, ip, t, true)) {
            (Some(a), Some(b)) => b - a,
            (Some(a), None) => 2.0 * (f[ip] - a),
            (None, Some(b)) => 2.0 * (b - f[ip]),
            (None, None) => 0.25 * span,
        }
    };
    let k0 = if n >= 100 { 5 } else { 1 };
    let (ip0, sm0) = find(k0);
    let bw_guess = width(ip0, &sm0);
    let k1 = (((bw_guess / step / 8.0).round() as usize) | 1).clamp(1, 31);
    let (ip, sm) = find(k1);
    let bw3 = width(ip, &sm).max(step);
    let peak_amp = sm[ip];
    let f_peak = f[ip];
    let peak_at_edge = ip < 2 || ip > n - 3;
    let rm_raw = two_r0 / peak_amp - rt;
    let peak_above_lossless = rm_raw <= 0.01 * rt;
    let rm = rm_raw.max(0.01 * rt);
    let lm = (rm + rt) / (2.0 * PI * bw3);
    let cm_at = |fs: f64| 1.0 / ((2.0 * PI * fs).powi(2) * lm);

    // The notch: the lowest (smoothed) level well above the peak.
    let i_from = f.partition_point(|&x| x < f_peak + 2.0 * bw3);
    let mut notch: Option<f64> = None;
    let mut notch_missing = true;
    if i_from + 2 < n {
        let mut im = i_from;
        for i in i_from..n {
            if sm[i] < sm[im] {
                im = i;
            }
        }
        if im + k1.max(3) < n {
            notch_missing = false;
            notch = Some(f[im]);
        }
    }

    let mut p = Params {
        main: Branch { fs: f_peak, lm, rm },
        c0: 4e-12,
        slope_db: 0.0,
        phase: 0.0,
        spurs: [Branch {
            fs: 1.0,
            lm: 1.0,
            rm: 1.0,
        }; MAX_SPURS],
        n_spurs: 0,
    };
    let c0_held = notch_missing && options.c0_hint_f.is_some();
    if let Some(c0) = options.c0_hint_f {
        p.c0 = c0;
    }
    let model = Model {
        two_r0,
        rt,
        main: Scale::of(&p.main, bw3),
        c0_ref: 1e-12,
        spur: Vec::new(),
        f_lo: f[0],
        f_hi: f[n - 1],
    };
    let shifted = |c0: f64| -> Result<f64> {
        Ok(f_peak + peak_shift_hz(&Crystal::from_fs_lm("", f_peak, lm, rm, c0)?, fixture))
    };
    if !c0_held {
        // C0 by a 1-D search of the magnitude cost: around the notch estimate when there is
        // one, else over 0.3–30 pF.
        let (c_lo, c_hi, steps) = match (notch, options.c0_hint_f) {
            (Some(fnotch), _) if fnotch > f_peak => {
                let c = cm_at(f_peak) / ((fnotch / f_peak).powi(2) - 1.0);
                (0.5 * c, 2.0 * c, 25)
            }
            (_, Some(c)) => (0.5 * c, 2.0 * c, 25),
            _ => (0.3e-12, 30e-12, 41),
        };
        let mag_noise = Noise {
            deep: DEEP_FLOOR * peak_amp,
            pn: if data.complex {
                2.0 * noise.sa * noise.sa
            } else {
                noise.pn
            },
            ..*noise
        };
        let mut best = (f64::INFINITY, p.c0);
        for s in 0..steps {
            let c0 = c_lo * (c_hi / c_lo).powf(s as f64 / (steps - 1) as f64);
            let mut q = p;
            q.c0 = c0;
            q.main.fs = shifted(c0)?;
            let cost = magnitude_cost(data, &model, &q, &mag_noise);
            if cost < best.0 {
                best = (cost, c0);
            }
        }
        p.c0 = best.1;
    }
    p.main.fs = shifted(p.c0)?;
    if data.complex {
        // Phase offset: the angle between measured and modelled S21 around the peak.
        let v = model.values(&p, data);
        let mut acc = Complex64::new(0.0, 0.0);
        for ((f, s), vi) in data.f.iter().zip(&data.s).zip(&v) {
            if (f - f_peak).abs() <= bw3 {
                acc += s * vi.conj();
            }
        }
        if acc.norm() > 0.0 {
            p.phase = acc.arg();
        }
    }
    Ok(Start {
        params: p,
        f_peak,
        bw3,
        peak_amp,
        smoothing: k1,
        peak_at_edge,
        notch_missing,
        c0_held,
        peak_above_lossless,
    })
}

/// Weighted dB cost of parameters `p` on every few points (for placing C0 roughly).
fn magnitude_cost(data: &Data, m: &Model, p: &Params, noise: &Noise) -> f64 {
    let q = m.pre(p);
    let every = (data.n() / 500).max(1);
    let mut c = 0.0;
    for i in (0..data.n()).step_by(every) {
        let s2 = m.value(&q, data.w[i], data.u[i]).norm_sqr();
        let r = (data.db[i] - model_db(s2, noise.pn)) / sigma_db(s2, noise);
        c += r * r;
    }
    c
}

// ---------------------------------------------------------------------------------------------
// Residual, recommendation

/// rms dB residual over the points used that lie well above the noise floor.
fn rms_residual_db(
    data: &Data,
    m: &Model,
    p: &Params,
    noise: &Noise,
    mask: &[bool],
    peak_amp: f64,
) -> f64 {
    let v = m.values(p, data);
    let threshold = (noise.floor_db() + RMS_ABOVE_FLOOR_DB).max(20.0 * peak_amp.log10() - 60.0);
    let mut sum = 0.0;
    let mut count = 0usize;
    let mut sum_all = 0.0;
    let mut count_all = 0usize;
    for i in 0..data.n() {
        if !mask[i] {
            continue;
        }
        let r = data.db[i] - model_db(v[i].norm_sqr(), noise.pn);
        sum_all += r * r;
        count_all += 1;
        if data.db[i] >= threshold {
            sum += r * r;
            count += 1;
        }
    }
    if count >= 5 {
        (sum / count as f64).sqrt()
    } else {
        (sum_all / count_all.max(1) as f64).sqrt()
    }
}

/// The sweep to take for `x`: fs − m .. fp + m, m = max(6·BW3, 0.3·(fp − fs)), with at least
/// 20 points per BW3. When C0 is weakly known, fp assumes C0 = the hint or 4 pF (a typical
/// HC-49 holder capacitance, common practice).
fn recommend(x: &Crystal, bw3: f64, c0_weak: bool, hint: Option<f64>) -> SweepPlan {
    let fs = x.fs_hz();
    let c0 = if c0_weak {
        hint.unwrap_or(4e-12)
    } else {
        x.c0_f
    };
    let fp = fs * (1.0 + x.cm_f() / c0).sqrt();
    let margin = (6.0 * bw3).max(0.3 * (fp - fs));
    let (start_hz, stop_hz) = (fs - margin, fp + margin);
    // `as` saturates for a huge ratio; the addition must too (no overflow panic).
    let needed = (((stop_hz - start_hz) / (bw3 / 20.0)).ceil() as usize).saturating_add(1);
    let points = STANDARD_POINTS
        .iter()
        .copied()
        .find(|&p| p >= needed)
        .unwrap_or(10001);
    SweepPlan {
        start_hz,
        stop_hz,
        points,
    }
}

#[cfg(test)]
mod tests;

//! Tolerance yield: Monte Carlo over part tolerances, the parts that matter most, and the
//! envelope of the responses.
//!
//! # Model of a trial
//! Monte Carlo \[1\]: each trial builds the ladder of a [`Design`] from perturbed parts, sweeps
//! it, and reads its figures off the sampled sweep ([`Performance::from_sweep`]):
//!
//! ```text
//! C'   = C·(1 + a·u)                 every shunt and series capacitor
//! fs'  = fs + σf·z_f                 each crystal: Cm' = Cm·(fs/fs')² / (1 + σL·z_L)
//! Lm'  = Lm·(1 + σL·z_L)             (Lm spread at constant fs'; fs drift keeps Lm)
//! Rm'  = max(0, Rm·(1 + σR·z_R))
//! ```
//!
//! with u uniform on [−1, 1] and a = tol ([`CapDistribution::Uniform`], the default), or u a
//! standard normal variate and a = tol/3 ([`CapDistribution::Gaussian3Sigma`]); z standard
//! normal. C0 and any spurious modes stay as measured. A draw that makes a capacitance, Lm or
//! fs zero or negative (possible only in a far Gaussian tail) fails the trial as
//! [`FailureReason::NonPhysical`].
//!
//! The sweep is the chain-matrix cascade of [`crate::network`] (S21 and S11 referred to Rs and
//! RL) written out for this one topology, without the ω-derivatives: group delay is not among
//! the figures judged here. It reuses its buffers per block of trials and allocates nothing
//! per frequency; the tests check it against [`crate::network::Ladder`].
//!
//! # Random numbers
//! Trial t draws its variates from ChaCha8 \[3\] keyed by the user's `seed`, on stream t, in a
//! fixed order: the shunt capacitors C12 … C(n−1,n), one variate per series position 1 … n
//! (drawn even where a position has no capacitor), then z_f, z_L, z_R for crystals 1 … n.
//! Every variate is drawn whatever the tolerances are. Hence:
//! - a report is a function of (design, spec, limits) alone, identical on any number of
//!   threads (trials run in fixed blocks with rayon and are collected in order; the envelope
//!   is a min/max, which does not depend on the order of combination);
//! - the same seed with tighter tolerances gives each trial the *same direction* of
//!   perturbation, shorter in every coordinate. Yield can then only fall with tighter
//!   tolerances if a trial fails close to the nominal but passes further out along its own
//!   direction, which a pass region that is star-shaped around the nominal excludes (the
//!   tests check it on real designs; it is not a theorem for every design and limit).
//!
//! # Pass and fail
//! A trial passes when its ripple ≤ `max_ripple_db`, its −6 dB bandwidth is within
//! ±`bw6_tolerance` of the design's `performance.bw_6db_hz`, and its insertion loss ≤
//! `max_loss_db` ([`Limits::default_for`]: design + 1 dB, ±5 %, design + 2 dB). A trial whose
//! −3 dB or −6 dB passband leaves the analysis window fails as
//! [`FailureReason::OutOfWindow`]. A failing trial counts under every limit it breaks.
//!
//! # Analysis window
//! `points` linear points over f_c ± max(2·B6, 0.625·B60), f_c and B6, B60 the design's
//! `performance` centre, −6 dB and −60 dB bandwidths: the −6 dB passband with 1.5·B6 to spare
//! on each side, and the −60 dB points with 25 % to spare when the design has them. Figures
//! are read with linear interpolation between points, so a bandwidth is within two grid steps
//! of the circuit's own and a loss or ripple within |y''|·h²/8 (h the step, y the dB
//! response).
//!
//! # Statistics
//! Percentiles 1, 5, 25, 50, 75, 95, 99 by linear interpolation between order statistics
//! (definition 7 of \[2\]; numpy's and R's default, from memory), over the trials whose analysis
//! succeeded. Uniform ±tol has σ = tol/√3.
//!
//! # Sensitivity
//! One part at a time [4, ch. 1]: the nominal design with that one part moved by −1σ and by
//! +1σ of its own distribution, everything else nominal. For each of ripple, loss and −6 dB
//! bandwidth the larger of the two one-sided worsenings is kept (ripple and loss: increase;
//! bandwidth: |change|), because an equiripple design sits at a ripple minimum, where a central
//! difference reads zero. Each is divided by the margin its limit leaves at the nominal
//! (limit − nominal; at least 0.01 dB for ripple, the larger of 0.01 dB and 1 % for loss, and
//! at least 1 % of B6 for bandwidth, so that a design sitting on a limit still ranks its
//! parts), and the largest quotient is the part's score: the fraction of that margin one σ of
//! the part uses. Parts are ranked by score. A part whose −1σ or +1σ loses the passband from
//! the window gets an infinite score (metric `bw_6db_hz`). Only parts with a nonzero spread are
//! listed. For a smooth figure the one-σ changes are the terms of first-order propagation of
//! variance, σ² ≈ Σ (∂y/∂x_i·σ_i)²; the tests check that against the Monte Carlo spread of B6.
//!
//! Part names: `C12`, `C23` … for the shunt capacitor between crystals i and i+1 (`C9,10` once
//! an index has two digits), `Cs1` … for the series capacitor of position i (only where there
//! is one), `Y1 fs`, `Y1 Lm`, `Y1 Rm` … for the crystal at position i.
//!
//! # References
//! 1. N. Metropolis, S. Ulam, "The Monte Carlo method", J. Amer. Statist. Assoc. 44, 1949.
//! 2. R. J. Hyndman, Y. Fan, "Sample quantiles in statistical packages", The American
//!    Statistician 50, 1996.
//! 3. D. J. Bernstein, "ChaCha, a variant of Salsa20", 2008.
//! 4. A. Saltelli et al., *Global Sensitivity Analysis: The Primer*, Wiley, 2008.

mod stats;
#[cfg(test)]
mod tests;

use crate::crystal::Crystal;
use crate::design::Design;
use crate::error::{require_positive, Error, ErrorKind, Result};
use crate::metrics::Performance;
use crate::network::{FrequencyGrid, Sweep};
use num_complex::Complex64 as C64;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Largest number of trials accepted (the report keeps every trial's figures).
pub const MAX_TRIALS: usize = 1_000_000;

/// Range of analysis points accepted per trial.
pub const POINTS_RANGE: (usize, usize) = (101, 100_001);

/// The percentiles every [`MetricDistribution`] reports.
pub const PERCENTILES: [f64; 7] = [1.0, 5.0, 25.0, 50.0, 75.0, 95.0, 99.0];

/// Trials per block of work; fixed, so that the work split does not depend on the threads.
const BLOCK: usize = 32;

/// How capacitor values spread within their tolerance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum CapDistribution {
    /// Uniform within ±tolerance.
    #[default]
    Uniform,
    /// Gaussian with the tolerance at 3σ (untruncated).
    #[serde(rename = "gaussian")]
    Gaussian3Sigma,
}

/// What to vary and how often. Missing fields in JSON take the [`Default`] values.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ToleranceSpec {
    /// Number of Monte Carlo trials (1 to [`MAX_TRIALS`]).
    pub trials: usize,
    /// Capacitor tolerance as a fraction (0.05 = ±5 %), 0 ≤ tol < 1.
    pub cap_tol: f64,
    /// How capacitors spread within `cap_tol`.
    pub cap_distribution: CapDistribution,
    /// Standard deviation of each crystal's series-resonant frequency, Hz.
    pub fs_sigma_hz: f64,
    /// Fractional standard deviation of each crystal's motional inductance (0 = none), < 1.
    pub lm_sigma: f64,
    /// Fractional standard deviation of each crystal's motional resistance (0 = none).
    pub rm_sigma: f64,
    /// Key of the random number generator; the same seed gives the same report.
    pub seed: u64,
    /// Analysis points per trial (see [`POINTS_RANGE`]).
    pub points: usize,
}

impl Default for ToleranceSpec {
    /// 1000 trials, ±5 % uniform capacitors, no crystal spread, seed 0, 1001 points.
    fn default() -> Self {
        ToleranceSpec {
            trials: 1000,
            cap_tol: 0.05,
            cap_distribution: CapDistribution::Uniform,
            fs_sigma_hz: 0.0,
            lm_sigma: 0.0,
            rm_sigma: 0.0,
            seed: 0,
            points: 1001,
        }
    }
}

impl ToleranceSpec {
    /// Check every field.
    ///
    /// # Errors
    /// Naming the first field out of range.
    pub fn validate(&self) -> Result<()> {
        if self.trials == 0 || self.trials > MAX_TRIALS {
            return Err(Error::invalid(
                "trials",
                self.trials,
                &format!("1 to {MAX_TRIALS} trials"),
            ));
        }
        fraction_below_one("cap_tol", self.cap_tol)?;
        if !(self.fs_sigma_hz.is_finite() && self.fs_sigma_hz >= 0.0) {
            return Err(Error::invalid(
                "fs_sigma_hz",
                format!("{} Hz", self.fs_sigma_hz),
                "a finite standard deviation of 0 Hz or more",
            ));
        }
        fraction_below_one("lm_sigma", self.lm_sigma)?;
        if !(self.rm_sigma.is_finite() && self.rm_sigma >= 0.0) {
            return Err(Error::invalid(
                "rm_sigma",
                self.rm_sigma,
                "a finite fraction of 0 or more (0.2 = 20 %)",
            ));
        }
        if self.points < POINTS_RANGE.0 || self.points > POINTS_RANGE.1 {
            return Err(Error::invalid(
                "points",
                self.points,
                &format!("{} to {} analysis points", POINTS_RANGE.0, POINTS_RANGE.1),
            ));
        }
        Ok(())
    }

    /// The standard deviation of a capacitor's fractional deviation.
    pub fn cap_sigma(&self) -> f64 {
        match self.cap_distribution {
            CapDistribution::Uniform => self.cap_tol / 3f64.sqrt(),
            CapDistribution::Gaussian3Sigma => self.cap_tol / 3.0,
        }
    }

    /// Multiplier of the capacitor unit variate u (see the module docs).
    fn cap_scale(&self) -> f64 {
        match self.cap_distribution {
            CapDistribution::Uniform => self.cap_tol,
            CapDistribution::Gaussian3Sigma => self.cap_tol / 3.0,
        }
    }
}

fn fraction_below_one(field: &str, v: f64) -> Result<()> {
    if v.is_finite() && (0.0..1.0).contains(&v) {
        Ok(())
    } else {
        Err(Error::invalid(
            field,
            v,
            "a fraction from 0 up to (not including) 1, e.g. 0.05 for 5 %",
        ))
    }
}

/// Pass/fail limits of a trial.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Limits {
    /// Largest passband ripple, dB (infinity: no limit).
    pub max_ripple_db: f64,
    /// Allowed relative deviation of the −6 dB bandwidth from the design's (0.05 = ±5 %).
    pub bw6_tolerance: f64,
    /// Largest insertion loss, dB (infinity: no limit).
    pub max_loss_db: f64,
}

impl Limits {
    /// The usual limits: ripple ≤ design + 1 dB, −6 dB bandwidth within ±5 % of the design's,
    /// loss ≤ design + 2 dB (common practice for a first look at a build).
    pub fn default_for(design: &Design) -> Limits {
        Limits {
            max_ripple_db: design.performance.ripple_db + 1.0,
            bw6_tolerance: 0.05,
            max_loss_db: design.performance.insertion_loss_db + 2.0,
        }
    }

    /// Check every field.
    ///
    /// # Errors
    /// Naming the first field out of range.
    pub fn validate(&self) -> Result<()> {
        for (field, v) in [
            ("max_ripple_db", self.max_ripple_db),
            ("max_loss_db", self.max_loss_db),
        ] {
            if v.is_nan() || v < 0.0 {
                return Err(Error::invalid(
                    field,
                    format!("{v} dB"),
                    "a value of 0 dB or more (infinity for no limit)",
                ));
            }
        }
        if !(self.bw6_tolerance.is_finite() && self.bw6_tolerance > 0.0) {
            return Err(Error::invalid(
                "bw6_tolerance",
                self.bw6_tolerance,
                "a finite fraction greater than 0 (0.05 = ±5 %)",
            ));
        }
        Ok(())
    }
}

/// A figure of merit a trial is judged or summarized by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Metric {
    /// Minimum passband loss, dB.
    InsertionLoss,
    /// Passband ripple, dB.
    Ripple,
    /// −3 dB bandwidth, Hz.
    Bandwidth3,
    /// −6 dB bandwidth, Hz.
    Bandwidth6,
    /// Centre (midpoint of the −3 dB points), Hz.
    Center,
    /// Smallest passband return loss, dB.
    ReturnLoss,
    /// −60 dB over −6 dB bandwidth, where the −60 dB points lie in the window.
    ShapeFactor,
}

impl Metric {
    /// Every metric, in report order.
    pub const ALL: [Metric; 7] = [
        Metric::InsertionLoss,
        Metric::Ripple,
        Metric::Bandwidth3,
        Metric::Bandwidth6,
        Metric::Center,
        Metric::ReturnLoss,
        Metric::ShapeFactor,
    ];

    /// The name of the matching [`Performance`] field (`ripple_db`, `bw_6db_hz`, …).
    pub fn name(self) -> &'static str {
        match self {
            Metric::InsertionLoss => "insertion_loss_db",
            Metric::Ripple => "ripple_db",
            Metric::Bandwidth3 => "bw_3db_hz",
            Metric::Bandwidth6 => "bw_6db_hz",
            Metric::Center => "center_hz",
            Metric::ReturnLoss => "return_loss_db",
            Metric::ShapeFactor => "shape_factor_60_6",
        }
    }

    /// Unit symbol ("dB", "Hz", or "" for a ratio).
    pub fn unit(self) -> &'static str {
        match self {
            Metric::InsertionLoss | Metric::Ripple | Metric::ReturnLoss => "dB",
            Metric::Bandwidth3 | Metric::Bandwidth6 | Metric::Center => "Hz",
            Metric::ShapeFactor => "",
        }
    }
}

/// The figures of one analysed trial.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TrialMetrics {
    /// Minimum passband loss, dB.
    pub insertion_loss_db: f64,
    /// Passband ripple, dB.
    pub ripple_db: f64,
    /// −3 dB bandwidth, Hz.
    pub bw_3db_hz: f64,
    /// −6 dB bandwidth, Hz.
    pub bw_6db_hz: f64,
    /// Centre, Hz.
    pub center_hz: f64,
    /// Smallest passband return loss, dB.
    pub return_loss_db: f64,
    /// −60 dB bandwidth, Hz, when both −60 dB points lie in the window.
    pub bw_60db_hz: Option<f64>,
    /// Shape factor 60/6, when the −60 dB points lie in the window.
    pub shape_factor_60_6: Option<f64>,
}

impl TrialMetrics {
    fn from_performance(p: &Performance) -> Self {
        TrialMetrics {
            insertion_loss_db: p.insertion_loss_db,
            ripple_db: p.ripple_db,
            bw_3db_hz: p.bw_3db_hz,
            bw_6db_hz: p.bw_6db_hz,
            center_hz: p.center_hz,
            return_loss_db: p.return_loss_db,
            bw_60db_hz: p.bw_60db_hz,
            shape_factor_60_6: p.shape_factor_60_6,
        }
    }

    /// The value of `metric`, if this trial has it.
    pub fn value(&self, metric: Metric) -> Option<f64> {
        match metric {
            Metric::InsertionLoss => Some(self.insertion_loss_db),
            Metric::Ripple => Some(self.ripple_db),
            Metric::Bandwidth3 => Some(self.bw_3db_hz),
            Metric::Bandwidth6 => Some(self.bw_6db_hz),
            Metric::Center => Some(self.center_hz),
            Metric::ReturnLoss => Some(self.return_loss_db),
            Metric::ShapeFactor => self.shape_factor_60_6,
        }
    }

    fn all_finite(&self) -> bool {
        Metric::ALL
            .iter()
            .filter_map(|&m| self.value(m))
            .all(f64::is_finite)
    }
}

/// Why a trial failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FailureReason {
    /// Ripple above the limit.
    Ripple,
    /// −6 dB bandwidth outside its tolerance.
    Bandwidth6,
    /// Insertion loss above the limit.
    InsertionLoss,
    /// The −3 dB or −6 dB passband is not inside the analysis window.
    OutOfWindow,
    /// A drawn capacitance, Lm or fs was zero or negative.
    NonPhysical,
    /// The analysis gave non-finite values.
    Numerical,
}

/// How many trials failed for each reason (a trial breaking two limits counts under both).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct FailureCounts {
    /// Ripple above the limit.
    pub ripple: usize,
    /// −6 dB bandwidth outside its tolerance.
    pub bw6: usize,
    /// Insertion loss above the limit.
    pub loss: usize,
    /// Passband outside the analysis window.
    pub out_of_window: usize,
    /// Non-physical draw.
    pub non_physical: usize,
    /// Non-finite analysis.
    pub numerical: usize,
}

impl FailureCounts {
    fn add(&mut self, r: FailureReason) {
        match r {
            FailureReason::Ripple => self.ripple += 1,
            FailureReason::Bandwidth6 => self.bw6 += 1,
            FailureReason::InsertionLoss => self.loss += 1,
            FailureReason::OutOfWindow => self.out_of_window += 1,
            FailureReason::NonPhysical => self.non_physical += 1,
            FailureReason::Numerical => self.numerical += 1,
        }
    }
}

/// One trial's outcome (for histograms and for finding a particular failure again).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrialSample {
    /// Trial index (its random stream).
    pub trial: usize,
    /// True when every limit is met.
    pub passed: bool,
    /// The figures, when the analysis succeeded.
    pub metrics: Option<TrialMetrics>,
    /// Every limit broken, or the one reason the analysis did not succeed.
    pub reasons: Vec<FailureReason>,
}

/// The spread of one metric over the analysed trials.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MetricDistribution {
    /// Which metric.
    pub metric: Metric,
    /// Its name (as [`Metric::name`]).
    pub name: String,
    /// Its unit (as [`Metric::unit`]).
    pub unit: String,
    /// Number of trials with a value.
    pub count: usize,
    /// (percentile, value) for each of [`PERCENTILES`].
    pub percentiles: Vec<(f64, f64)>,
    /// Mean.
    pub mean: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
}

/// How much one part's spread matters (see the module docs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Sensitivity {
    /// Part name: `C12`, `Cs3`, `Y4 fs`, `Y4 Lm`, `Y4 Rm`.
    pub part: String,
    /// Largest fraction of a limit's margin used by ±1σ of this part; infinite when ±1σ moves
    /// the passband out of the analysis window (`null` in JSON).
    #[serde(with = "infinite_as_null")]
    pub score: f64,
    /// The metric that gives the score (`Bandwidth6` when the passband is lost).
    pub metric: Metric,
    /// One σ of this part, in its own unit (fraction, or Hz for fs).
    pub sigma: f64,
    /// Largest ripple increase from ±1σ, dB.
    pub ripple_db: f64,
    /// Largest |change| of the −6 dB bandwidth from ±1σ, Hz.
    pub bw6_hz: f64,
    /// Largest loss increase from ±1σ, dB.
    pub loss_db: f64,
}

/// Serde for a non-negative score that may be infinite: JSON has no infinity, so it is `null`.
mod infinite_as_null {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
        if v.is_finite() {
            s.serialize_f64(*v)
        } else {
            s.serialize_none()
        }
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        Ok(Option::<f64>::deserialize(d)?.unwrap_or(f64::INFINITY))
    }
}

/// The spread of the responses: min and max |S21| at each frequency over the analysed trials.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Envelope {
    /// Frequencies, Hz.
    pub f_hz: Vec<f64>,
    /// Lowest |S21| at each frequency, dB.
    pub min_db: Vec<f64>,
    /// Highest |S21| at each frequency, dB.
    pub max_db: Vec<f64>,
    /// The nominal design's |S21|, dB.
    pub nominal_db: Vec<f64>,
}

/// The outcome of [`run_yield`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct YieldReport {
    /// Number of trials.
    pub trials: usize,
    /// Trials that met every limit.
    pub passed: usize,
    /// passed / trials.
    pub yield_fraction: f64,
    /// The limits applied.
    pub limits: Limits,
    /// The −6 dB bandwidth the tolerance is relative to (the design's), Hz.
    pub bw6_reference_hz: f64,
    /// The nominal design read off the same grid as the trials.
    pub nominal: TrialMetrics,
    /// Distribution of each metric; metrics no trial has are left out.
    pub metrics: Vec<MetricDistribution>,
    /// Parts by decreasing score.
    pub sensitivity: Vec<Sensitivity>,
    /// Envelope of the responses.
    pub envelope: Envelope,
    /// Every trial, in trial order.
    pub samples: Vec<TrialSample>,
    /// Failure counts by reason.
    pub failures_by_reason: FailureCounts,
}

impl YieldReport {
    /// The values of `metric` over the analysed trials, in trial order (for a histogram).
    pub fn values(&self, metric: Metric) -> Vec<f64> {
        self.samples
            .iter()
            .filter_map(|s| s.metrics.and_then(|m| m.value(metric)))
            .collect()
    }

    /// The distribution of `metric`, if any trial has it.
    pub fn distribution(&self, metric: Metric) -> Option<&MetricDistribution> {
        self.metrics.iter().find(|d| d.metric == metric)
    }
}

/// Relative perturbations of every part of a design (all zero = nominal).
#[derive(Debug, Clone, Default)]
struct Deltas {
    /// Fractional change of each shunt capacitor.
    shunt: Vec<f64>,
    /// Fractional change of each series position's capacitor.
    series: Vec<f64>,
    /// fs shift of each crystal, Hz.
    fs_hz: Vec<f64>,
    /// Fractional change of each crystal's Lm.
    lm: Vec<f64>,
    /// Fractional change of each crystal's Rm.
    rm: Vec<f64>,
}

impl Deltas {
    fn zero(n: usize) -> Self {
        Deltas {
            shunt: vec![0.0; n.saturating_sub(1)],
            series: vec![0.0; n],
            fs_hz: vec![0.0; n],
            lm: vec![0.0; n],
            rm: vec![0.0; n],
        }
    }

    /// Fill with the unit variates of `trial` (see the module docs for the order).
    fn draw_unit(&mut self, seed: u64, trial: usize, dist: CapDistribution) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(trial as u64);
        let cap = |rng: &mut ChaCha8Rng| match dist {
            CapDistribution::Uniform => 2.0 * rng.gen::<f64>() - 1.0,
            CapDistribution::Gaussian3Sigma => rng.sample::<f64, _>(StandardNormal),
        };
        for v in self.shunt.iter_mut() {
            *v = cap(&mut rng);
        }
        for v in self.series.iter_mut() {
            *v = cap(&mut rng);
        }
        for i in 0..self.fs_hz.len() {
            self.fs_hz[i] = rng.sample(StandardNormal);
            self.lm[i] = rng.sample(StandardNormal);
            self.rm[i] = rng.sample(StandardNormal);
        }
    }

    /// Multiply the unit variates by the spec's scales.
    fn scale(&mut self, spec: &ToleranceSpec) {
        let a = spec.cap_scale();
        self.shunt.iter_mut().for_each(|v| *v *= a);
        self.series.iter_mut().for_each(|v| *v *= a);
        self.fs_hz.iter_mut().for_each(|v| *v *= spec.fs_sigma_hz);
        self.lm.iter_mut().for_each(|v| *v *= spec.lm_sigma);
        self.rm.iter_mut().for_each(|v| *v *= spec.rm_sigma);
    }
}

/// The grid of a run: frequencies and the angular frequencies every trial reuses.
struct Grid {
    f_hz: Vec<f64>,
    w: Vec<f64>,
    inv_w: Vec<f64>,
}

impl Grid {
    fn new(f_hz: Vec<f64>) -> Self {
        let w: Vec<f64> = f_hz.iter().map(|f| 2.0 * PI * f).collect();
        let inv_w = w.iter().map(|w| 1.0 / w).collect();
        Grid { f_hz, w, inv_w }
    }
}

/// One position of a perturbed ladder, as the analysis needs it.
#[derive(Debug, Clone, Copy, Default)]
struct Position {
    lm_h: f64,
    /// 1/Cm, 1/F.
    inv_cm: f64,
    rm_ohm: f64,
    c0_f: f64,
    /// 1/Cs of the series tuning capacitor, 0 when there is none (a short).
    inv_cs: f64,
    /// The shunt capacitor after this position, F (unused after the last one).
    shunt_f: f64,
}

/// Per-block scratch space: the perturbation, the perturbed ladder and its sweep.
struct Work {
    deltas: Deltas,
    positions: Vec<Position>,
    /// Perturbed crystals, used only for crystals with spurious modes.
    crystals: Vec<Crystal>,
    sweep: Sweep,
}

impl Work {
    fn new(design: &Design, grid: &Grid) -> Self {
        let n = design.order();
        // Ids are not needed for analysis.
        let crystals = design
            .crystals
            .iter()
            .map(|c| Crystal {
                id: String::new(),
                ..c.clone()
            })
            .collect();
        let points = grid.f_hz.len();
        Work {
            deltas: Deltas::zero(n),
            positions: vec![Position::default(); n],
            crystals,
            sweep: Sweep {
                f_hz: grid.f_hz.clone(),
                s21: Vec::with_capacity(points),
                s11: Vec::with_capacity(points),
                s22: Vec::new(),
                // The figures used here do not involve group delay; the analysis skips it.
                group_delay_s: vec![0.0; points],
            },
        }
    }

    /// Set the positions to `design` with its parts moved by `self.deltas`.
    fn perturb(&mut self, design: &Design) -> std::result::Result<(), FailureReason> {
        let d = &self.deltas;
        for (i, x) in design.crystals.iter().enumerate() {
            let p = &mut self.positions[i];
            p.shunt_f = match design.shunt_caps_f.get(i) {
                Some(c) => {
                    let f = 1.0 + d.shunt[i];
                    if f <= 0.0 {
                        return Err(FailureReason::NonPhysical);
                    }
                    c * f
                }
                None => 0.0,
            };
            p.inv_cs = match design.series_caps_f.get(i).copied().flatten() {
                Some(c) => {
                    let f = 1.0 + d.series[i];
                    if f <= 0.0 {
                        return Err(FailureReason::NonPhysical);
                    }
                    1.0 / (c * f)
                }
                None => 0.0,
            };
            let fs = x.fs_hz();
            let fs_new = fs + d.fs_hz[i];
            let lm_f = 1.0 + d.lm[i];
            if fs_new <= 0.0 || lm_f <= 0.0 {
                return Err(FailureReason::NonPhysical);
            }
            let r = fs / fs_new;
            // fs' = fs + δ at Lm' = Lm·(1 + εL): Cm' = Cm·(fs/fs')²/(1 + εL).
            let lm = x.motional.lm_h * lm_f;
            let cm = x.motional.cm_f * (r * r) / lm_f;
            let rm = (x.motional.rm_ohm * (1.0 + d.rm[i])).max(0.0);
            p.lm_h = lm;
            p.inv_cm = 1.0 / cm;
            p.rm_ohm = rm;
            p.c0_f = x.c0_f;
            if !x.spurious.is_empty() {
                let m = &mut self.crystals[i].motional;
                m.lm_h = lm;
                m.cm_f = cm;
                m.rm_ohm = rm;
            }
        }
        Ok(())
    }

    /// S21 and S11 of the perturbed ladder at every point of `grid`, into `self.sweep`.
    ///
    /// The chain-matrix cascade of [`crate::network`] without the ω-derivatives (group delay
    /// is not needed here): Rs ─ [Cs1 + X1] ─ C12 ─ … ─ [Csn + Xn] ─ RL.
    fn sweep(&mut self, design: &Design, grid: &Grid) {
        let (rs, rl) = (design.source_ohm, design.load_ohm);
        let n = self.positions.len();
        let s = &mut self.sweep;
        s.s21.clear();
        s.s11.clear();
        let k21 = 2.0 * (rs * rl).sqrt();
        for (&w, &inv_w) in grid.w.iter().zip(&grid.inv_w) {
            // [a b; c d], complex, as (re, im) pairs.
            let (mut a, mut b, mut c, mut d) = ((1.0, 0.0), (0.0, 0.0), (0.0, 0.0), (1.0, 0.0));
            for (i, p) in self.positions.iter().enumerate() {
                let crystal = &self.crystals[i];
                let (zr, zi) = if crystal.spurious.is_empty() {
                    // Z = zm / (1 + jωC0·zm), zm = Rm + jX, as in [`Crystal`].
                    let x = w * p.lm_h - inv_w * p.inv_cm;
                    let wc0 = w * p.c0_f;
                    let (er, ei) = (1.0 - wc0 * x, wc0 * p.rm_ohm);
                    let k = 1.0 / (er * er + ei * ei);
                    ((p.rm_ohm * er + x * ei) * k, (x * er - p.rm_ohm * ei) * k)
                } else {
                    let z = crystal.z_dz(w).0;
                    (z.re, z.im)
                };
                // Series: b += a·z, d += c·z.
                let zi = zi - inv_w * p.inv_cs;
                b = (b.0 + a.0 * zr - a.1 * zi, b.1 + a.0 * zi + a.1 * zr);
                d = (d.0 + c.0 * zr - c.1 * zi, d.1 + c.0 * zi + c.1 * zr);
                if i + 1 < n {
                    // Shunt: a += b·jB, c += d·jB.
                    let y = w * p.shunt_f;
                    a = (a.0 - b.1 * y, a.1 + b.0 * y);
                    c = (c.0 - d.1 * y, c.1 + d.0 * y);
                }
            }
            let a = C64::new(a.0, a.1) * rl;
            let b = C64::new(b.0, b.1);
            let c = C64::new(c.0, c.1) * (rs * rl);
            let d = C64::new(d.0, d.1) * rs;
            let den = a + b + c + d;
            let inv = den.conj() * (1.0 / den.norm_sqr());
            s.s21.push(inv * k21);
            s.s11.push((a + b - c - d) * inv);
        }
    }

    /// Analyse the perturbed design on `grid` into `self.sweep`; its figures or the reason
    /// there are none.
    fn analyse(
        &mut self,
        design: &Design,
        grid: &Grid,
    ) -> std::result::Result<TrialMetrics, FailureReason> {
        self.perturb(design)?;
        self.sweep(design, grid);
        let s = &self.sweep;
        if s.s21.iter().any(|x| !x.norm_sqr().is_finite()) {
            return Err(FailureReason::Numerical);
        }
        match Performance::from_sweep(s) {
            Ok(p) => {
                let m = TrialMetrics::from_performance(&p);
                if m.all_finite() {
                    Ok(m)
                } else {
                    Err(FailureReason::Numerical)
                }
            }
            Err(e) if e.kind() == ErrorKind::InvalidValue => Err(FailureReason::OutOfWindow),
            Err(_) => Err(FailureReason::Numerical),
        }
    }

    /// The ladder circuit of the current perturbation (for checks against the general path).
    #[cfg(test)]
    fn ladder(&self, design: &Design) -> Result<crate::network::Ladder> {
        let n = self.positions.len();
        let mut crystals = Vec::with_capacity(n);
        let mut series = Vec::with_capacity(n);
        let mut shunt = Vec::with_capacity(n);
        for (i, p) in self.positions.iter().enumerate() {
            crystals.push(Crystal {
                motional: crate::crystal::MotionalBranch {
                    rm_ohm: p.rm_ohm,
                    lm_h: p.lm_h,
                    cm_f: 1.0 / p.inv_cm,
                },
                ..self.crystals[i].clone()
            });
            series.push((p.inv_cs > 0.0).then(|| 1.0 / p.inv_cs));
            if i + 1 < n {
                shunt.push(p.shunt_f);
            }
        }
        crate::design::ladder_from_parts(
            &crystals,
            &series,
            &shunt,
            design.source_ohm,
            design.load_ohm,
            crate::network::Loss::Lossless,
        )
    }
}

/// Which limits `m` breaks.
fn judge(m: &TrialMetrics, limits: &Limits, bw6_ref: f64) -> Vec<FailureReason> {
    let mut out = Vec::new();
    if m.ripple_db > limits.max_ripple_db {
        out.push(FailureReason::Ripple);
    }
    if (m.bw_6db_hz / bw6_ref - 1.0).abs() > limits.bw6_tolerance {
        out.push(FailureReason::Bandwidth6);
    }
    if m.insertion_loss_db > limits.max_loss_db {
        out.push(FailureReason::InsertionLoss);
    }
    out
}

/// The result of one block of trials.
struct BlockOut {
    samples: Vec<TrialSample>,
    /// Smallest and largest |S21|² at each frequency over the block's analysed trials.
    min_sq: Vec<f64>,
    max_sq: Vec<f64>,
}

/// The analysis frequencies for a design (see the module docs).
fn window(design: &Design, points: usize) -> Result<Vec<f64>> {
    let p = &design.performance;
    let fc = require_positive("design performance.center_hz", p.center_hz)?;
    let b6 = require_positive("design performance.bw_6db_hz", p.bw_6db_hz)?;
    let mut half = 2.0 * b6;
    if let Some(b60) = p.bw_60db_hz.filter(|b| b.is_finite()) {
        half = half.max(0.625 * b60);
    }
    Ok(FrequencyGrid::linear(fc - half, fc + half, points)?.frequencies())
}

/// Run the Monte Carlo yield analysis of `design`.
///
/// Trials run in parallel on the current rayon pool (use `ThreadPool::install` to choose
/// one). `progress`, when given, is called from worker threads after each block of trials
/// with the number finished so far (calls from different threads may overlap), and once more
/// with `spec.trials` on the calling thread when every trial is done.
///
/// # Errors
/// A spec or limit out of range, an inconsistent design, or a design whose own nominal
/// passband is not found in its analysis window.
///
/// # Example
/// ```
/// use filter_core::design::{BandwidthAt, ResponseFamily};
/// use filter_core::synthesis::LadderSpec;
/// use filter_core::tolerance::{run_yield, Limits, ToleranceSpec};
/// use filter_core::Crystal;
///
/// let x = Crystal::from_fs_lm("Y", 9e6, 15e-3, 10.0, 4e-12)?;
/// let family = ResponseFamily::Chebyshev { ripple_db: 0.1 };
/// let design = LadderSpec::identical(family, 4, 2400.0, BandwidthAt::Db3, &x).synthesize()?;
/// let spec = ToleranceSpec { trials: 50, cap_tol: 0.02, fs_sigma_hz: 5.0, points: 301, ..Default::default() };
/// let report = run_yield(&design, &spec, &Limits::default_for(&design), None)?;
/// assert_eq!(report.samples.len(), 50);
/// assert!(report.yield_fraction > 0.9, "±2 % parts and 5 Hz crystals build this filter");
/// # Ok::<(), filter_core::Error>(())
/// ```
pub fn run_yield(
    design: &Design,
    spec: &ToleranceSpec,
    limits: &Limits,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<YieldReport> {
    spec.validate()?;
    limits.validate()?;
    design.validate()?;
    let grid = Grid::new(window(design, spec.points)?);
    let points = grid.f_hz.len();
    let bw6_ref = design.performance.bw_6db_hz;

    // The nominal on the trials' grid.
    let mut work = Work::new(design, &grid);
    // The record validated, so a nominal that cannot be analysed holds values no filter has
    // (or figures from another design): the input's fault.
    let nominal = work.analyse(design, &grid).map_err(|r| {
        Error::new(
            ErrorKind::InvalidValue,
            format!(
                "the nominal design could not be analysed on its yield window ({r:?}); expected component values of a real filter and performance.center_hz/bw_6db_hz from this design"
            ),
        )
    })?;
    let nominal_db: Vec<f64> = work.sweep.s21_db();

    let done = AtomicUsize::new(0);
    let blocks = spec.trials.div_ceil(BLOCK);
    let outs: Vec<BlockOut> = (0..blocks)
        .into_par_iter()
        .map(|b| {
            let mut w = Work::new(design, &grid);
            let lo = b * BLOCK;
            let hi = (lo + BLOCK).min(spec.trials);
            let mut out = BlockOut {
                samples: Vec::with_capacity(hi - lo),
                min_sq: vec![f64::INFINITY; points],
                max_sq: vec![f64::NEG_INFINITY; points],
            };
            for trial in lo..hi {
                w.deltas.draw_unit(spec.seed, trial, spec.cap_distribution);
                w.deltas.scale(spec);
                let r = w.analyse(design, &grid);
                // Every response that was swept and finite joins the envelope.
                let swept = match r {
                    Ok(_) | Err(FailureReason::OutOfWindow) => true,
                    Err(_) => false,
                };
                if swept {
                    for (k, x) in w.sweep.s21.iter().enumerate() {
                        let p = x.norm_sqr();
                        out.min_sq[k] = out.min_sq[k].min(p);
                        out.max_sq[k] = out.max_sq[k].max(p);
                    }
                }
                let sample = match r {
                    Ok(m) => {
                        let reasons = judge(&m, limits, bw6_ref);
                        TrialSample {
                            trial,
                            passed: reasons.is_empty(),
                            metrics: Some(m),
                            reasons,
                        }
                    }
                    Err(reason) => TrialSample {
                        trial,
                        passed: false,
                        metrics: None,
                        reasons: vec![reason],
                    },
                };
                out.samples.push(sample);
            }
            let d = done.fetch_add(hi - lo, Ordering::Relaxed) + (hi - lo);
            if let Some(p) = progress {
                p(d);
            }
            out
        })
        .collect();

    // Combine in block order.
    let mut samples = Vec::with_capacity(spec.trials);
    let mut min_sq = vec![f64::INFINITY; points];
    let mut max_sq = vec![f64::NEG_INFINITY; points];
    for o in outs {
        for k in 0..points {
            min_sq[k] = min_sq[k].min(o.min_sq[k]);
            max_sq[k] = max_sq[k].max(o.max_sq[k]);
        }
        samples.extend(o.samples);
    }
    let to_db = |sq: &[f64]| -> Vec<f64> {
        sq.iter()
            .zip(&nominal_db)
            .map(|(&p, &nom)| {
                if p.is_finite() {
                    10.0 * p.max(f64::MIN_POSITIVE).log10()
                } else {
                    nom
                }
            })
            .collect()
    };
    let envelope = Envelope {
        min_db: to_db(&min_sq),
        max_db: to_db(&max_sq),
        nominal_db,
        f_hz: grid.f_hz.clone(),
    };
    let mut failures = FailureCounts::default();
    let mut passed = 0;
    for s in &samples {
        if s.passed {
            passed += 1;
        }
        for &r in &s.reasons {
            failures.add(r);
        }
    }
    let metrics = Metric::ALL
        .iter()
        .filter_map(|&m| {
            let v: Vec<f64> = samples
                .iter()
                .filter_map(|s| s.metrics.and_then(|x| x.value(m)))
                .collect();
            stats::distribution(m, v)
        })
        .collect();
    let sensitivity = sensitivity(design, spec, limits, &nominal, bw6_ref, &grid);
    if let Some(p) = progress {
        p(spec.trials);
    }
    Ok(YieldReport {
        trials: spec.trials,
        passed,
        yield_fraction: passed as f64 / spec.trials as f64,
        limits: *limits,
        bw6_reference_hz: bw6_ref,
        nominal,
        metrics,
        sensitivity,
        envelope,
        samples,
        failures_by_reason: failures,
    })
}

/// Which part a sensitivity entry moves.
#[derive(Debug, Clone, Copy)]
enum Part {
    Shunt(usize),
    Series(usize),
    Fs(usize),
    Lm(usize),
    Rm(usize),
}

impl Part {
    fn name(self) -> String {
        match self {
            Part::Shunt(i) => {
                let (a, b) = (i + 1, i + 2);
                if b >= 10 {
                    format!("C{a},{b}")
                } else {
                    format!("C{a}{b}")
                }
            }
            Part::Series(i) => format!("Cs{}", i + 1),
            Part::Fs(i) => format!("Y{} fs", i + 1),
            Part::Lm(i) => format!("Y{} Lm", i + 1),
            Part::Rm(i) => format!("Y{} Rm", i + 1),
        }
    }

    fn set(self, d: &mut Deltas, v: f64) {
        match self {
            Part::Shunt(i) => d.shunt[i] = v,
            Part::Series(i) => d.series[i] = v,
            Part::Fs(i) => d.fs_hz[i] = v,
            Part::Lm(i) => d.lm[i] = v,
            Part::Rm(i) => d.rm[i] = v,
        }
    }
}

/// One-at-a-time sensitivities, ranked (see the module docs).
fn sensitivity(
    design: &Design,
    spec: &ToleranceSpec,
    limits: &Limits,
    nominal: &TrialMetrics,
    bw6_ref: f64,
    grid: &Grid,
) -> Vec<Sensitivity> {
    let n = design.order();
    let cap_sigma = spec.cap_sigma();
    let mut parts: Vec<(Part, f64)> = Vec::new();
    if cap_sigma > 0.0 {
        parts.extend((0..design.shunt_caps_f.len()).map(|i| (Part::Shunt(i), cap_sigma)));
        parts.extend(
            design
                .series_caps_f
                .iter()
                .enumerate()
                .filter(|(_, c)| c.is_some())
                .map(|(i, _)| (Part::Series(i), cap_sigma)),
        );
    }
    for i in 0..n {
        for (p, s) in [
            (Part::Fs(i), spec.fs_sigma_hz),
            (Part::Lm(i), spec.lm_sigma),
            (Part::Rm(i), spec.rm_sigma),
        ] {
            if s > 0.0 {
                parts.push((p, s));
            }
        }
    }
    // Margins the limits leave at the nominal, floored so that a design sitting on a limit
    // still ranks its parts.
    let margin = |limit: f64, nom: f64, floor: f64| (limit - nom).max(floor);
    let m_ripple = margin(limits.max_ripple_db, nominal.ripple_db, 0.01);
    let m_loss = margin(
        limits.max_loss_db,
        nominal.insertion_loss_db,
        (0.01 * nominal.insertion_loss_db).max(0.01),
    );
    let m_bw6 = (limits.bw6_tolerance * bw6_ref).max(0.01 * bw6_ref);
    let mut out: Vec<Sensitivity> = parts
        .par_iter()
        .map(|&(part, sigma)| {
            let mut w = Work::new(design, grid);
            let (mut ripple, mut bw6, mut loss) = (0.0f64, 0.0f64, 0.0f64);
            let mut failed = false;
            for sign in [-1.0, 1.0] {
                w.deltas = Deltas::zero(n);
                part.set(&mut w.deltas, sign * sigma);
                match w.analyse(design, grid) {
                    Ok(m) => {
                        ripple = ripple.max(m.ripple_db - nominal.ripple_db);
                        loss = loss.max(m.insertion_loss_db - nominal.insertion_loss_db);
                        bw6 = bw6.max((m.bw_6db_hz - nominal.bw_6db_hz).abs());
                    }
                    Err(_) => failed = true,
                }
            }
            let candidates = [
                (Metric::Ripple, ripple / m_ripple),
                (Metric::Bandwidth6, bw6 / m_bw6),
                (Metric::InsertionLoss, loss / m_loss),
            ];
            let (metric, mut score) =
                candidates
                    .iter()
                    .copied()
                    .fold((Metric::Ripple, f64::NEG_INFINITY), |a, b| {
                        if b.1 > a.1 {
                            b
                        } else {
                            a
                        }
                    });
            if failed {
                score = f64::INFINITY;
            }
            Sensitivity {
                part: part.name(),
                score,
                metric: if failed { Metric::Bandwidth6 } else { metric },
                sigma,
                ripple_db: ripple,
                bw6_hz: bw6,
                loss_db: loss,
            }
        })
        .collect();
    out.sort_by(|a, b| b.score.total_cmp(&a.score));
    out
}

//! From ideal values to parts in the drawer: rounding to a standard series, re-tuning the
//! meshes for the rounded coupling capacitors, and the as-built response beside the ideal one.
//!
//! Rounding every capacitor of a ladder independently detunes the meshes: the mesh-tuning
//! condition X_i(ω0) = 1/(ω0·Cs_i) + 1/(ω0·C(i−1,i)) + 1/(ω0·C(i,i+1)) (see
//! [`crate::synthesis`]) no longer holds and the ripple grows (0.2 dB designs typically go to
//! about 0.8 dB with single E24 values — common practice). Re-tuning rounds the coupling
//! (shunt) capacitors first, solves the series capacitors again for the rounded couplings at
//! the design centre, and only then rounds those, so the error of each mesh is the rounding
//! error of one capacitor instead of three.

use crate::design::Design;
use crate::error::{Error, Result};
use crate::metrics::Performance;
use crate::parts::{choose, Choice, Series};
use crate::synthesis::{nominal_b3, predict};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// How to choose parts.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RoundingOptions {
    /// The standard series for capacitors.
    pub series: Series,
    /// Allow a parallel pair where it is much closer than a single part.
    pub allow_pairs: bool,
    /// How many times smaller a pair's error must be before it is chosen.
    pub pair_gain: f64,
    /// Re-solve the series capacitors after rounding the shunt capacitors.
    pub retune: bool,
    /// Also round the terminations (to the same series, as resistors).
    pub round_terminations: bool,
}

impl Default for RoundingOptions {
    fn default() -> Self {
        RoundingOptions {
            series: Series::E24,
            allow_pairs: false,
            pair_gain: crate::parts::DEFAULT_PAIR_GAIN,
            retune: true,
            round_terminations: false,
        }
    }
}

/// The parts chosen for a design and its as-built response.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AsBuilt {
    /// Chosen shunt capacitors, in signal order.
    pub shunt: Vec<Choice>,
    /// Chosen series capacitors (`None`: no capacitor, a wire).
    pub series: Vec<Option<Choice>>,
    /// Ideal series values the chosen ones were rounded from (after re-tuning when it ran).
    pub series_target_f: Vec<Option<f64>>,
    /// Chosen terminations, Ω (rounded when asked, else the design's).
    pub source_ohm: f64,
    /// Chosen load termination, Ω.
    pub load_ohm: f64,
    /// The design with the chosen values in place.
    pub design: Design,
    /// Performance of the ideal design.
    pub ideal: Performance,
    /// Performance as built from the chosen parts.
    pub built: Performance,
    /// Notes (a mesh that could not be re-tuned, ...).
    pub notes: Vec<String>,
}

/// Choose parts for `design`.
///
/// # Errors
/// When a value cannot be rounded (non-finite) or the as-built circuit has no passband.
pub fn build_from_parts(design: &Design, opts: &RoundingOptions) -> Result<AsBuilt> {
    design.validate()?;
    let n = design.order();
    let f0 = design.center_hz;
    let w0 = 2.0 * PI * f0;
    let pick = |v: f64| choose(v, opts.series, opts.allow_pairs, opts.pair_gain);
    let shunt: Vec<Choice> = design
        .shunt_caps_f
        .iter()
        .map(|&c| pick(c))
        .collect::<Result<_>>()?;
    let mut notes = Vec::new();
    let series_target: Vec<Option<f64>> = if opts.retune {
        (0..n)
            .map(|i| {
                // Keep each mesh's reactance balance as the design has it (a refined design sits
                // deliberately off the nominal tuning condition): the series capacitor takes up
                // exactly the change in the shunt capacitors' reactance caused by rounding.
                let x = design.crystals[i].impedance(f0).im;
                let elastance = |c: Option<f64>| c.map_or(0.0, |c| 1.0 / (w0 * c));
                let mut m = elastance(design.series_caps_f[i]);
                if i > 0 {
                    m += 1.0 / (w0 * design.shunt_caps_f[i - 1]) - 1.0 / (w0 * shunt[i - 1].value());
                }
                if i + 1 < n {
                    m += 1.0 / (w0 * design.shunt_caps_f[i]) - 1.0 / (w0 * shunt[i].value());
                }
                // Keep a wire where the design has one, unless re-tuning needs a capacitor.
                if m <= 1e-9 * x.abs() {
                    if design.series_caps_f[i].is_some() || m < -1e-3 * x.abs() {
                        notes.push(format!(
                            "mesh {} cannot be re-tuned with a capacitor after rounding (it would need {:.1} Ω more inductive reactance); it is left without one",
                            i + 1,
                            -m
                        ));
                    }
                    None
                } else {
                    Some(1.0 / (w0 * m))
                }
            })
            .collect()
    } else {
        design.series_caps_f.clone()
    };
    let mut series: Vec<Option<Choice>> = series_target
        .iter()
        .map(|c| c.map(pick).transpose())
        .collect::<Result<_>>()?;
    if opts.retune {
        choose_rounding_directions(design, &shunt, &series_target, &mut series, opts.series)?;
    }
    let (source_ohm, load_ohm) = if opts.round_terminations {
        (
            crate::parts::nearest(design.source_ohm, opts.series)?,
            crate::parts::nearest(design.load_ohm, opts.series)?,
        )
    } else {
        (design.source_ohm, design.load_ohm)
    };
    let mut built = design.clone();
    built.shunt_caps_f = shunt.iter().map(Choice::value).collect();
    built.series_caps_f = series
        .iter()
        .map(|c| c.as_ref().map(Choice::value))
        .collect();
    built.source_ohm = source_ohm;
    built.load_ohm = load_ohm;
    let ideal = design.performance;
    // Keep the kind: a circuit of absurd values is the input's fault, not a numerical one.
    let perf = predict(&built).map_err(|e| {
        Error::new(
            e.kind(),
            format!(
                "the as-built circuit could not be analysed: {}",
                e.message()
            ),
        )
    })?;
    let _ = nominal_b3;
    built.performance = perf;
    Ok(AsBuilt {
        shunt,
        series,
        series_target_f: series_target,
        source_ohm,
        load_ohm,
        design: built,
        ideal,
        built: perf,
        notes,
    })
}

/// The members of `series` just below and just above `value` (equal when it is a member).
fn bracket(value: f64, series: Series) -> (f64, f64) {
    let decade = 10f64.powf(value.log10().floor());
    let mut below = f64::NEG_INFINITY;
    let mut above = f64::INFINITY;
    for scale in [decade / 10.0, decade, decade * 10.0] {
        for &m in series.mantissas() {
            // Build the value as the parts module does (exact decimal mantissa times a power
            // of ten), so members compare equal.
            let v = m * scale;
            if v <= value * (1.0 + 1e-12) && v > below {
                below = v;
            }
            if v >= value * (1.0 - 1e-12) && v < above {
                above = v;
            }
        }
    }
    (below, above)
}

/// Re-tuning, second half: each rounded series capacitor may go to the series member below or
/// above its re-solved value. Coordinate descent over the meshes picks, for each, the direction
/// that brings the as-built |S21| closest to the ideal one (mean square dB difference over the
/// ideal −6 dB band, plus the square of any ripple rounding adds); two passes. Parallel pairs are already close and are left as chosen.
fn choose_rounding_directions(
    design: &Design,
    shunt: &[Choice],
    targets: &[Option<f64>],
    series: &mut [Option<Choice>],
    s: Series,
) -> Result<()> {
    use crate::network::{db, Analyze};
    let ideal_ladder = design.to_ladder()?;
    let p = design.performance;
    let [lo, hi] = p.edges_6db_hz;
    let f: Vec<f64> = (0..121)
        .map(|i| lo + (hi - lo) * i as f64 / 120.0)
        .collect();
    let ideal: Vec<f64> = ideal_ladder
        .sweep_at(&f)
        .s21
        .iter()
        .map(|&x| db(x))
        .collect();
    let shunt_f: Vec<f64> = shunt.iter().map(Choice::value).collect();
    let cost = |series: &[Option<Choice>]| -> Result<f64> {
        let caps: Vec<Option<f64>> = series
            .iter()
            .map(|c| c.as_ref().map(Choice::value))
            .collect();
        let lad = crate::design::ladder_from_parts(
            &design.crystals,
            &caps,
            &shunt_f,
            design.source_ohm,
            design.load_ohm,
            crate::network::Loss::Lossless,
        )?;
        let got = lad.sweep_at(&f);
        let shape = got
            .s21
            .iter()
            .zip(&ideal)
            .map(|(x, y)| (db(*x) - y).powi(2))
            .sum::<f64>()
            / f.len() as f64;
        // Ripple added by rounding counts on its own: it is what a builder sees first.
        let extra_ripple = match crate::synthesis::predict_ladder(&lad, p.center_hz, p.bw_3db_hz) {
            Ok(q) => (q.ripple_db - p.ripple_db).max(0.0),
            Err(_) => return Ok(f64::INFINITY),
        };
        Ok(shape + 100.0 * extra_ripple * extra_ripple)
    };
    // Start from the better of the re-solved values and plain rounding of the design's own.
    let plain: Vec<Option<Choice>> = design
        .series_caps_f
        .iter()
        .map(|c| c.map(|c| choose(c, s, false, 1.0)).transpose())
        .collect::<Result<_>>()?;
    let mut best = cost(series)?;
    let plain_cost = cost(&plain)?;
    if plain_cost < best
        && plain
            .iter()
            .zip(series.iter())
            .all(|(a, b)| a.is_some() == b.is_some())
    {
        series.copy_from_slice(&plain);
        best = plain_cost;
    }
    for _ in 0..2 {
        for i in 0..series.len() {
            let (Some(target), Some(Choice::Single(current))) = (targets[i], series[i]) else {
                continue;
            };
            let (below, above) = bracket(target, s);
            let original = design.series_caps_f[i].map_or(f64::NAN, |c| bracket(c, s).0);
            let original_up = design.series_caps_f[i].map_or(f64::NAN, |c| bracket(c, s).1);
            for alt in [below, above, original, original_up] {
                if !alt.is_finite() || alt == current {
                    continue;
                }
                let keep = series[i];
                series[i] = Some(Choice::Single(alt));
                let c = cost(series)?;
                if c < best {
                    best = c;
                } else {
                    series[i] = keep;
                }
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::crystal::Crystal;
    use crate::design::{BandwidthAt, ResponseFamily};
    use crate::synthesis::LadderSpec;

    /// Lossless crystals: with Rm the dissipation rounds the passband and hides the ripple
    /// that rounding adds.
    fn demo_like() -> Design {
        let x = Crystal::from_fs_lm("Y", 9e6, 15e-3, 0.0, 4e-12).unwrap();
        let mut s = LadderSpec::identical(
            ResponseFamily::Chebyshev { ripple_db: 0.2 },
            8,
            2400.0,
            BandwidthAt::Db6,
            &x,
        );
        s.refine = false;
        s.synthesize().unwrap()
    }

    #[test]
    fn chosen_values_are_series_members_and_metrics_are_recomputable() {
        let d = demo_like();
        for pairs in [false, true] {
            let opts = RoundingOptions {
                allow_pairs: pairs,
                ..Default::default()
            };
            let b = build_from_parts(&d, &opts).unwrap();
            let member = |v: f64| {
                let e = (v.log10() - v.log10().floor()) * 1.0;
                let m = 10f64.powf(e);
                Series::E24
                    .mantissas()
                    .iter()
                    .any(|&s| (s / m - 1.0).abs() < 1e-9 || (s / (m * 10.0) - 1.0).abs() < 1e-9)
            };
            for c in b.shunt.iter().chain(b.series.iter().flatten()) {
                for p in c.parts() {
                    assert!(member(p), "{p} is not an E24 value");
                }
                if !pairs {
                    assert!(matches!(c, Choice::Single(_)));
                }
            }
            let again = predict(&b.design).unwrap();
            assert_eq!(again, b.built);
        }
    }

    #[test]
    fn retuning_helps() {
        let d = demo_like();
        let plain = build_from_parts(
            &d,
            &RoundingOptions {
                retune: false,
                ..Default::default()
            },
        )
        .unwrap();
        let tuned = build_from_parts(&d, &RoundingOptions::default()).unwrap();
        eprintln!(
            "ideal ripple {:.3} dB, rounded {:.3} dB, rounded and re-tuned {:.3} dB",
            d.performance.ripple_db, plain.built.ripple_db, tuned.built.ripple_db
        );
        assert!(tuned.built.ripple_db <= plain.built.ripple_db);
        let paired = build_from_parts(
            &d,
            &RoundingOptions {
                allow_pairs: true,
                ..Default::default()
            },
        )
        .unwrap();
        eprintln!(
            "with parallel pairs and re-tuning {:.3} dB",
            paired.built.ripple_db
        );
        assert!(paired.built.ripple_db <= tuned.built.ripple_db);
    }
}

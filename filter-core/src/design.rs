//! The design record: the one value every later step (analysis, parts, yield, exports) reads.
//!
//! It round-trips JSON and carries a schema version. Field names are part of the command-line
//! contract: `center_hz`, `source_ohm`, `load_ohm`, `crystals`, `shunt_caps_f` (n − 1, from the
//! node after crystal i to ground), `series_caps_f` (n, `null` = no capacitor), `k`, `q`
//! (`[q_in, q_out]`, normalized to the −3 dB bandwidth) and `performance`.

use crate::crystal::Crystal;
use crate::error::{Error, ErrorKind, Result};
use crate::metrics::Performance;
use crate::network::{Branch, Element, Ladder, Loss, Stage};
use serde::{Deserialize, Serialize};

/// The schema version this library writes and reads.
pub const DESIGN_SCHEMA_VERSION: u32 = 1;

/// The response family of a design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "name", rename_all = "kebab-case")]
pub enum ResponseFamily {
    /// Maximally flat.
    Butterworth,
    /// Equiripple passband with the given ripple.
    Chebyshev {
        /// Passband ripple, dB.
        ripple_db: f64,
    },
    /// Maximally flat delay (Bessel–Thomson).
    Bessel,
    /// Gaussian magnitude approximation.
    Gaussian,
    /// Optimum-L (Legendre–Papoulis).
    Legendre,
    /// All coupling capacitors equal (equal-element prototype, after Cohn 1959).
    EqualC,
    /// An all-pole response given by its normalized poles (left half-plane).
    Poles {
        /// Real parts.
        re: Vec<f64>,
        /// Imaginary parts.
        im: Vec<f64>,
    },
}

/// Which bandwidth the user gave.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum BandwidthAt {
    /// Between the −3 dB points.
    #[default]
    #[serde(rename = "3db")]
    Db3,
    /// Between the −6 dB points.
    #[serde(rename = "6db")]
    Db6,
    /// Between the ripple edges (Chebyshev only).
    Ripple,
}

/// What the user asked for.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DesignSpec {
    /// Response family.
    pub family: ResponseFamily,
    /// Number of crystals.
    pub order: usize,
    /// The bandwidth, Hz, at the level `bandwidth_at` says.
    pub bandwidth_hz: f64,
    /// Which bandwidth `bandwidth_hz` is.
    pub bandwidth_at: BandwidthAt,
    /// Uniform-dissipation predistortion for the crystals' Qu.
    pub predistort: bool,
    /// Numerical refinement on the exact model.
    pub refine: bool,
}

/// What numerical refinement changed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RefinementReport {
    /// Iterations taken.
    pub iterations: usize,
    /// Ripple before and after, dB.
    pub ripple_db: [f64; 2],
    /// −3 dB bandwidth before and after, Hz.
    pub bw_3db_hz: [f64; 2],
    /// Largest relative change of any capacitor (series capacitors by their reactance, so one
    /// that became a wire counts as 1.0).
    pub max_cap_change: f64,
    /// Relative change of the source and load resistances.
    pub termination_change: [f64; 2],
}

/// A complete crystal ladder design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Design {
    /// Schema version of this record.
    pub schema_version: u32,
    /// What was asked for.
    pub spec: DesignSpec,
    /// Mesh-tuning centre of the design, Hz.
    pub center_hz: f64,
    /// Source termination, Ω.
    pub source_ohm: f64,
    /// Load termination, Ω.
    pub load_ohm: f64,
    /// The crystals in signal order (copied unchanged from the input).
    pub crystals: Vec<Crystal>,
    /// Shunt coupling capacitors, F: n − 1 of them, from the node after crystal i to ground.
    pub shunt_caps_f: Vec<f64>,
    /// Series mesh-tuning capacitors, F, one per crystal; `None` is a short.
    pub series_caps_f: Vec<Option<f64>>,
    /// Coupling coefficients k(i,i+1), normalized to the −3 dB bandwidth.
    pub k: Vec<f64>,
    /// End loaded Q values [q_in, q_out], normalized to the −3 dB bandwidth.
    pub q: [f64; 2],
    /// Prototype element values g0 … g(n+1) used.
    pub g: Vec<f64>,
    /// Smallest normalized resonator Q the response tolerates (1/min|Re p|, 3 dB scale).
    pub q_min: f64,
    /// The crystals' normalized unloaded Q, Qu·(B3/f0), when finite.
    pub q0: Option<f64>,
    /// Cohn's estimate of the centre loss from finite Qu, dB, when Qu is finite.
    pub cohn_loss_db: Option<f64>,
    /// Predicted performance of this design (exact model).
    pub performance: Performance,
    /// Cautions about the design (strong asymmetry, Q margin, ...).
    pub warnings: Vec<String>,
    /// What refinement changed, when it ran.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub refinement: Option<RefinementReport>,
}

/// # Conversion
impl Design {
    /// Order (number of crystals).
    pub fn order(&self) -> usize {
        self.crystals.len()
    }

    /// The circuit this design describes, as a ladder for analysis.
    ///
    /// # Errors
    /// When the record is inconsistent (see [`Design::validate`]).
    pub fn to_ladder(&self) -> Result<Ladder> {
        self.validate()?;
        ladder_from_parts(
            &self.crystals,
            &self.series_caps_f,
            &self.shunt_caps_f,
            self.source_ohm,
            self.load_ohm,
            Loss::Lossless,
        )
    }

    /// Check lengths and values: n crystals, n series entries, n − 1 shunt capacitors, all
    /// values finite and positive.
    ///
    /// # Errors
    /// Naming the first field that is wrong.
    pub fn validate(&self) -> Result<()> {
        let n = self.crystals.len();
        if n == 0 {
            return Err(Error::invalid(
                "crystals",
                "an empty list",
                "at least one crystal",
            ));
        }
        if self.series_caps_f.len() != n {
            return Err(Error::invalid(
                "series_caps_f",
                format!("{} entries", self.series_caps_f.len()),
                &format!("{n} entries, one per crystal (null for none)"),
            ));
        }
        if self.shunt_caps_f.len() + 1 != n {
            return Err(Error::invalid(
                "shunt_caps_f",
                format!("{} entries", self.shunt_caps_f.len()),
                &format!("{} entries (one between each pair of crystals)", n - 1),
            ));
        }
        for (i, c) in self.shunt_caps_f.iter().enumerate() {
            crate::error::require_positive(&format!("shunt_caps_f[{i}]"), *c)?;
        }
        for (i, c) in self.series_caps_f.iter().enumerate() {
            if let Some(c) = c {
                crate::error::require_positive(&format!("series_caps_f[{i}]"), *c)?;
            }
        }
        crate::error::require_positive("source_ohm", self.source_ohm)?;
        crate::error::require_positive("load_ohm", self.load_ohm)?;
        crate::error::require_positive("center_hz", self.center_hz)?;
        Ok(())
    }

    /// Read a design record from JSON text.
    ///
    /// # Errors
    /// Malformed JSON, a missing or unknown field, another schema version, or inconsistent
    /// values; the message names the field.
    pub fn from_json(text: &str) -> Result<Design> {
        let v: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| Error::parse(format!("design file is not valid JSON: {e}")))?;
        match v.get("schema_version").and_then(|s| s.as_u64()) {
            Some(x) if x == DESIGN_SCHEMA_VERSION as u64 => {}
            Some(x) => {
                return Err(Error::invalid(
                    "schema_version",
                    x,
                    &format!("{DESIGN_SCHEMA_VERSION} (this program's design format)"),
                ))
            }
            None => return Err(Error::parse(
                "design file has no schema_version field; is it a design written by this program?",
            )),
        }
        let d: Design = serde_json::from_value(v)
            .map_err(|e| Error::new(ErrorKind::Parse, format!("design file: {e}")))?;
        d.validate()?;
        Ok(d)
    }

    /// The record as pretty JSON text.
    pub fn to_json(&self) -> String {
        // Serialization of plain numbers and strings cannot fail.
        serde_json::to_string_pretty(self).unwrap_or_default()
    }
}

/// The ladder circuit for crystals, series tuning capacitors, shunt capacitors and
/// terminations, capacitors with loss `cap_loss`.
///
/// # Errors
/// Length mismatch or non-positive terminations.
pub fn ladder_from_parts(
    crystals: &[Crystal],
    series_caps_f: &[Option<f64>],
    shunt_caps_f: &[f64],
    source_ohm: f64,
    load_ohm: f64,
    cap_loss: Loss,
) -> Result<Ladder> {
    let n = crystals.len();
    if series_caps_f.len() != n || shunt_caps_f.len() + 1 != n {
        return Err(Error::invalid(
            "ladder",
            format!(
                "{n} crystals, {} series and {} shunt capacitors",
                series_caps_f.len(),
                shunt_caps_f.len()
            ),
            "n crystals, n series entries and n − 1 shunt capacitors",
        ));
    }
    let mut stages = Vec::with_capacity(2 * n);
    for i in 0..n {
        let x = Branch::Element(Element::Crystal(crystals[i].clone()));
        let series = match series_caps_f[i] {
            Some(c) => Branch::Series(vec![Branch::Element(Element::Capacitor(c, cap_loss)), x]),
            None => x,
        };
        stages.push(Stage::Series(series));
        if i + 1 < n {
            stages.push(Stage::Shunt(Branch::Element(Element::Capacitor(
                shunt_caps_f[i],
                cap_loss,
            ))));
        }
    }
    Ladder::new(source_ohm, load_ohm, stages)
}

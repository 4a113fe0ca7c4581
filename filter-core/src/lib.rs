//! # filter-core
//!
//! Design crystal ladder band-pass filters from the crystals actually on the bench.
//!
//! The modules follow the data, in the order a builder uses them:
//!
//! 1. [`units`]: engineering-notation values (`9.000 MHz`, `4k7`, `3p5`) in and out.
//! 2. [`crystal`]: the Butterworth–Van Dyke crystal model with spurious modes.
//! 3. [`io`]: sweep CSV and Touchstone readers, SPICE netlist writer.
//! 4. [`measure`]: crystal parameters from sweeps, oscillator shift, and by-hand readings.
//! 5. [`batch`]: batch records and matched-set selection.
//! 6. [`prototype`]: lowpass prototypes (g-values) by Darlington synthesis.
//! 7. [`synthesis`]: the crystal ladder for a target response and the exact crystals.
//! 8. [`network`]: circuit analysis (nodal solver and the ladder fast path), sweeps.
//! 9. [`metrics`]: loss, ripple, bandwidths, shape factor, return loss, delay figures.
//! 10. [`design`]: the design record every later step reads.
//! 11. [`parts`]: standard values, parallel pairs, re-tuning after rounding.
//! 12. [`impedance_match`]: L-networks and transformers to the system impedance.
//! 13. [`tolerance`]: Monte Carlo yield and sensitivity.
//! 14. [`plot`]: SVG plots.
//!
//! # Example
//!
//! ```
//! use filter_core::crystal::Crystal;
//! use filter_core::design::{BandwidthAt, ResponseFamily};
//! use filter_core::synthesis::LadderSpec;
//!
//! # fn main() -> Result<(), filter_core::Error> {
//! let crystal = Crystal::from_fs_lm("Y", 9e6, 15e-3, 10.0, 4e-12)?;
//! let spec = LadderSpec::identical(ResponseFamily::Butterworth, 4, 2400.0, BandwidthAt::Db3, &crystal);
//! let design = spec.synthesize()?;
//! // The exact analysis of the realized ladder (C0 and Rm included) meets the bandwidth.
//! approx::assert_relative_eq!(design.performance.bw_3db_hz, 2400.0, max_relative = 0.03);
//! assert_eq!(design.shunt_caps_f.len(), 3);
//! # Ok(())
//! # }
//! ```
//!
//! # Conventions
//! - SI base units inside the library: Hz, H, F, Ω, s. Angular frequencies are named `w_rad_s`
//!   or `w`; frequencies in hertz `f_hz`. Engineering notation appears only at the edges.
//! - S-parameters are referred to the actual source and load resistances (which may differ):
//!   |S21|² is the fraction of the source's available power delivered to the load, so 0 dB means
//!   lossless and matched. Insertion loss is −20·log10|S21| (positive dB for a loss).
//! - Group delay is τ = −dφ/dω of S21, computed analytically (forward-mode derivative of every
//!   element impedance carried through the analysis), not by differencing phase.
//! - Positions are numbered 1..n in signal order; shunt capacitor i sits at the node after
//!   crystal i; a series tuning capacitor of `None` is a short.

#![deny(missing_docs)]

pub mod as_built;
pub mod batch;
pub mod crystal;
pub mod design;
pub mod error;
pub mod impedance_match;
pub mod io;
pub mod measure;
pub mod metrics;
pub mod network;
pub mod parts;
pub mod plot;
pub mod prototype;
pub mod synthesis;
pub mod tolerance;
pub mod units;

pub use crystal::{Crystal, MotionalBranch};
pub use error::{Error, ErrorKind, Result};

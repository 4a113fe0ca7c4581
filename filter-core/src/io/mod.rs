//! Readers and writers of the file formats: pure text in, values out (and back).
//!
//! Nothing here opens files: callers pass `&str` or an `impl std::io::Write`.

pub mod spice;
pub mod sweep_csv;
pub mod touchstone;

/// A measured transmission trace of one crystal in a series through-fixture, as read from a
/// sweep CSV or a Touchstone file: the common input of [`crate::measure`].
#[derive(Debug, Clone, PartialEq)]
pub struct MeasuredTrace {
    /// Frequencies, Hz, strictly increasing.
    pub f_hz: Vec<f64>,
    /// |S21| in dB (power ratio, 20·log10 of the voltage ratio), one per frequency.
    pub s21_db: Vec<f64>,
    /// Phase of S21 in degrees, when the instrument gave it.
    pub s21_deg: Option<Vec<f64>>,
    /// Reference resistance stated by the file (Touchstone option line), Ω, if any.
    pub reference_ohm: Option<f64>,
}

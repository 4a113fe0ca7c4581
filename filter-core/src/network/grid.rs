//! Frequency grids for sweeps.

use crate::error::{require_positive, Error, Result};

/// How the points of a grid are spaced.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Spacing {
    /// Equal steps in hertz.
    #[default]
    Linear,
    /// Equal ratios (equal steps in log f).
    Logarithmic,
}

/// A set of frequencies to analyse: `points` frequencies from `start_hz` to `stop_hz`
/// inclusive.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrequencyGrid {
    start_hz: f64,
    stop_hz: f64,
    points: usize,
    spacing: Spacing,
}

impl FrequencyGrid {
    /// From the first and last frequency.
    ///
    /// # Errors
    /// When a frequency is not finite and positive, `stop_hz <= start_hz` with more than one
    /// point, or `points` is zero.
    pub fn from_to(start_hz: f64, stop_hz: f64, points: usize, spacing: Spacing) -> Result<Self> {
        require_positive("start frequency", start_hz)?;
        require_positive("stop frequency", stop_hz)?;
        if points == 0 {
            return Err(Error::invalid("points", 0, "at least 1"));
        }
        if points > 1 && stop_hz <= start_hz {
            return Err(Error::invalid(
                "stop frequency",
                format!("{stop_hz} Hz"),
                &format!("a frequency above the start frequency {start_hz} Hz"),
            ));
        }
        Ok(FrequencyGrid {
            start_hz,
            stop_hz,
            points,
            spacing,
        })
    }

    /// A linear grid from the first to the last frequency.
    ///
    /// # Errors
    /// As [`FrequencyGrid::from_to`].
    pub fn linear(start_hz: f64, stop_hz: f64, points: usize) -> Result<Self> {
        Self::from_to(start_hz, stop_hz, points, Spacing::Linear)
    }

    /// A logarithmic grid from the first to the last frequency.
    ///
    /// # Errors
    /// As [`FrequencyGrid::from_to`].
    pub fn logarithmic(start_hz: f64, stop_hz: f64, points: usize) -> Result<Self> {
        Self::from_to(start_hz, stop_hz, points, Spacing::Logarithmic)
    }

    /// Centred on `center_hz` with full width `span_hz`. For a logarithmic grid the centre is
    /// the arithmetic midpoint of the ends, as on an analyzer.
    ///
    /// # Errors
    /// When the span is not positive or reaches 0 Hz.
    pub fn centered(center_hz: f64, span_hz: f64, points: usize, spacing: Spacing) -> Result<Self> {
        require_positive("centre frequency", center_hz)?;
        require_positive("span", span_hz)?;
        if span_hz >= 2.0 * center_hz {
            return Err(Error::invalid(
                "span",
                format!("{span_hz} Hz"),
                &format!(
                    "less than twice the centre frequency ({} Hz)",
                    2.0 * center_hz
                ),
            ));
        }
        Self::from_to(
            center_hz - span_hz / 2.0,
            center_hz + span_hz / 2.0,
            points,
            spacing,
        )
    }

    /// Number of points.
    pub fn points(&self) -> usize {
        self.points
    }

    /// First frequency, Hz.
    pub fn start_hz(&self) -> f64 {
        self.start_hz
    }

    /// Last frequency, Hz.
    pub fn stop_hz(&self) -> f64 {
        self.stop_hz
    }

    /// The spacing.
    pub fn spacing(&self) -> Spacing {
        self.spacing
    }

    /// The frequency of point `i` (0-based).
    #[inline]
    pub fn at(&self, i: usize) -> f64 {
        if self.points == 1 {
            return self.start_hz;
        }
        let t = i as f64 / (self.points - 1) as f64;
        match self.spacing {
            Spacing::Linear => self.start_hz + t * (self.stop_hz - self.start_hz),
            Spacing::Logarithmic => self.start_hz * (self.stop_hz / self.start_hz).powf(t),
        }
    }

    /// The frequencies in order.
    pub fn iter(&self) -> impl Iterator<Item = f64> + '_ {
        (0..self.points).map(move |i| self.at(i))
    }

    /// The frequencies as a vector.
    pub fn frequencies(&self) -> Vec<f64> {
        self.iter().collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ends_are_exact_and_spacing_holds() {
        let g = FrequencyGrid::linear(1e6, 2e6, 11).unwrap();
        let f = g.frequencies();
        assert_eq!(f[0], 1e6);
        assert_eq!(f[10], 2e6);
        assert!((f[1] - f[0] - 1e5).abs() < 1e-6);
        let g = FrequencyGrid::logarithmic(1e3, 1e6, 4).unwrap();
        let f = g.frequencies();
        assert!((f[1] - 1e4).abs() < 1e-6 && (f[2] - 1e5).abs() < 1e-5);
    }

    #[test]
    fn centered_grid() {
        let g = FrequencyGrid::centered(9e6, 10e3, 3, Spacing::Linear).unwrap();
        assert_eq!(g.frequencies(), vec![8.995e6, 9e6, 9.005e6]);
    }

    #[test]
    fn bad_grids_are_errors() {
        assert!(FrequencyGrid::linear(2e6, 1e6, 10).is_err());
        assert!(FrequencyGrid::linear(1e6, 2e6, 0).is_err());
        assert!(FrequencyGrid::linear(f64::NAN, 2e6, 5).is_err());
        assert!(FrequencyGrid::centered(1e6, 3e6, 5, Spacing::Linear).is_err());
    }
}

//! The ladder fast path: a cascade of series and shunt branches analysed by chain matrices.

use super::{Analyze, Branch, Response};
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
        Ok(Ladder {
            source_ohm,
            load_ohm,
            stages,
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
        for s in &self.stages {
            match s {
                Stage::Series(br) => {
                    // [a b; c d]·[1 z; 0 1] = [a, a·z + b; c, c·z + d]
                    let (z, dz) = br.z_dz(w);
                    db = da * z + a * dz + db;
                    dd = dc * z + c * dz + dd;
                    b += a * z;
                    d += c * z;
                }
                Stage::Shunt(br) => {
                    // [a b; c d]·[1 0; y 1] = [a + b·y, b; c + d·y, d]
                    let (y, dy) = br.y_dy(w);
                    da = da + db * y + b * dy;
                    dc = dc + dd * y + d * dy;
                    a += b * y;
                    c += d * y;
                }
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
        let inv = den.inv();
        Response {
            f_hz: w / (2.0 * PI),
            s21: inv * (2.0 * (rs * rl).sqrt()),
            s11: (ar + b - crr - dr) * inv,
            s22: (-ar + b - crr + dr) * inv,
            group_delay_s: (dden * inv).im,
        }
    }
}

impl Analyze for Ladder {
    #[inline]
    fn response(&self, f_hz: f64) -> Response {
        self.response_w(2.0 * PI * f_hz)
    }
}

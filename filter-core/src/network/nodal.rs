//! The general nodal solver: a dense complex admittance matrix solved by LU decomposition.

use super::{Analyze, Branch, Ladder, Response, Stage};
use crate::error::{require_positive, Error, Result};
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;
use std::f64::consts::PI;

/// A netlist of branches between numbered nodes (0 is ground), driven from a source resistance
/// at `input` and terminated by a load resistance at `output`.
#[derive(Debug, Clone, PartialEq)]
pub struct Circuit {
    nodes: usize,
    branches: Vec<(usize, usize, Branch)>,
    input: usize,
    output: usize,
    source_ohm: f64,
    load_ohm: f64,
}

impl Circuit {
    /// A circuit with nodes 1..=`nodes` (0 is ground).
    ///
    /// # Errors
    /// When a termination is not positive, a node number is out of range, a branch connects a
    /// node to itself, or input and output are the same node.
    pub fn new(
        nodes: usize,
        branches: Vec<(usize, usize, Branch)>,
        input: usize,
        output: usize,
        source_ohm: f64,
        load_ohm: f64,
    ) -> Result<Self> {
        require_positive("source resistance", source_ohm)?;
        require_positive("load resistance", load_ohm)?;
        let valid = format!("a node number from 0 to {nodes}");
        for &(a, b, _) in &branches {
            if a > nodes || b > nodes {
                return Err(Error::invalid("branch node", a.max(b), &valid));
            }
            if a == b {
                return Err(Error::invalid(
                    "branch",
                    format!("{a}-{b}"),
                    "two different nodes",
                ));
            }
        }
        if input == 0 || input > nodes || output == 0 || output > nodes || input == output {
            return Err(Error::invalid(
                "ports",
                format!("input {input}, output {output}"),
                &format!("two different nodes from 1 to {nodes}"),
            ));
        }
        Ok(Circuit {
            nodes,
            branches,
            input,
            output,
            source_ohm,
            load_ohm,
        })
    }

    fn solve(
        &self,
        w: f64,
        drive: usize,
        r_drive: f64,
    ) -> (DVector<Complex64>, DVector<Complex64>) {
        let n = self.nodes;
        let zero = Complex64::new(0.0, 0.0);
        let mut y = DMatrix::from_element(n, n, zero);
        let mut dy = DMatrix::from_element(n, n, zero);
        for (a, b, br) in &self.branches {
            let (z, dz) = br.z_dz(w);
            let g = z.inv();
            let dg = -dz * g * g;
            for (p, q, s) in [(*a, *a, 1.0), (*b, *b, 1.0), (*a, *b, -1.0), (*b, *a, -1.0)] {
                if p > 0 && q > 0 {
                    y[(p - 1, q - 1)] += g * s;
                    dy[(p - 1, q - 1)] += dg * s;
                }
            }
        }
        y[(self.input - 1, self.input - 1)] += Complex64::new(1.0 / self.source_ohm, 0.0);
        y[(self.output - 1, self.output - 1)] += Complex64::new(1.0 / self.load_ohm, 0.0);
        let mut i = DVector::from_element(n, zero);
        // A 1 V EMF behind r_drive, as a Norton current.
        i[drive - 1] = Complex64::new(1.0 / r_drive, 0.0);
        let lu = y.lu();
        let v = lu
            .solve(&i)
            .unwrap_or_else(|| DVector::from_element(n, Complex64::new(f64::NAN, f64::NAN)));
        let rhs = -(&dy * &v);
        let dv = lu
            .solve(&rhs)
            .unwrap_or_else(|| DVector::from_element(n, Complex64::new(f64::NAN, f64::NAN)));
        (v, dv)
    }
}

impl Analyze for Circuit {
    fn response(&self, f_hz: f64) -> Response {
        let w = 2.0 * PI * f_hz;
        let (rs, rl) = (self.source_ohm, self.load_ohm);
        let (i, o) = (self.input - 1, self.output - 1);
        let (v, dv) = self.solve(w, self.input, rs);
        let (v2, _) = self.solve(w, self.output, rl);
        Response {
            f_hz,
            s21: v[o] * (2.0 * (rs / rl).sqrt()),
            s11: v[i] * 2.0 - 1.0,
            s22: v2[o] * 2.0 - 1.0,
            group_delay_s: -(dv[o] / v[o]).im,
        }
    }
}

impl Ladder {
    /// The same ladder as a netlist for the nodal solver (input node 1, output the last node).
    ///
    /// # Errors
    /// When the ladder has no series stage (input and output would be one node).
    pub fn to_circuit(&self) -> Result<Circuit> {
        let mut node = 1;
        let mut branches = Vec::new();
        for s in self.stages() {
            match s {
                Stage::Series(b) => {
                    branches.push((node, node + 1, b.clone()));
                    node += 1;
                }
                Stage::Shunt(b) => branches.push((node, 0, b.clone())),
            }
        }
        if node == 1 {
            return Err(Error::invalid(
                "ladder",
                "no series stage",
                "at least one branch in the signal path",
            ));
        }
        Circuit::new(node, branches, 1, node, self.source_ohm(), self.load_ohm())
    }
}

//! The demo's built-in measurements: 36 sweeps of a lot of surplus crystals, embedded from
//! `examples/sweeps/` (made by `cargo run -p filter-cli --example make_demo_data`; see
//! [`generate`] for the scenario and the spreads).

#[cfg(test)]
pub mod generate;

/// One embedded sweep file: its path under `examples/` and its text.
#[derive(Debug, Clone, Copy)]
pub struct EmbeddedSweep {
    /// The path under `examples/`, e.g. `sweeps/x07.csv`; the file stem is the crystal's id.
    pub name: &'static str,
    /// The file's text.
    pub text: &'static str,
}

macro_rules! file {
    ($name:literal) => {
        EmbeddedSweep {
            name: $name,
            text: include_str!(concat!("../../../examples/", $name)),
        }
    };
}

/// The 36 sweeps: `x01`–`x30` as CSV (magnitude only), `x31`–`x36` as Touchstone.
pub const SWEEPS: [EmbeddedSweep; 36] = [
    file!("sweeps/x01.csv"),
    file!("sweeps/x02.csv"),
    file!("sweeps/x03.csv"),
    file!("sweeps/x04.csv"),
    file!("sweeps/x05.csv"),
    file!("sweeps/x06.csv"),
    file!("sweeps/x07.csv"),
    file!("sweeps/x08.csv"),
    file!("sweeps/x09.csv"),
    file!("sweeps/x10.csv"),
    file!("sweeps/x11.csv"),
    file!("sweeps/x12.csv"),
    file!("sweeps/x13.csv"),
    file!("sweeps/x14.csv"),
    file!("sweeps/x15.csv"),
    file!("sweeps/x16.csv"),
    file!("sweeps/x17.csv"),
    file!("sweeps/x18.csv"),
    file!("sweeps/x19.csv"),
    file!("sweeps/x20.csv"),
    file!("sweeps/x21.csv"),
    file!("sweeps/x22.csv"),
    file!("sweeps/x23.csv"),
    file!("sweeps/x24.csv"),
    file!("sweeps/x25.csv"),
    file!("sweeps/x26.csv"),
    file!("sweeps/x27.csv"),
    file!("sweeps/x28.csv"),
    file!("sweeps/x29.csv"),
    file!("sweeps/x30.csv"),
    file!("sweeps/x31.s2p"),
    file!("sweeps/x32.s2p"),
    file!("sweeps/x33.s2p"),
    file!("sweeps/x34.s2p"),
    file!("sweeps/x35.s2p"),
    file!("sweeps/x36.s2p"),
];

/// The marking on every crystal of the lot, Hz (the scenario's only given frequency).
pub const MARKED_HZ: f64 = 9.8304e6;

#[cfg(test)]
mod tests {
    use super::*;

    /// The embedded files are exactly what the generator makes (regenerate them with
    /// `cargo run -p filter-cli --example make_demo_data` after changing it).
    #[test]
    fn embedded_sweeps_are_the_generated_ones() {
        let generated = generate::generate();
        for e in SWEEPS {
            let Some(g) = generated.iter().find(|g| g.name == e.name) else {
                panic!("the generator does not make {}", e.name);
            };
            assert!(
                g.text == e.text,
                "examples/{} differs from the generator's output",
                e.name
            );
        }
        assert_eq!(generate::MARKED_HZ, MARKED_HZ);
    }
}

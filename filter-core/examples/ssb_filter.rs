//! Design an 8-crystal SSB filter for a set of measured crystals and check its predicted
//! response. Run with `cargo run -p filter-core --example ssb_filter`.

use filter_core::crystal::Crystal;
use filter_core::design::{BandwidthAt, ResponseFamily};
use filter_core::network::{db, Analyze};
use filter_core::synthesis::LadderSpec;

fn main() -> Result<(), filter_core::Error> {
    // Eight crystals as a fit might report them (our own example values).
    let offsets_hz = [-4.0, 2.5, 0.0, 6.0, -1.5, 3.0, -6.0, 1.0];
    let crystals = offsets_hz
        .iter()
        .enumerate()
        .map(|(i, df)| {
            Crystal::from_fs_lm(&format!("Y{}", i + 1), 9.8268e6 + df, 17e-3, 11.0, 3.9e-12)
        })
        .collect::<Result<Vec<_>, _>>()?;
    let spec = LadderSpec {
        family: ResponseFamily::Chebyshev { ripple_db: 0.1 },
        bandwidth_hz: 2400.0,
        bandwidth_at: BandwidthAt::Db6,
        predistort: false,
        refine: true,
        crystals,
    };
    let design = spec.synthesize()?;
    let p = design.performance;
    println!(
        "centre {:.1} Hz, −6 dB {:.1} Hz, loss {:.2} dB, ripple {:.3} dB, terminations {:.1} / {:.1} Ω",
        design.center_hz, p.bw_6db_hz, p.insertion_loss_db, p.ripple_db, design.source_ohm, design.load_ohm
    );
    // Refinement holds the −6 dB width to 0.1 %.
    assert!((p.bw_6db_hz / 2400.0 - 1.0).abs() < 1e-3);
    // The circuit behind the record analyses to the same loss at the passband centre.
    let ladder = design.to_ladder()?;
    let loss = -db(ladder.response(p.center_hz).s21);
    assert!(loss >= p.insertion_loss_db - 1e-9 && loss < p.insertion_loss_db + p.ripple_db + 0.5);
    Ok(())
}

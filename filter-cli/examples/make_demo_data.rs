//! Write the demo's invented measurements under the workspace's `examples/` folder:
//!
//! - `examples/sweeps/x01.csv` … `x30.csv` and `x31.s2p` … `x36.s2p`: one sweep per crystal of
//!   the demo lot (the scenario is described in `filter-cli/src/demo_data/generate.rs`);
//! - `examples/demo-crystals-true.csv`: the parameters the sweeps were made from.
//!
//! Run with `cargo run -p filter-cli --example make_demo_data`. The binary embeds the sweeps,
//! and its tests check that the files are exactly what this program writes.

#[path = "../src/demo_data/generate.rs"]
mod generate;

use std::error::Error;
use std::fs;
use std::path::Path;

fn main() -> Result<(), Box<dyn Error>> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples");
    fs::create_dir_all(root.join("sweeps"))?;
    let files = generate::generate();
    for f in &files {
        fs::write(root.join(&f.name), &f.text)?;
    }
    // The lot holds what the scenario promises.
    let lot = generate::lot();
    assert_eq!(lot.len(), 36);
    let mut rm: Vec<f64> = lot.iter().map(|x| x.rm_ohm()).collect();
    rm.sort_by(f64::total_cmp);
    let median = 0.5 * (rm[17] + rm[18]);
    for dud in generate::DUDS {
        let x = lot.iter().find(|x| x.id == dud).ok_or("dud missing")?;
        assert!(
            x.rm_ohm() > 3.0 * median,
            "{dud}: Rm {} vs median {median}",
            x.rm_ohm()
        );
    }
    let spread = lot
        .iter()
        .map(|x| (x.fs_hz() - generate::LOT_FS_HZ).abs())
        .fold(0.0, f64::max);
    assert!(spread <= 150.0 + 1e-6);
    println!(
        "wrote {} files under {} (Rm median {median:.2} ohm, fs within ±{spread:.0} Hz)",
        files.len(),
        root.display()
    );
    Ok(())
}

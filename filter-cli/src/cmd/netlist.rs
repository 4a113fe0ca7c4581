//! `xtal-ladder netlist`: a SPICE netlist of a design, with an `.ac` card over its passband.

use super::{check_output, passband_window, read_design, require_format, window};
use crate::files;
use crate::flags::{Format, NetlistCmd};
use anyhow::{Context, Result};
use filter_core::design::{BandwidthAt, Design, ResponseFamily};
use filter_core::io::spice::{spice_netlist, AcSweep};

/// Points of the default `.ac` card.
const DEFAULT_POINTS: usize = 1001;

/// Run `netlist`.
pub fn run(cmd: &NetlistCmd, format: Format) -> Result<()> {
    require_format(
        format,
        &[Format::Text],
        "netlist (the netlist is SPICE text)",
    )?;
    if let Some(out) = &cmd.output.output {
        check_output(out, std::slice::from_ref(&cmd.design))?;
    }
    let design = read_design(&cmd.design)?;
    let text = netlist_text(&design, &cmd.range)?;
    match &cmd.output.output {
        Some(path) => files::write_bytes(path, text.as_bytes()),
        None => files::write_stdout(|w| {
            w.write_all(text.as_bytes())?;
            Ok(())
        }),
    }
}

/// The netlist of `design` over the range of the flags (default: passband and skirts).
pub fn netlist_text(design: &Design, range: &crate::flags::RangeArgs) -> Result<String> {
    let ladder = design.to_ladder().context("design")?;
    let win = window(range, passband_window(design), DEFAULT_POINTS)?;
    let ac = AcSweep::linear(win.from_hz, win.to_hz, win.points).context("the .ac range")?;
    spice_netlist(&ladder, &spice_title(design), &ac).context("netlist")
}

/// A plain-ASCII title line (SPICE reads the first line as the title).
pub fn spice_title(d: &Design) -> String {
    let family = match &d.spec.family {
        ResponseFamily::Chebyshev { ripple_db } => format!("Chebyshev {ripple_db} dB"),
        ResponseFamily::Butterworth => "Butterworth".into(),
        ResponseFamily::Bessel => "Bessel".into(),
        ResponseFamily::Gaussian => "Gaussian".into(),
        ResponseFamily::Legendre => "Legendre".into(),
        ResponseFamily::EqualC => "equal-C".into(),
        ResponseFamily::Poles { re, .. } => format!("all-pole ({} poles)", re.len()),
    };
    let at = match d.spec.bandwidth_at {
        BandwidthAt::Db3 => "-3 dB",
        BandwidthAt::Db6 => "-6 dB",
        BandwidthAt::Ripple => "ripple",
    };
    format!(
        "xtal-ladder crystal ladder: {family}, {} crystals, {:.1} Hz at {at}, centre {:.1} Hz",
        d.order(),
        d.spec.bandwidth_hz,
        d.center_hz
    )
}

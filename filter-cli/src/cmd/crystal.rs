//! `xtal-ladder crystal`: the crystal record from its motional parameters.

use super::{crystal_from_args, crystal_json, print_json, print_text};
use crate::flags::{CrystalCmd, Format};
use crate::text;
use anyhow::Result;
use filter_core::Crystal;

/// Run `crystal`.
pub fn run(cmd: &CrystalCmd, format: Format) -> Result<()> {
    let crystal = crystal_from_args(&cmd.crystal, &cmd.crystal.id)?;
    match format {
        Format::Json => print_json(&crystal_json(&crystal)?),
        Format::Csv => super::matching::print_batch_csv(std::slice::from_ref(&crystal)),
        Format::Text => print_text(&describe(&crystal)),
    }
}

/// The crystal as readable text, one value per line.
pub fn describe(x: &Crystal) -> String {
    let fp = x.fp_hz();
    let fp_line = if fp.is_finite() {
        format!(
            "{}  (fp − fs = {})",
            text::freq(fp),
            text::width(fp - x.fs_hz())
        )
    } else {
        "infinite (no C0)".to_string()
    };
    let mut s = format!("crystal {}\n", x.id);
    s += &format!("  fs  {}\n", text::freq(x.fs_hz()));
    s += &format!("  fp  {fp_line}\n");
    s += &format!("  Lm  {}\n", text::si(x.lm_h(), "H"));
    s += &format!("  Cm  {}\n", text::si(x.cm_f(), "F"));
    s += &format!("  Rm  {}\n", text::si(x.rm_ohm(), "Ω"));
    s += &format!("  C0  {}\n", text::si(x.c0_f, "F"));
    s += &format!("  Qu  {}\n", text::finite(x.qu(), |q| format!("{q:.0}")));
    for b in &x.spurious {
        s += &format!(
            "  spurious mode at {} (Rm {}, Lm {})\n",
            text::freq(b.fs_hz()),
            text::si(b.rm_ohm, "Ω"),
            text::si(b.lm_h, "H")
        );
    }
    s
}

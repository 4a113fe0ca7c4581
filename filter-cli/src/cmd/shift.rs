//! `xtal-ladder shift`: motional parameters from an oscillator frequency shift.

use super::{print_json, print_text, require_format};
use crate::flags::{Format, ShiftCmd};
use crate::text;
use anyhow::{Context, Result};
use filter_core::measure::motional_from_shift;
use serde_json::json;

/// Run `shift`.
pub fn run(cmd: &ShiftCmd, format: Format) -> Result<()> {
    require_format(format, &[Format::Text, Format::Json], "shift")?;
    let cl = cmd.osc_load.map(f64::from);
    let r = motional_from_shift(cmd.f_short.0, cmd.f_cap.0, cmd.cap.0, cmd.c0.0, cl)
        .context("shift")?;
    if format == Format::Json {
        return print_json(&json!({
            "cm_f": r.cm_f,
            "lm_h": r.lm_h,
            "fs_hz": r.fs_hz,
            "cm_first_order_f": r.cm_first_order_f,
            "c0_sensitivity_per_pf": r.c0_sensitivity_per_pf,
            "osc_load_f": cl,
        }));
    }
    let mut s = String::from("oscillator shift\n");
    s += &format!("  Cm  {}\n", text::si(r.cm_f, "F"));
    s += &format!("  Lm  {}\n", text::si(r.lm_h, "H"));
    s += &format!(
        "  fs  {}{}\n",
        text::freq(r.fs_hz),
        if cl.is_some() {
            "  (solved with the oscillator load)"
        } else {
            "  (taken as F1: no oscillator load given)"
        }
    );
    s += &format!(
        "  first-order Cm ≈ 2·Δf·(C0 + CS)/F1 = {}\n",
        text::si(r.cm_first_order_f, "F")
    );
    s += &format!(
        "  sensitivity to C0: {:.2} % of Cm per pF (±0.5 pF moves Cm by ±{:.2} %)\n",
        100.0 * r.c0_sensitivity_per_pf,
        50.0 * r.c0_sensitivity_per_pf.abs()
    );
    print_text(&s)
}

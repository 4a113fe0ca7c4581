//! `xtal-ladder design`: synthesize a ladder for a response, an order, a bandwidth and the
//! crystals.

use super::{
    check_output, crystal_from_args, family_label, inputs, print_json, print_text, require_format,
};
use crate::errors::{bad, bad_hint};
use crate::files;
use crate::flags::{BandwidthAtArg, DesignCmd, FamilyArg, Format};
use crate::text;
use anyhow::{Context, Result};
use filter_core::design::{BandwidthAt, Design, ResponseFamily};
use filter_core::prototype::MAX_ORDER;
use filter_core::synthesis::LadderSpec;
use filter_core::Crystal;
use std::path::PathBuf;

/// Chebyshev ripple when `--ripple` is not given, dB (common practice for SSB filters).
const DEFAULT_RIPPLE_DB: f64 = 0.1;

/// Run `design`.
pub fn run(cmd: &DesignCmd, format: Format) -> Result<()> {
    require_format(format, &[Format::Text, Format::Json], "design")?;
    let mut ins: Vec<PathBuf> = Vec::new();
    if let Some(c) = &cmd.crystals {
        ins.push(c.clone());
    }
    if let Some(out) = &cmd.output.output {
        check_output(out, &inputs(&ins))?;
    }
    let spec = spec_from_flags(cmd)?;
    let design = spec.synthesize().context("design")?;
    if let Some(out) = &cmd.output.output {
        let json = design.to_json();
        files::write_atomic(out, |w| {
            w.write_all(json.as_bytes())?;
            writeln!(w)?;
            Ok(())
        })?;
    }
    match format {
        Format::Json => print_json(&super::to_json(&design)?),
        _ => {
            let mut s = summary(&design);
            if let Some(out) = &cmd.output.output {
                s += &format!("\ndesign written to {}\n", out.display());
            }
            print_text(&s)
        }
    }
}

/// The response family the flags ask for.
///
/// # Errors
/// `--ripple` with a family that has no ripple.
pub fn family_from_flags(family: FamilyArg, ripple: Option<f64>) -> Result<ResponseFamily> {
    if ripple.is_some() && family != FamilyArg::Chebyshev {
        return Err(bad_hint(
            "--ripple applies to --family chebyshev only",
            "drop --ripple, or use --family chebyshev",
        ));
    }
    Ok(match family {
        FamilyArg::Butterworth => ResponseFamily::Butterworth,
        FamilyArg::Chebyshev => ResponseFamily::Chebyshev {
            ripple_db: ripple.unwrap_or(DEFAULT_RIPPLE_DB),
        },
        FamilyArg::Bessel => ResponseFamily::Bessel,
        FamilyArg::Gaussian => ResponseFamily::Gaussian,
        FamilyArg::Legendre => ResponseFamily::Legendre,
        FamilyArg::EqualC => ResponseFamily::EqualC,
    })
}

/// Where the bandwidth is measured, in the library's terms.
pub fn bandwidth_at(at: BandwidthAtArg) -> BandwidthAt {
    match at {
        BandwidthAtArg::Db3 => BandwidthAt::Db3,
        BandwidthAtArg::Db6 => BandwidthAt::Db6,
        BandwidthAtArg::Ripple => BandwidthAt::Ripple,
    }
}

/// The crystals of a batch file, optionally only `ids` in that order.
///
/// # Errors
/// An unknown or repeated id (bad input), or the batch file's own errors.
pub fn select_crystals(batch: &[Crystal], ids: &[String], file: &str) -> Result<Vec<Crystal>> {
    if ids.is_empty() {
        return Ok(batch.to_vec());
    }
    let mut out = Vec::with_capacity(ids.len());
    for (i, id) in ids.iter().enumerate() {
        if ids[..i].contains(id) {
            return Err(bad_hint(
                format!("--ids names crystal '{id}' twice"),
                "each crystal can sit at one position only",
            ));
        }
        let Some(x) = batch.iter().find(|x| &x.id == id) else {
            let known: Vec<&str> = batch.iter().take(8).map(|x| x.id.as_str()).collect();
            let more = if batch.len() > 8 { ", …" } else { "" };
            return Err(bad_hint(
                format!("--ids: crystal '{id}' is not in {file}"),
                format!("the file holds {}{more}", known.join(", ")),
            ));
        };
        out.push(x.clone());
    }
    Ok(out)
}

/// Build the specification from the flags.
fn spec_from_flags(cmd: &DesignCmd) -> Result<LadderSpec> {
    let family = family_from_flags(cmd.family, cmd.ripple.map(f64::from))?;
    let at = bandwidth_at(cmd.bandwidth_at);
    if let Some(n) = cmd.order {
        if n == 0 || n > MAX_ORDER {
            return Err(bad_hint(
                format!("--order {n} is not supported"),
                format!("give 1 to {MAX_ORDER} crystals"),
            ));
        }
    }
    let mut spec = if let Some(path) = &cmd.crystals {
        let file = path.display().to_string();
        let batch = super::matching::read_batch(path, &Default::default())?;
        let crystals = select_crystals(&batch, &cmd.ids, &file)?;
        if let Some(n) = cmd.order {
            if n != crystals.len() {
                return Err(bad_hint(
                    format!(
                        "--order {n} does not match the {} crystals given by --crystals{}",
                        crystals.len(),
                        if cmd.ids.is_empty() { "" } else { " --ids" }
                    ),
                    "leave out --order (it follows from the crystals), or name that many --ids",
                ));
            }
        }
        LadderSpec {
            family,
            bandwidth_hz: cmd.bandwidth.0,
            bandwidth_at: at,
            predistort: false,
            refine: false,
            crystals,
        }
    } else {
        let Some(n) = cmd.order else {
            return Err(bad_hint(
                "--order is required with a single crystal",
                "e.g. --order 8, or give the crystals with --crystals BATCH.csv",
            ));
        };
        if cmd.crystal.fs.is_none() {
            return Err(bad_hint(
                "design needs crystals: --fs, --lm or --cm, --rm and --c0, or --crystals BATCH.csv",
                "e.g. --fs 9.8268M --lm 17m --rm 10 --c0 3.9p --order 8",
            ));
        }
        let x = crystal_from_args(&cmd.crystal, &cmd.crystal.id)?;
        LadderSpec::identical(family, n, cmd.bandwidth.0, at, &x)
    };
    spec.predistort = cmd.predistort;
    spec.refine = cmd.refine;
    if spec.crystals.is_empty() {
        return Err(bad("the batch file holds no crystals"));
    }
    Ok(spec)
}

/// The bandwidth specification as people say it: `2.400 kHz at −6 dB`.
fn bandwidth_label(d: &Design) -> String {
    let at = match d.spec.bandwidth_at {
        BandwidthAt::Db3 => "−3 dB",
        BandwidthAt::Db6 => "−6 dB",
        BandwidthAt::Ripple => "the ripple edges",
    };
    format!("{} at {at}", text::width(d.spec.bandwidth_hz))
}

/// A readable summary of a design: the spec, the centre, terminations, every crystal and
/// capacitor, k and q, the Q margin, predicted performance, refinement and warnings.
pub fn summary(d: &Design) -> String {
    let n = d.order();
    let mut options = Vec::new();
    if d.spec.predistort {
        options.push("predistorted");
    }
    if d.spec.refine {
        options.push("refined");
    }
    let options = if options.is_empty() {
        String::new()
    } else {
        format!(" ({})", options.join(", "))
    };
    let mut s = format!(
        "design: {}, {n} crystals, {}{options}\n",
        family_label(&d.spec.family),
        bandwidth_label(d)
    );
    s += &format!("  centre (mesh tuning)  {}\n", text::freq(d.center_hz));
    s += &format!(
        "  terminations          source {}, load {}\n\n",
        text::si(d.source_ohm, "Ω"),
        text::si(d.load_ohm, "Ω")
    );
    s += "  pos  crystal   fs               Lm         Rm         C0         series C     shunt C after it\n";
    for (i, x) in d.crystals.iter().enumerate() {
        let series = match d.series_caps_f.get(i).copied().flatten() {
            Some(c) => text::si(c, "F"),
            None => "none".to_string(),
        };
        let shunt = d
            .shunt_caps_f
            .get(i)
            .map(|&c| text::si(c, "F"))
            .unwrap_or_else(|| "—".to_string());
        s += &format!(
            "  {:<4} {:<9} {:<16} {:<10} {:<10} {:<10} {:<12} {}\n",
            i + 1,
            x.id,
            text::freq(x.fs_hz()),
            text::si(x.lm_h(), "H"),
            text::si(x.rm_ohm(), "Ω"),
            text::si(x.c0_f, "F"),
            series,
            shunt
        );
    }
    let k: Vec<String> = d.k.iter().map(|k| text::num(*k, 4)).collect();
    s += &format!("\n  k (−3 dB normalized)  {}\n", k.join(" "));
    s += &format!(
        "  q (in, out)           {}, {}\n",
        text::num(d.q[0], 4),
        text::num(d.q[1], 4)
    );
    match d.q0 {
        Some(q0) => {
            s += &format!(
                "  q_min {}, q0 {} (q0/q_min = {})\n",
                text::num(d.q_min, 4),
                text::num(q0, 4),
                text::num(q0 / d.q_min, 3)
            );
        }
        None => {
            s += &format!(
                "  q_min {}, q0 infinite (lossless crystals)\n",
                text::num(d.q_min, 4)
            )
        }
    }
    if let Some(c) = d.cohn_loss_db {
        s += &format!("  Cohn's loss estimate  {}\n", text::db(c));
    }
    s += "\npredicted performance\n";
    s += &performance_text(&d.performance);
    if let Some(r) = &d.refinement {
        s += &format!(
            "refinement: {} iterations; ripple {:.3} → {:.3} dB; −3 dB bandwidth {} → {}; \
             largest capacitor change {:.2} %; terminations {:+.2} % / {:+.2} %\n",
            r.iterations,
            r.ripple_db[0],
            r.ripple_db[1],
            text::width(r.bw_3db_hz[0]),
            text::width(r.bw_3db_hz[1]),
            100.0 * r.max_cap_change,
            100.0 * r.termination_change[0],
            100.0 * r.termination_change[1]
        );
    }
    if d.warnings.is_empty() {
        s += "warnings: none\n";
    } else {
        s += "warnings:\n";
        for w in &d.warnings {
            s += &format!("  - {w}\n");
        }
    }
    s
}

/// Performance figures as indented text lines.
pub fn performance_text(p: &filter_core::metrics::Performance) -> String {
    let mut s = String::new();
    s += &format!("  insertion loss     {}\n", text::db(p.insertion_loss_db));
    s += &format!("  ripple             {}\n", text::db(p.ripple_db));
    s += &format!(
        "  −3 dB bandwidth    {}  ({} to {})\n",
        text::width(p.bw_3db_hz),
        text::freq(p.edges_3db_hz[0]),
        text::freq(p.edges_3db_hz[1])
    );
    s += &format!("  −6 dB bandwidth    {}\n", text::width(p.bw_6db_hz));
    s += &format!(
        "  −60 dB bandwidth   {}   shape factor 60/6: {}\n",
        text::opt(p.bw_60db_hz, text::width),
        text::opt(p.shape_factor_60_6, |v| text::num(v, 3))
    );
    s += &format!("  passband centre    {}\n", text::freq(p.center_hz));
    s += &format!("  return loss        {}\n", text::db(p.return_loss_db));
    s += &format!(
        "  group delay        {} at the centre, {} variation over the −3 dB band\n",
        text::si(p.group_delay_center_s, "s"),
        text::si(p.group_delay_variation_s, "s")
    );
    s
}

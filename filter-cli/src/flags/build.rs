//! Flags of the build-readiness subcommands: `parts`, `yield` and `report`.
//!
//! The same two stages as the rest of [`crate::flags`]: clap records checked plain values (a
//! series name arrives as a [`Series`], `5%` as a [`Percent`]), and the subcommands build the
//! library's `RoundingOptions`, `ToleranceSpec` and `Limits` from them.

use super::OutputArg;
use clap::{Args, ValueEnum};
use filter_core::parts::{Series, DEFAULT_PAIR_GAIN};
use filter_core::units::{parse_quantity, Decibels, Hertz, Ohms, Quantity};
use std::path::PathBuf;
use std::str::FromStr;

/// `after_help` of `parts`.
pub const PARTS_HELP: &str = "\
Reference designators, in signal order from the source end:
  C1, C2, ...  every capacitor of the ladder in signal order: the series tuning capacitor of
               position 1 (Cs1 on the schematic), then the shunt capacitor after crystal 1
               (C12), the series capacitor of position 2 (Cs2), and so on; a position with
               no series capacitor gets a wire link W1, W2, ... instead of a number
  Y1 ... Yn    the crystals (X1 ... Xn on the schematic), with the id of the crystal that
               goes there
  R1, R2       the source and load terminations (Rs and RL on the schematic)
  after those  the matching parts, input end first: C(next), L1, ... or transformers T1, T2
The position column gives the schematic's name for each part. A parallel pair is two parts
soldered across each other at one position (the larger first, then the trim part).

With re-tuning (the default) the shunt capacitors are rounded first and the series
capacitors are solved again for the rounded values before they are rounded in turn; the
as-built figures are those of the ladder built from exactly the chosen values.

Example:
  xtal-ladder parts design.json --series E24
  xtal-ladder parts design.json --series E12 --pairs --format md -o parts.md
  xtal-ladder parts design.json --series E24 --pairs --as-built built.json --format json
  xtal-ladder parts design.json --match-to 50 --match-form highpass";

/// `after_help` of `yield`.
pub const YIELD_HELP: &str = "\
Each trial builds the ladder from parts drawn at random: every capacitor uniform within
+/- --cap-tol (Gaussian with the tolerance at 3 sigma with --gaussian-caps), every crystal's fs
Gaussian with --fs-sigma, and optionally Lm and Rm Gaussian. A trial passes when its ripple,
-6 dB bandwidth and loss meet the limits (defaults: the design's ripple + 1 dB, its -6 dB
bandwidth +/- 5 %, its loss + 2 dB). The same --seed gives the same report on any number of
threads. Run it on the as-built design (`parts --as-built built.json`) to judge the parts
you will actually fit.

Example:
  xtal-ladder yield design.json --trials 2000 --cap-tol 5 --fs-sigma 20
  xtal-ladder yield built.json --cap-tol 2 --fs-sigma 10 --lm-sigma 3 --seed 7 \\
      --max-ripple 1 --plot envelope.svg --histogram bw6.svg --format json";

/// `after_help` of `report`.
pub const REPORT_HELP: &str = "\
One self-contained HTML file (inline SVG and CSS, no scripts, no network) for the bench: the
specification, the crystals and where each goes, the schematic, the parts list, the plots of
the ladder as built from the chosen parts, the as-built figures beside the ideal ones and a
tolerance-yield summary of the as-built ladder (--trials 0 leaves the yield out).

Example:
  xtal-ladder report design.json -o report.html
  xtal-ladder report design.json -o report.html --series E12 --pairs --trials 5000 \\
      --cap-tol 2 --fs-sigma 15 --match-to 50";

/// A percentage as typed: `5`, `5%` or `0.5 %`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Percent(pub f64);

impl Percent {
    /// The value as a fraction (5 % is 0.05).
    pub fn fraction(self) -> f64 {
        self.0 / 100.0
    }
}

impl FromStr for Percent {
    type Err = filter_core::Error;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let t = s.trim();
        let t = t.strip_suffix('%').unwrap_or(t).trim_end();
        let v = parse_quantity("percentage", t, Quantity::Dimensionless)?;
        if v.is_finite() && v >= 0.0 {
            Ok(Percent(v))
        } else {
            Err(filter_core::Error::invalid(
                "percentage",
                s,
                "a percentage of 0 or more, such as 5 or 5%",
            ))
        }
    }
}

/// How standard values are chosen (`parts`, `report`).
#[derive(Debug, Clone, Args)]
pub struct RoundingArgs {
    /// IEC 60063 series of the capacitors: E6, E12, E24, E48 or E96.
    #[arg(long, value_name = "SERIES", default_value = "E24")]
    pub series: Series,
    /// Allow a parallel pair of standard values where it is much closer than one part.
    #[arg(long)]
    pub pairs: bool,
    /// How many times smaller a pair's error must be than the single part's to be chosen.
    #[arg(long = "pair-gain", value_name = "G", default_value_t = DEFAULT_PAIR_GAIN, allow_hyphen_values = true)]
    pub pair_gain: f64,
    /// Round every capacitor on its own, without re-solving the series capacitors.
    #[arg(long = "no-retune")]
    pub no_retune: bool,
    /// Also round the terminations to the series (as resistors).
    #[arg(long = "round-terminations")]
    pub round_terminations: bool,
}

/// The matching network's form.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum MatchFormArg {
    /// L-network with a series inductor and a shunt capacitor (passes DC).
    Lowpass,
    /// L-network with a series capacitor and a shunt inductor (blocks DC).
    Highpass,
    /// An ideal transformer (turns ratio).
    Transformer,
}

/// Matching to the system impedance (`parts`, `report`).
#[derive(Debug, Clone, Args)]
pub struct MatchArgs {
    /// System impedance to match each termination to at the centre, e.g. 50.
    #[arg(long = "match-to", value_name = "OHMS", allow_hyphen_values = true)]
    pub match_to: Option<Ohms>,
    /// Form of the matching network at each end.
    #[arg(
        long = "match-form",
        value_enum,
        default_value_t = MatchFormArg::Lowpass,
        requires = "match_to"
    )]
    pub match_form: MatchFormArg,
}

/// What varies in a Monte Carlo yield run (`yield`, `report`).
#[derive(Debug, Clone, Args)]
pub struct ToleranceArgs {
    /// Number of trials (`report`: 0 leaves the yield out).
    #[arg(long, value_name = "N", default_value_t = 1000)]
    pub trials: usize,
    /// Capacitor tolerance in percent (uniform within +/- this).
    #[arg(
        long = "cap-tol",
        value_name = "PCT",
        default_value = "5",
        allow_hyphen_values = true
    )]
    pub cap_tol: Percent,
    /// Capacitors Gaussian with the tolerance at 3 sigma instead of uniform.
    #[arg(long = "gaussian-caps")]
    pub gaussian_caps: bool,
    /// Standard deviation of each crystal's fs, e.g. 20 (Hz).
    #[arg(
        long = "fs-sigma",
        value_name = "HZ",
        default_value = "0",
        allow_hyphen_values = true
    )]
    pub fs_sigma: Hertz,
    /// Standard deviation of each crystal's Lm, in percent.
    #[arg(
        long = "lm-sigma",
        value_name = "PCT",
        default_value = "0",
        allow_hyphen_values = true
    )]
    pub lm_sigma: Percent,
    /// Standard deviation of each crystal's Rm, in percent.
    #[arg(
        long = "rm-sigma",
        value_name = "PCT",
        default_value = "0",
        allow_hyphen_values = true
    )]
    pub rm_sigma: Percent,
    /// Key of the random numbers; the same seed gives the same report.
    #[arg(long, value_name = "S", default_value_t = 0)]
    pub seed: u64,
    /// Analysis points per trial.
    #[arg(long = "trial-points", value_name = "N", default_value_t = 1001)]
    pub trial_points: usize,
}

/// Pass/fail limits of a trial (`yield`, `report`).
#[derive(Debug, Clone, Args)]
pub struct LimitArgs {
    /// Largest passband ripple [default: the design's + 1 dB].
    #[arg(long = "max-ripple", value_name = "DB", allow_hyphen_values = true)]
    pub max_ripple: Option<Decibels>,
    /// Allowed deviation of the -6 dB bandwidth from the design's, in percent [default: 5].
    #[arg(long = "bw6-tol", value_name = "PCT", allow_hyphen_values = true)]
    pub bw6_tol: Option<Percent>,
    /// Largest insertion loss [default: the design's + 2 dB].
    #[arg(long = "max-loss", value_name = "DB", allow_hyphen_values = true)]
    pub max_loss: Option<Decibels>,
}

/// A figure the yield histogram shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum MetricArg {
    /// Insertion loss.
    Loss,
    /// Passband ripple.
    Ripple,
    /// −3 dB bandwidth.
    Bw3,
    /// −6 dB bandwidth.
    Bw6,
    /// Passband centre.
    Center,
    /// Return loss.
    ReturnLoss,
    /// Shape factor 60/6.
    ShapeFactor,
}

/// `parts`.
#[derive(Debug, Clone, Args)]
pub struct PartsCmd {
    /// Design JSON (from `xtal-ladder design -o`).
    #[arg(value_name = "DESIGN.json")]
    pub design: PathBuf,
    /// How values are chosen.
    #[command(flatten)]
    pub rounding: RoundingArgs,
    /// Matching networks.
    #[command(flatten)]
    pub matching: MatchArgs,
    /// Also write the design record with the chosen values in place (for analyze, yield,
    /// netlist).
    #[arg(long = "as-built", value_name = "FILE")]
    pub as_built: Option<PathBuf>,
    /// Write the parts list (in the --format asked for) to FILE instead of stdout.
    #[command(flatten)]
    pub output: OutputArg,
}

/// `yield`.
#[derive(Debug, Clone, Args)]
pub struct YieldCmd {
    /// Design JSON (the ideal design, or the as-built one from `parts --as-built`).
    #[arg(value_name = "DESIGN.json")]
    pub design: PathBuf,
    /// What varies.
    #[command(flatten)]
    pub tolerance: ToleranceArgs,
    /// Pass/fail limits.
    #[command(flatten)]
    pub limits: LimitArgs,
    /// SVG plot of the envelope of the responses.
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// SVG histogram of one figure over the trials (see --histogram-metric).
    #[arg(long, value_name = "FILE")]
    pub histogram: Option<PathBuf>,
    /// The figure of the histogram.
    #[arg(long = "histogram-metric", value_enum, default_value_t = MetricArg::Bw6)]
    pub histogram_metric: MetricArg,
    /// Write the report (in the --format asked for) to FILE instead of stdout.
    #[command(flatten)]
    pub output: OutputArg,
}

/// `report`.
#[derive(Debug, Clone, Args)]
pub struct ReportCmd {
    /// Design JSON (from `xtal-ladder design -o`).
    #[arg(value_name = "DESIGN.json")]
    pub design: PathBuf,
    /// The HTML file to write.
    #[arg(short = 'o', long = "output", value_name = "FILE", required = true)]
    pub output: PathBuf,
    /// How values are chosen.
    #[command(flatten)]
    pub rounding: RoundingArgs,
    /// Matching networks.
    #[command(flatten)]
    pub matching: MatchArgs,
    /// The yield run.
    #[command(flatten)]
    pub tolerance: ToleranceArgs,
    /// Pass/fail limits.
    #[command(flatten)]
    pub limits: LimitArgs,
}

#[cfg(test)]
mod tests {
    //! One parse test per flag, as in the parent module.
    use super::super::{Cli, Command};
    use super::*;
    use clap::Parser;

    fn parse(args: &[&str]) -> Command {
        let mut argv = vec!["xtal-ladder"];
        argv.extend_from_slice(args);
        match Cli::try_parse_from(argv) {
            Ok(Cli {
                command: Some(c), ..
            }) => c,
            Ok(c) => panic!("{args:?}: no subcommand in {c:?}"),
            Err(e) => panic!("{args:?} should parse: {e}"),
        }
    }

    fn refused(args: &[&str]) {
        let mut argv = vec!["xtal-ladder"];
        argv.extend_from_slice(args);
        if let Ok(c) = Cli::try_parse_from(argv) {
            panic!("{args:?} should be refused, got {c:?}");
        }
    }

    #[test]
    fn percentages() {
        assert_eq!("5".parse::<Percent>().map(Percent::fraction), Ok(0.05));
        assert_eq!("2.5 %".parse::<Percent>().map(|p| p.0), Ok(2.5));
        assert_eq!("0%".parse::<Percent>().map(|p| p.0), Ok(0.0));
        assert!("-1".parse::<Percent>().is_err());
        assert!("five".parse::<Percent>().is_err());
        assert!("5%%".parse::<Percent>().is_err());
    }

    #[test]
    fn parts_flags() {
        let Command::Parts(p) = parse(&[
            "parts",
            "d.json",
            "--series",
            "e12",
            "--pairs",
            "--pair-gain",
            "2",
            "--no-retune",
            "--round-terminations",
            "--match-to",
            "50",
            "--match-form",
            "transformer",
            "--as-built",
            "b.json",
            "-o",
            "p.md",
        ]) else {
            panic!()
        };
        assert_eq!(p.rounding.series, Series::E12);
        assert!(p.rounding.pairs && p.rounding.no_retune && p.rounding.round_terminations);
        assert_eq!(p.rounding.pair_gain, 2.0);
        assert_eq!(p.matching.match_to.map(f64::from), Some(50.0));
        assert_eq!(p.matching.match_form, MatchFormArg::Transformer);
        assert_eq!(p.as_built, Some(PathBuf::from("b.json")));
        assert_eq!(p.output.output, Some(PathBuf::from("p.md")));
        let Command::Parts(p) = parse(&["parts", "d.json"]) else {
            panic!()
        };
        assert_eq!(p.rounding.series, Series::E24);
        assert!(!p.rounding.pairs && !p.rounding.no_retune);
        assert_eq!(p.rounding.pair_gain, DEFAULT_PAIR_GAIN);
        assert_eq!(p.matching.match_to, None);
        refused(&["parts", "d.json", "--series", "E25"]);
        refused(&["parts", "d.json", "--match-form", "highpass"]);
        refused(&["parts", "d.json", "--match-to", "fifty"]);
        refused(&["parts"]);
    }

    #[test]
    fn yield_flags() {
        let Command::Yield(y) = parse(&[
            "yield",
            "d.json",
            "--trials",
            "500",
            "--cap-tol",
            "2%",
            "--gaussian-caps",
            "--fs-sigma",
            "15",
            "--lm-sigma",
            "3",
            "--rm-sigma",
            "20",
            "--seed",
            "7",
            "--trial-points",
            "501",
            "--max-ripple",
            "1.5dB",
            "--bw6-tol",
            "4",
            "--max-loss",
            "5",
            "--plot",
            "e.svg",
            "--histogram",
            "h.svg",
            "--histogram-metric",
            "ripple",
        ]) else {
            panic!()
        };
        let t = &y.tolerance;
        assert_eq!((t.trials, t.seed, t.trial_points), (500, 7, 501));
        assert_eq!(t.cap_tol.fraction(), 0.02);
        assert!(t.gaussian_caps);
        assert_eq!(f64::from(t.fs_sigma), 15.0);
        assert_eq!((t.lm_sigma.0, t.rm_sigma.0), (3.0, 20.0));
        assert_eq!(y.limits.max_ripple.map(f64::from), Some(1.5));
        assert_eq!(y.limits.bw6_tol.map(|p| p.0), Some(4.0));
        assert_eq!(y.limits.max_loss.map(f64::from), Some(5.0));
        assert_eq!(y.plot, Some(PathBuf::from("e.svg")));
        assert_eq!(y.histogram, Some(PathBuf::from("h.svg")));
        assert_eq!(y.histogram_metric, MetricArg::Ripple);
        let Command::Yield(y) = parse(&["yield", "d.json"]) else {
            panic!()
        };
        let t = &y.tolerance;
        assert_eq!((t.trials, t.seed, t.trial_points), (1000, 0, 1001));
        assert_eq!(t.cap_tol.0, 5.0);
        assert_eq!(f64::from(t.fs_sigma), 0.0);
        assert!(!t.gaussian_caps);
        assert_eq!(y.limits.max_ripple, None);
        assert_eq!(y.histogram_metric, MetricArg::Bw6);
        refused(&["yield", "d.json", "--trials", "-3"]);
        refused(&["yield", "d.json", "--cap-tol", "-5"]);
        refused(&["yield", "d.json", "--fs-sigma", "20 kg"]);
        refused(&["yield", "d.json", "--histogram-metric", "noise"]);
    }

    #[test]
    fn analyze_timing_flag() {
        let Command::Analyze(a) = parse(&["analyze", "d.json", "--timing"]) else {
            panic!()
        };
        assert!(a.timing);
        let Command::Analyze(a) = parse(&["analyze", "d.json"]) else {
            panic!()
        };
        assert!(!a.timing);
    }

    #[test]
    fn markdown_format() {
        let c = Cli::try_parse_from(["xtal-ladder", "parts", "d.json", "--format", "md"]);
        assert_eq!(c.map(|c| c.format).ok(), Some(super::super::FormatArg::Md));
        assert_eq!(super::super::FormatArg::Md.plain(), None);
        assert_eq!(
            super::super::FormatArg::Csv.plain(),
            Some(super::super::Format::Csv)
        );
    }

    #[test]
    fn report_flags() {
        let Command::Report(r) = parse(&[
            "report",
            "d.json",
            "-o",
            "r.html",
            "--series",
            "E48",
            "--pairs",
            "--trials",
            "0",
            "--match-to",
            "75",
        ]) else {
            panic!()
        };
        assert_eq!(r.output, PathBuf::from("r.html"));
        assert_eq!(r.rounding.series, Series::E48);
        assert!(r.rounding.pairs);
        assert_eq!(r.tolerance.trials, 0);
        assert_eq!(r.matching.match_to.map(f64::from), Some(75.0));
        assert_eq!(r.matching.match_form, MatchFormArg::Lowpass);
        refused(&["report", "d.json"]);
    }
}

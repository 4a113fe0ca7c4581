//! The command-line surface: every subcommand and flag, defined once with its help text.
//!
//! Parsing happens in two stages, as in ripgrep. Here clap records checked plain values:
//! engineering values go through [`filter_core::units`] (`Hertz`, `Farads`, … implement
//! `FromStr` with the library's parser), so `--fs 11.0558M` arrives as a number of hertz and
//! `--fs 11,0558M` is refused with the library's message. The library objects (crystals,
//! specifications, grids) are built afterwards by the subcommands in [`crate::cmd`], which
//! report out-of-range combinations as bad input.
//!
//! Flags shared by several subcommands (the crystal, the frequency range, `-o`) live in one
//! `Args` struct each and are flattened into the subcommands that use them.

use clap::{Args, Parser, Subcommand, ValueEnum};
use filter_core::units::{Decibels, Farads, Henries, Hertz, Ohms};
use std::path::PathBuf;

mod build;
pub use build::*;

const ABOUT: &str = "Design crystal ladder band-pass filters from the crystals on your bench.";

const LONG_ABOUT: &str = "\
Design crystal ladder band-pass filters (SSB, CW and data IF filters at 4-20 MHz) from the \
crystals actually on your bench: fit each crystal's sweep, pick a matched set, synthesize the \
ladder for those exact crystals, analyze it, and export a SPICE netlist and a Touchstone file.

Values take engineering notation: 11.0558M or 11.0558 MHz, 15.9m or 15.9mH, 3p9 or 3.9pF, \
4k7, 50R. Lowercase m is milli and uppercase M is mega.";

const AFTER_HELP: &str = "\
The job, step by step:
  xtal-ladder fit examples/sweeps/*.csv -o batch.csv      measure: one record per crystal
  xtal-ladder match batch.csv --count 8 --bandwidth 2.4k  pick a matched set
  xtal-ladder design --crystals batch.csv --ids x01,x04,x14,x24,x27,x20,x36,x06 \\
      --family chebyshev --ripple 0.1 --bandwidth 2.4k --bandwidth-at 6db --refine -o design.json
  xtal-ladder analyze design.json --plot filter.svg
  xtal-ladder netlist design.json -o filter.cir
  xtal-ladder touchstone design.json -o filter.s2p
  xtal-ladder parts design.json --series E24 --pairs --as-built built.json
  xtal-ladder yield built.json --trials 2000 --cap-tol 5 --fs-sigma 20
  xtal-ladder report design.json -o report.html           one page for the bench
  xtal-ladder demo                                        all of it on built-in data

Exit codes: 0 success; 2 bad input, usage or a filter the crystals cannot realize;
1 other failures (a file that cannot be read or written).";

/// The parsed command line.
#[derive(Debug, Parser)]
#[command(
    name = "xtal-ladder",
    version,
    about = ABOUT,
    long_about = LONG_ABOUT,
    after_help = AFTER_HELP,
    disable_help_subcommand = true
)]
pub struct Cli {
    /// Output format: text for people, json (one object on stdout), csv for tables, md
    /// (Markdown) for the parts list.
    #[arg(long, global = true, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,

    /// What to do.
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// The `--format` the user typed: [`Format`], or Markdown (for the parts list only).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FormatArg {
    /// Readable text with engineering notation.
    Text,
    /// One JSON object.
    Json,
    /// Comma-separated values with a header row (where the result is a table).
    Csv,
    /// A Markdown table (the parts list).
    Md,
}

impl FormatArg {
    /// The format of a subcommand that prints no Markdown; `None` for `md`.
    pub fn plain(self) -> Option<Format> {
        match self {
            FormatArg::Text => Some(Format::Text),
            FormatArg::Json => Some(Format::Json),
            FormatArg::Csv => Some(Format::Csv),
            FormatArg::Md => None,
        }
    }
}

impl PartialEq<Format> for FormatArg {
    fn eq(&self, other: &Format) -> bool {
        self.plain() == Some(*other)
    }
}

/// How results are printed on stdout.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Readable text with engineering notation.
    Text,
    /// One JSON object.
    Json,
    /// Comma-separated values with a header row (where the result is a table).
    Csv,
}

impl Format {
    /// The name the user typed.
    pub fn name(self) -> &'static str {
        match self {
            Format::Text => "text",
            Format::Json => "json",
            Format::Csv => "csv",
        }
    }
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// The crystal record (with fp and Qu) from its motional parameters.
    #[command(after_help = "\
Example:
  xtal-ladder crystal --fs 9.8268M --lm 17m --rm 10 --c0 3.9p
  xtal-ladder crystal --fs 9.8268M --cm 15.4f --rm 10 --c0 3.9p --format json")]
    Crystal(CrystalCmd),

    /// Crystal parameters (with 1-sigma uncertainties) fitted to swept S21 measurements.
    #[command(after_help = "\
Sweeps are CSV files (header frequency_hz,s21_db and optionally s21_deg) or Touchstone
files (.s2p, or .s1p holding only the S21 trace) of one crystal in a series fixture.
The crystal's id is the file name without its extension.

Example:
  xtal-ladder fit examples/sweeps/x01.csv
  xtal-ladder fit examples/sweeps/*.csv examples/sweeps/*.s2p -o batch.csv
  xtal-ladder fit examples/sweeps/x07.s2p --plot x07-fit.svg")]
    Fit(FitCmd),

    /// Motional capacitance and inductance from an oscillator frequency shift.
    #[command(after_help = "\
The crystal runs in an oscillator at F1 with its series capacitor shorted and at F2 with CS
in series. For a lossless BVD crystal with F1 taken as fs, Cm = (C0 + CS)*((F2/F1)^2 - 1);
with --osc-load CL the oscillator's own series load capacitance is accounted for (ignoring
CL = 100 pF costs about 7 %). The result is as good as C0: +/-0.5 pF moves Cm by about
1.4 % at CS = 33 pF.

Example:
  xtal-ladder shift --f-short 9.82680M --f-cap 9.82885M --cap 33p --c0 3.9p")]
    Shift(ShiftCmd),

    /// Pick matched sets of crystals from a batch file.
    #[command(after_help = "\
The batch CSV has the header id,fs_hz and any of rm_ohm,lm_h,cm_f,c0_f (as written by
`xtal-ladder fit -o`). Crystals with Rm above twice the batch median, or whose values do not
agree with fs, are rejected with a reason.

Example:
  xtal-ladder match examples/demo-batch.csv --count 8 --bandwidth 2.4k
  xtal-ladder match examples/demo-batch.csv --count 4 --sets 3 --tolerance 20 --format json")]
    Match(MatchCmd),

    /// Synthesize a crystal ladder filter for a response, an order and a bandwidth.
    #[command(after_help = "\
The crystals are either one crystal given by its values (the same at every position, with
--order) or the ones in a batch file, in signal order (--crystals, optionally --ids).

Example:
  xtal-ladder design --fs 9.8268M --lm 17m --rm 10 --c0 3.9p --order 8 \\
      --family chebyshev --ripple 0.1 --bandwidth 2.4k --bandwidth-at 6db
  xtal-ladder design --crystals examples/demo-batch.csv --ids x01,x04,x14,x24 \\
      --family butterworth --bandwidth 500 --refine -o cw.json")]
    Design(DesignCmd),

    /// Analyze a design: metrics, the response as CSV, and plots.
    #[command(after_help = "\
Without a range the analysis covers the design's passband and skirts (--wide: out past the
C0 notches and spurious modes). -o FILE writes the response table to FILE; --format csv writes
it to stdout instead of the metrics. The table has the columns
frequency_hz,s21_db,s21_deg,s11_db,group_delay_s (S11 referred to the source resistance,
group delay -dphi/domega in seconds).

Example:
  xtal-ladder analyze design.json
  xtal-ladder analyze design.json --center 9.8284M --span 10k --points 4001 --format csv -o s21.csv
  xtal-ladder analyze design.json --plot filter.svg --return-loss-plot rl.svg --delay-plot gd.svg
  xtal-ladder analyze design.json --wide --plot wide.svg")]
    Analyze(AnalyzeCmd),

    /// A SPICE netlist of a design, with an .ac card over its passband (runs in ngspice).
    #[command(after_help = "\
Example:
  xtal-ladder netlist design.json -o filter.cir
  ngspice -b filter.cir")]
    Netlist(NetlistCmd),

    /// The predicted two-port of a design as a Touchstone 1.1 file (.s2p).
    #[command(after_help = "\
The S-parameters are referred to one reference resistance (Touchstone 1.1 has one for both
ports): by default the design's source termination. Terminate port 1 in the source and port 2
in the load resistance (both are in the file's header) to see the designed response.

Example:
  xtal-ladder touchstone design.json -o filter.s2p
  xtal-ladder touchstone design.json --reference 50 --data-format db -o filter-50.s2p")]
    Touchstone(TouchstoneCmd),

    /// The whole job on built-in data: 36 surplus crystals to an 8-crystal SSB filter.
    #[command(after_help = "\
Writes every artefact into DIR (default ./xtal-ladder-demo): the batch file, the design,
plots, the netlist and the Touchstone file. DIR must be new, empty, or a directory the demo
wrote before; only the demo's own file names are ever written there.

Example:
  xtal-ladder demo
  xtal-ladder demo --out /tmp/demo --format json")]
    Demo(DemoCmd),

    /// The parts list: standard values, re-tuned series capacitors, the as-built response.
    #[command(after_help = PARTS_HELP)]
    Parts(PartsCmd),

    /// Tolerance yield: Monte Carlo over capacitor tolerance and crystal spread.
    #[command(after_help = YIELD_HELP)]
    Yield(YieldCmd),

    /// One self-contained HTML page of a design for the bench, from parts to yield.
    #[command(after_help = REPORT_HELP)]
    Report(ReportCmd),
}

// --------------------------------------------------------------------------------------------
// Shared flag groups.

/// `-o FILE`.
#[derive(Debug, Clone, Args)]
pub struct OutputArg {
    /// Write the result to FILE (atomically; never over an input of the same run).
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    pub output: Option<PathBuf>,
}

/// One crystal given by its values.
#[derive(Debug, Clone, Args)]
pub struct CrystalArgs {
    /// Series-resonant frequency fs, e.g. 9.8268M.
    #[arg(long, value_name = "F", allow_hyphen_values = true)]
    pub fs: Option<Hertz>,
    /// Motional inductance Lm, e.g. 17m (or give --cm).
    #[arg(
        long,
        value_name = "L",
        conflicts_with = "cm",
        allow_hyphen_values = true
    )]
    pub lm: Option<Henries>,
    /// Motional capacitance Cm, e.g. 15.4f (or give --lm).
    #[arg(long, value_name = "C", allow_hyphen_values = true)]
    pub cm: Option<Farads>,
    /// Motional resistance Rm, e.g. 10 or 10R (0 for a lossless crystal).
    #[arg(long, value_name = "R", allow_hyphen_values = true)]
    pub rm: Option<Ohms>,
    /// Holder capacitance C0, e.g. 3.9p (0 leaves it out).
    #[arg(long, value_name = "C0", allow_hyphen_values = true)]
    pub c0: Option<Farads>,
    /// The crystal's name in the output (designs number the positions: x1, x2, ...).
    #[arg(long, value_name = "ID", default_value = "x")]
    pub id: String,
}

/// The series fixture a sweep was taken in.
#[derive(Debug, Clone, Args)]
pub struct FixtureArgs {
    /// Source and load resistance R0 of the fixture [default: the Touchstone file's reference,
    /// else 50 ohm].
    #[arg(long = "fixture-ohms", value_name = "R0", allow_hyphen_values = true)]
    pub fixture_ohms: Option<Ohms>,
    /// Known extra resistance of the fixture in series with the crystal.
    #[arg(
        long = "extra-series-ohms",
        value_name = "RX",
        default_value = "0",
        allow_hyphen_values = true
    )]
    pub extra_series_ohms: Ohms,
}

/// A frequency range and its number of points.
#[derive(Debug, Clone, Args)]
pub struct RangeArgs {
    /// Centre of the range (with --span).
    #[arg(long, value_name = "F", requires = "span", conflicts_with_all = ["from", "to"], allow_hyphen_values = true)]
    pub center: Option<Hertz>,
    /// Full width of the range (with --center).
    #[arg(
        long,
        value_name = "S",
        requires = "center",
        allow_hyphen_values = true
    )]
    pub span: Option<Hertz>,
    /// First frequency (with --to).
    #[arg(long, value_name = "F1", requires = "to", allow_hyphen_values = true)]
    pub from: Option<Hertz>,
    /// Last frequency (with --from).
    #[arg(long, value_name = "F2", requires = "from", allow_hyphen_values = true)]
    pub to: Option<Hertz>,
    /// Number of frequency points.
    #[arg(long, value_name = "N")]
    pub points: Option<usize>,
}

// --------------------------------------------------------------------------------------------
// Subcommands.

/// `crystal`.
#[derive(Debug, Clone, Args)]
pub struct CrystalCmd {
    /// The crystal.
    #[command(flatten)]
    pub crystal: CrystalArgs,
}

/// `fit`.
#[derive(Debug, Clone, Args)]
pub struct FitCmd {
    /// Sweep files (.csv, .s2p, or .s1p holding the S21 trace).
    #[arg(value_name = "SWEEP", required = true)]
    pub sweeps: Vec<PathBuf>,
    /// The fixture.
    #[command(flatten)]
    pub fixture: FixtureArgs,
    /// Batch CSV to write (id,fs_hz,rm_ohm,lm_h,cm_f,c0_f).
    #[command(flatten)]
    pub output: OutputArg,
    /// SVG plot of measured and fitted traces (with several sweeps, one file per sweep, named
    /// FILE-ID.svg).
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
}

/// `shift`.
#[derive(Debug, Clone, Args)]
pub struct ShiftCmd {
    /// Oscillator frequency F1 with the crystal's series capacitor shorted.
    #[arg(long = "f-short", value_name = "F1", allow_hyphen_values = true)]
    pub f_short: Hertz,
    /// Oscillator frequency F2 with the series capacitor CS in circuit.
    #[arg(long = "f-cap", value_name = "F2", allow_hyphen_values = true)]
    pub f_cap: Hertz,
    /// The series capacitor CS, e.g. 33p.
    #[arg(long = "cap", value_name = "CS", allow_hyphen_values = true)]
    pub cap: Farads,
    /// The crystal's holder capacitance C0, e.g. 3.9p.
    #[arg(long, value_name = "C0", allow_hyphen_values = true)]
    pub c0: Farads,
    /// The oscillator's own series load capacitance CL, when known, e.g. 100p.
    #[arg(long = "osc-load", value_name = "CL", allow_hyphen_values = true)]
    pub osc_load: Option<Farads>,
}

/// `match`.
#[derive(Debug, Clone, Args)]
pub struct MatchCmd {
    /// Batch CSV (id,fs_hz and any of rm_ohm,lm_h,cm_f,c0_f).
    #[arg(value_name = "BATCH.csv")]
    pub batch: PathBuf,
    /// Crystals per set.
    #[arg(long, short = 'n', value_name = "N")]
    pub count: usize,
    /// Up to K disjoint sets.
    #[arg(long, value_name = "K", default_value_t = 1)]
    pub sets: usize,
    /// Largest fs spread allowed within a set [default: 10 % of --bandwidth, else unlimited].
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    pub tolerance: Option<Hertz>,
    /// The filter's bandwidth, which sets the default --tolerance.
    #[arg(long, value_name = "BW", allow_hyphen_values = true)]
    pub bandwidth: Option<Hertz>,
    /// Motional inductance for records without lm_h or cm_f.
    #[arg(long = "lm-default", value_name = "L", allow_hyphen_values = true)]
    pub lm_default: Option<Henries>,
    /// Holder capacitance for records without c0_f.
    #[arg(long = "c0-default", value_name = "C0", allow_hyphen_values = true)]
    pub c0_default: Option<Farads>,
    /// Motional resistance for records without rm_ohm.
    #[arg(long = "rm-default", value_name = "R", allow_hyphen_values = true)]
    pub rm_default: Option<Ohms>,
    /// Batch CSV of the first set, in the order to build it.
    #[command(flatten)]
    pub output: OutputArg,
}

/// Response families as the user spells them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FamilyArg {
    /// Maximally flat.
    Butterworth,
    /// Equiripple passband (--ripple).
    Chebyshev,
    /// Maximally flat delay.
    Bessel,
    /// Gaussian.
    Gaussian,
    /// Optimum-L.
    Legendre,
    /// All coupling capacitors equal (minimum loss).
    #[value(name = "equal-c")]
    EqualC,
}

/// Where the bandwidth is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum BandwidthAtArg {
    /// Between the -3 dB points.
    #[value(name = "3db")]
    Db3,
    /// Between the -6 dB points.
    #[value(name = "6db")]
    Db6,
    /// Between the ripple edges (Chebyshev).
    #[value(name = "ripple")]
    Ripple,
}

/// `design`.
#[derive(Debug, Clone, Args)]
pub struct DesignCmd {
    /// One crystal, used at every position (with --order).
    #[command(flatten)]
    pub crystal: CrystalArgs,
    /// Batch CSV of the crystals to use, in signal order.
    #[arg(long, value_name = "BATCH.csv", conflicts_with_all = ["fs", "lm", "cm", "rm", "c0"])]
    pub crystals: Option<PathBuf>,
    /// Which crystals of the batch to use, in signal order, e.g. x07,x12,x03.
    #[arg(
        long,
        value_name = "ID,...",
        value_delimiter = ',',
        requires = "crystals"
    )]
    pub ids: Vec<String>,
    /// Response family.
    #[arg(long, value_enum, default_value_t = FamilyArg::Chebyshev)]
    pub family: FamilyArg,
    /// Number of crystals (required with a single crystal; with --crystals it must match).
    #[arg(long, value_name = "N")]
    pub order: Option<usize>,
    /// Bandwidth, e.g. 2.4k.
    #[arg(long, value_name = "BW", allow_hyphen_values = true)]
    pub bandwidth: Hertz,
    /// Where --bandwidth is measured.
    #[arg(long = "bandwidth-at", value_enum, default_value_t = BandwidthAtArg::Db3)]
    pub bandwidth_at: BandwidthAtArg,
    /// Passband ripple of a Chebyshev response [default: 0.1 dB].
    #[arg(long, value_name = "DB", allow_hyphen_values = true)]
    pub ripple: Option<Decibels>,
    /// Predistort for the crystals' finite Q (ideal shape, flat extra loss).
    #[arg(long)]
    pub predistort: bool,
    /// Refine every value on the exact crystal model.
    #[arg(long)]
    pub refine: bool,
    /// Design JSON to write.
    #[command(flatten)]
    pub output: OutputArg,
}

/// How frequency axes of plots are labelled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum AxisArg {
    /// Offset from the centre, in Hz or kHz.
    Offset,
    /// Absolute frequency, in MHz.
    Absolute,
}

/// `analyze`.
#[derive(Debug, Clone, Args)]
pub struct AnalyzeCmd {
    /// Design JSON (from `xtal-ladder design -o`).
    #[arg(value_name = "DESIGN.json")]
    pub design: PathBuf,
    /// The frequency range.
    #[command(flatten)]
    pub range: RangeArgs,
    /// SVG plot of the transmission.
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// Plot transmission as a linear voltage ratio instead of dB.
    #[arg(long)]
    pub linear: bool,
    /// Wide view: the far skirts, the notch from C0 and spurious responses.
    #[arg(long)]
    pub wide: bool,
    /// SVG plot of the return loss.
    #[arg(long = "return-loss-plot", value_name = "FILE")]
    pub return_loss_plot: Option<PathBuf>,
    /// SVG plot of the group delay.
    #[arg(long = "delay-plot", value_name = "FILE")]
    pub delay_plot: Option<PathBuf>,
    /// Frequency axis of the plots.
    #[arg(long, value_enum, default_value_t = AxisArg::Offset)]
    pub axis: AxisArg,
    /// The response table (CSV) goes to this file; stdout keeps the metrics.
    #[command(flatten)]
    pub output: OutputArg,
    /// Print on stderr how long the work took: the sweep (`analysis: X.XXX ms for N points`,
    /// the first sweep of this process, then the median of 20 repeats of it into one reused
    /// buffer), the refined figures and the table.
    #[arg(long)]
    pub timing: bool,
    /// Analyse between two ends of this system impedance, with an L-network at each end
    /// matching it to the design's terminations at the centre, e.g. 50.
    #[arg(long = "match-to", value_name = "OHMS", allow_hyphen_values = true)]
    pub match_to: Option<Ohms>,
    /// Form of those L-networks: lowpass (series L, shunt C) or highpass (series C, shunt L).
    #[arg(long = "match-form", value_enum, default_value_t = AnalyzeMatchForm::Lowpass, requires = "match_to")]
    pub match_form: AnalyzeMatchForm,
}

/// The L-network form for `analyze --match-to`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum AnalyzeMatchForm {
    /// Series inductor, shunt capacitor.
    Lowpass,
    /// Series capacitor, shunt inductor.
    Highpass,
}

/// `netlist`.
#[derive(Debug, Clone, Args)]
pub struct NetlistCmd {
    /// Design JSON.
    #[arg(value_name = "DESIGN.json")]
    pub design: PathBuf,
    /// The range of the .ac card [default: the passband and skirts].
    #[command(flatten)]
    pub range: RangeArgs,
    /// Netlist file to write instead of stdout.
    #[command(flatten)]
    pub output: OutputArg,
}

/// Touchstone data formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DataFormatArg {
    /// Real and imaginary parts.
    Ri,
    /// Magnitude and angle.
    Ma,
    /// dB and angle.
    Db,
}

/// `touchstone`.
#[derive(Debug, Clone, Args)]
pub struct TouchstoneCmd {
    /// Design JSON.
    #[arg(value_name = "DESIGN.json")]
    pub design: PathBuf,
    /// The frequency range [default: the passband and skirts].
    #[command(flatten)]
    pub range: RangeArgs,
    /// Reference resistance of the file [default: the design's source termination].
    #[arg(long, value_name = "R0", allow_hyphen_values = true)]
    pub reference: Option<Ohms>,
    /// How each S-parameter is written.
    #[arg(long = "data-format", value_enum, default_value_t = DataFormatArg::Ma)]
    pub data_format: DataFormatArg,
    /// The .s2p file to write instead of stdout.
    #[command(flatten)]
    pub output: OutputArg,
}

/// `demo`.
#[derive(Debug, Clone, Args)]
pub struct DemoCmd {
    /// Directory for the artefacts.
    #[arg(long, value_name = "DIR", default_value = "xtal-ladder-demo")]
    pub out: PathBuf,
}

#[cfg(test)]
mod tests {
    //! One parse test per flag: the value arrives checked and in SI units, and a bad value is
    //! refused by the parser.
    use super::*;
    use clap::CommandFactory;

    fn parse(args: &[&str]) -> Cli {
        let mut argv = vec!["xtal-ladder"];
        argv.extend_from_slice(args);
        match Cli::try_parse_from(argv) {
            Ok(c) => c,
            Err(e) => panic!("{args:?} should parse: {e}"),
        }
    }

    fn refused(args: &[&str]) -> clap::Error {
        let mut argv = vec!["xtal-ladder"];
        argv.extend_from_slice(args);
        match Cli::try_parse_from(argv) {
            Ok(c) => panic!("{args:?} should be refused, got {c:?}"),
            Err(e) => e,
        }
    }

    #[test]
    fn definitions_are_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn format_flag() {
        assert_eq!(parse(&["crystal"]).format, Format::Text);
        assert_eq!(parse(&["--format", "json", "crystal"]).format, Format::Json);
        assert_eq!(parse(&["crystal", "--format", "csv"]).format, Format::Csv);
        refused(&["--format", "xml", "crystal"]);
    }

    fn crystal_of(c: Cli) -> CrystalArgs {
        match c.command {
            Some(Command::Crystal(c)) => c.crystal,
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn crystal_flags() {
        let c = crystal_of(parse(&[
            "crystal", "--fs", "11.0558M", "--lm", "15.9mH", "--rm", "14R", "--c0", "3p9", "--id",
            "x07",
        ]));
        assert_eq!(c.fs.map(f64::from), Some(11.0558e6));
        assert_eq!(c.lm.map(f64::from), Some(15.9e-3));
        assert_eq!(c.rm.map(f64::from), Some(14.0));
        assert_eq!(c.c0.map(f64::from), Some(3.9e-12));
        assert_eq!(c.id, "x07");
        let c = crystal_of(parse(&["crystal", "--cm", "13f"]));
        assert_eq!(c.cm.map(f64::from), Some(13e-15));
        refused(&["crystal", "--lm", "15m", "--cm", "13f"]);
        refused(&["crystal", "--fs", "11,0558M"]);
        refused(&["crystal", "--c0", "3.9pH"]);
        refused(&["crystal", "--rm", "-3"]);
    }

    #[test]
    fn fit_flags() {
        let c = parse(&[
            "fit",
            "a.csv",
            "b.s2p",
            "--fixture-ohms",
            "12.5",
            "--extra-series-ohms",
            "1R5",
            "-o",
            "batch.csv",
            "--plot",
            "fit.svg",
        ]);
        let Some(Command::Fit(f)) = c.command else {
            panic!()
        };
        assert_eq!(f.sweeps.len(), 2);
        assert_eq!(f.fixture.fixture_ohms.map(f64::from), Some(12.5));
        assert_eq!(f64::from(f.fixture.extra_series_ohms), 1.5);
        assert_eq!(f.output.output, Some(PathBuf::from("batch.csv")));
        assert_eq!(f.plot, Some(PathBuf::from("fit.svg")));
        refused(&["fit"]);
        refused(&["fit", "a.csv", "--fixture-ohms", "fifty"]);
    }

    #[test]
    fn shift_flags() {
        let c = parse(&[
            "shift",
            "--f-short",
            "11.05412M",
            "--f-cap",
            "11.05771M",
            "--cap",
            "33p",
            "--c0",
            "3.9p",
            "--osc-load",
            "100p",
        ]);
        let Some(Command::Shift(s)) = c.command else {
            panic!()
        };
        assert_eq!(f64::from(s.f_short), 11.05412e6);
        assert_eq!(f64::from(s.f_cap), 11.05771e6);
        assert_eq!(f64::from(s.cap), 33e-12);
        assert_eq!(f64::from(s.c0), 3.9e-12);
        assert_eq!(s.osc_load.map(f64::from), Some(100e-12));
        refused(&[
            "shift",
            "--f-short",
            "11M",
            "--f-cap",
            "11.1M",
            "--cap",
            "33p",
        ]);
    }

    #[test]
    fn match_flags() {
        let c = parse(&[
            "match",
            "b.csv",
            "--count",
            "8",
            "--sets",
            "2",
            "--tolerance",
            "20",
            "--bandwidth",
            "2.4k",
            "--lm-default",
            "16m",
            "--c0-default",
            "4p",
            "--rm-default",
            "12",
        ]);
        let Some(Command::Match(m)) = c.command else {
            panic!()
        };
        assert_eq!((m.count, m.sets), (8, 2));
        assert_eq!(m.tolerance.map(f64::from), Some(20.0));
        assert_eq!(m.bandwidth.map(f64::from), Some(2400.0));
        assert_eq!(m.lm_default.map(f64::from), Some(16e-3));
        assert_eq!(m.c0_default.map(f64::from), Some(4e-12));
        assert_eq!(m.rm_default.map(f64::from), Some(12.0));
        refused(&["match", "b.csv"]);
        refused(&["match", "b.csv", "--count", "-1"]);
    }

    #[test]
    fn design_flags() {
        let c = parse(&[
            "design",
            "--crystals",
            "b.csv",
            "--ids",
            "x1,x2,x3",
            "--family",
            "equal-c",
            "--bandwidth",
            "500",
            "--bandwidth-at",
            "6db",
            "--ripple",
            "0.5",
            "--predistort",
            "--refine",
            "-o",
            "d.json",
        ]);
        let Some(Command::Design(d)) = c.command else {
            panic!()
        };
        assert_eq!(d.ids, ["x1", "x2", "x3"]);
        assert_eq!(d.family, FamilyArg::EqualC);
        assert_eq!(f64::from(d.bandwidth), 500.0);
        assert_eq!(d.bandwidth_at, BandwidthAtArg::Db6);
        assert_eq!(d.ripple.map(f64::from), Some(0.5));
        assert!(d.predistort && d.refine);
        let c = parse(&[
            "design",
            "--fs",
            "9M",
            "--lm",
            "15m",
            "--order",
            "4",
            "--bandwidth",
            "2k",
        ]);
        let Some(Command::Design(d)) = c.command else {
            panic!()
        };
        assert_eq!(d.order, Some(4));
        assert_eq!(d.family, FamilyArg::Chebyshev);
        assert_eq!(d.bandwidth_at, BandwidthAtArg::Db3);
        refused(&[
            "design",
            "--crystals",
            "b.csv",
            "--fs",
            "9M",
            "--bandwidth",
            "2k",
        ]);
        refused(&["design", "--ids", "a,b", "--bandwidth", "2k"]);
        refused(&[
            "design",
            "--fs",
            "9M",
            "--family",
            "elliptic",
            "--bandwidth",
            "2k",
        ]);
    }

    #[test]
    fn range_flags() {
        let c = parse(&[
            "analyze", "d.json", "--center", "9M", "--span", "10k", "--points", "101",
        ]);
        let Some(Command::Analyze(a)) = c.command else {
            panic!()
        };
        assert_eq!(a.range.center.map(f64::from), Some(9e6));
        assert_eq!(a.range.span.map(f64::from), Some(1e4));
        assert_eq!(a.range.points, Some(101));
        refused(&["analyze", "d.json", "--center", "9M"]);
        refused(&["analyze", "d.json", "--from", "9M"]);
        refused(&[
            "analyze", "d.json", "--center", "9M", "--span", "1k", "--from", "8M", "--to", "9M",
        ]);
    }

    #[test]
    fn analyze_plot_flags() {
        let c = parse(&[
            "analyze",
            "d.json",
            "--plot",
            "p.svg",
            "--linear",
            "--wide",
            "--return-loss-plot",
            "rl.svg",
            "--delay-plot",
            "gd.svg",
            "--axis",
            "absolute",
        ]);
        let Some(Command::Analyze(a)) = c.command else {
            panic!()
        };
        assert!(a.linear && a.wide);
        assert_eq!(a.axis, AxisArg::Absolute);
        assert_eq!(a.return_loss_plot, Some(PathBuf::from("rl.svg")));
        assert_eq!(a.delay_plot, Some(PathBuf::from("gd.svg")));
    }

    #[test]
    fn netlist_touchstone_demo_flags() {
        let Some(Command::Netlist(n)) = parse(&["netlist", "d.json", "-o", "f.cir"]).command else {
            panic!()
        };
        assert_eq!(n.output.output, Some(PathBuf::from("f.cir")));
        let Some(Command::Touchstone(t)) = parse(&[
            "touchstone",
            "d.json",
            "--reference",
            "50",
            "--data-format",
            "db",
        ])
        .command
        else {
            panic!()
        };
        assert_eq!(t.reference.map(f64::from), Some(50.0));
        assert_eq!(t.data_format, DataFormatArg::Db);
        let Some(Command::Demo(d)) = parse(&["demo"]).command else {
            panic!()
        };
        assert_eq!(d.out, PathBuf::from("xtal-ladder-demo"));
        let Some(Command::Demo(d)) = parse(&["demo", "--out", "/tmp/x"]).command else {
            panic!()
        };
        assert_eq!(d.out, PathBuf::from("/tmp/x"));
    }
}

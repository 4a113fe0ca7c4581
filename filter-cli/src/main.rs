//! `xtal-ladder`: the command line of `filter-core`.
//!
//! This crate holds no filter mathematics. It parses the command line ([`flags`]), reads the
//! input files ([`files`]), calls `filter_core`, prints text, JSON or CSV, writes output files
//! atomically, and maps every outcome to an exit code ([`errors`]): 0 success, 2 bad input or
//! usage, 1 other failures.

mod cmd;
mod demo_data;
mod errors;
mod files;
mod flags;
mod progress;
mod report;
mod text;

use clap::error::ErrorKind as ClapErrorKind;
use clap::Parser;
use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = match flags::Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => return clap_failure(&e),
    };
    let Some(command) = cli.command else {
        eprintln!(
            "error: no subcommand given; use one of crystal, fit, shift, match, design, \
             analyze, netlist, touchstone, parts, yield, report, demo"
        );
        eprintln!("hint: 'xtal-ladder --help' shows each with an example");
        return ExitCode::from(errors::EXIT_BAD_INPUT);
    };
    match cmd::run(command, cli.format) {
        Ok(()) => ExitCode::from(errors::EXIT_OK),
        Err(e) if errors::is_broken_pipe(&e) => ExitCode::from(errors::EXIT_OK),
        Err(e) => {
            let (code, lines) = errors::render(&e);
            let mut err = std::io::stderr().lock();
            for line in lines {
                let _ = writeln!(err, "{line}");
            }
            ExitCode::from(code)
        }
    }
}

/// Print a clap error in our shape: help and version to stdout with exit 0; anything else as
/// one `error:` line (clap's own message, folded onto one line), the usage as a hint, exit 2.
fn clap_failure(e: &clap::Error) -> ExitCode {
    match e.kind() {
        ClapErrorKind::DisplayHelp | ClapErrorKind::DisplayVersion => {
            let _ = e.print();
            return ExitCode::from(errors::EXIT_OK);
        }
        _ => {}
    }
    let rendered = e.render().to_string();
    let mut message = Vec::new();
    let mut usage = None;
    for line in rendered.lines() {
        let t = line.trim();
        if let Some(u) = t.strip_prefix("Usage:") {
            usage = Some(u.trim().to_string());
        } else if t.starts_with("For more information") || t.is_empty() {
            continue;
        } else if usage.is_none() {
            message.push(t.trim_start_matches("error:").trim().to_string());
        }
    }
    let library_hint = std::error::Error::source(e)
        .and_then(|s| s.downcast_ref::<filter_core::Error>())
        .and_then(|le| le.hint().map(str::to_string));
    let mut err = std::io::stderr().lock();
    let _ = writeln!(err, "error: {}", errors::one_line(&message.join(" ")));
    if let Some(h) = library_hint {
        let _ = writeln!(err, "hint: {}", errors::one_line(&h));
    }
    if let Some(u) = usage {
        let _ = writeln!(err, "hint: usage: {u} (see --help)");
    }
    ExitCode::from(errors::EXIT_BAD_INPUT)
}

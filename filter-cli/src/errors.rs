//! Outcomes of a run and their exit codes.
//!
//! - 0: success.
//! - 2: bad input: a usage error, a value out of range, malformed file content, a filter the
//!   crystals cannot realize ([`BadInput`], and every [`filter_core::Error`] except numerical
//!   failures).
//! - 1: anything else: a file that cannot be opened or written, a numerical failure.
//!
//! The message is printed once, as one `error: …` line (the context chain joined with `: `),
//! followed by at most two `hint: …` lines.

use filter_core::ErrorKind;
use std::fmt;

/// Exit code for success.
pub const EXIT_OK: u8 = 0;
/// Exit code for I/O and other failures.
pub const EXIT_FAILURE: u8 = 1;
/// Exit code for bad input, usage errors and unrealizable specifications.
pub const EXIT_BAD_INPUT: u8 = 2;

/// Bad input found by the command line itself (exit code 2).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BadInput {
    message: String,
    hint: Option<String>,
}

impl BadInput {
    /// A new bad-input error.
    pub fn new(message: impl Into<String>) -> Self {
        BadInput {
            message: message.into(),
            hint: None,
        }
    }

    /// Attach what the user could do instead.
    pub fn with_hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }
}

impl fmt::Display for BadInput {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for BadInput {}

/// Shorthand: a [`BadInput`] as an [`anyhow::Error`].
pub fn bad(message: impl Into<String>) -> anyhow::Error {
    anyhow::Error::new(BadInput::new(message))
}

/// Shorthand: a [`BadInput`] with a hint as an [`anyhow::Error`].
pub fn bad_hint(message: impl Into<String>, hint: impl Into<String>) -> anyhow::Error {
    anyhow::Error::new(BadInput::new(message).with_hint(hint))
}

/// The exit code of a failed run and the hints found in its error chain.
pub fn classify(err: &anyhow::Error) -> (u8, Vec<String>) {
    let mut code = None;
    let mut hints = Vec::new();
    for cause in err.chain() {
        if let Some(e) = cause.downcast_ref::<filter_core::Error>() {
            code.get_or_insert(match e.kind() {
                ErrorKind::Numerical => EXIT_FAILURE,
                _ => EXIT_BAD_INPUT,
            });
            if let Some(h) = e.hint() {
                hints.push(h.to_string());
            }
        } else if let Some(e) = cause.downcast_ref::<BadInput>() {
            code.get_or_insert(EXIT_BAD_INPUT);
            if let Some(h) = &e.hint {
                hints.push(h.clone());
            }
        } else if cause.downcast_ref::<std::io::Error>().is_some() {
            code.get_or_insert(EXIT_FAILURE);
        }
    }
    hints.truncate(2);
    (code.unwrap_or(EXIT_FAILURE), hints)
}

/// True when the error is a closed pipe on stdout (`xtal-ladder … | head`), which is not a
/// failure of ours.
pub fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|e| e.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// Text on one line: newlines and runs of spaces become single spaces.
pub fn one_line(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// The lines printed on stderr for a failed run: `error: …` and up to two `hint: …`.
pub fn render(err: &anyhow::Error) -> (u8, Vec<String>) {
    let (code, hints) = classify(err);
    let mut lines = vec![format!("error: {}", one_line(&format!("{err:#}")))];
    lines.extend(hints.iter().map(|h| format!("hint: {}", one_line(h))));
    (code, lines)
}

#[cfg(test)]
mod tests {
    use super::*;
    use anyhow::Context;

    #[test]
    fn library_errors_map_to_exit_codes() {
        let e = anyhow::Error::new(filter_core::Error::parse("bad cell")).context("file 'a.csv'");
        assert_eq!(classify(&e).0, EXIT_BAD_INPUT);
        let e = anyhow::Error::new(filter_core::Error::numerical("diverged"));
        assert_eq!(classify(&e).0, EXIT_FAILURE);
        let e = anyhow::Error::new(
            filter_core::Error::unrealizable("too wide").with_hint("use a narrower bandwidth"),
        );
        let (code, hints) = classify(&e);
        assert_eq!(code, EXIT_BAD_INPUT);
        assert_eq!(hints, vec!["use a narrower bandwidth".to_string()]);
    }

    #[test]
    fn io_errors_are_failures_and_bad_input_is_two() {
        let io = std::io::Error::new(std::io::ErrorKind::NotFound, "no such file");
        let e = Err::<(), _>(io).context("cannot read 'x.csv'").unwrap_err();
        assert_eq!(classify(&e).0, EXIT_FAILURE);
        assert_eq!(classify(&bad("nope")).0, EXIT_BAD_INPUT);
    }

    #[test]
    fn rendering_is_one_error_line_and_at_most_two_hints() {
        let e = bad_hint("first\nsecond", "do this");
        let (_, lines) = render(&e.context("while reading"));
        assert_eq!(lines[0], "error: while reading: first second");
        assert_eq!(lines[1], "hint: do this");
        assert_eq!(lines.len(), 2);
    }
}

//! The one error type of `filter-core`.
//!
//! Every fallible function returns [`Error`]. Its [`Error::kind`] says what class of failure it
//! is; its message names the field, the offending value and what would be valid; an optional
//! [`Error::hint`] says what the user can change.

use std::fmt;

/// What class of failure an [`Error`] is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum ErrorKind {
    /// A value is out of its valid range (negative capacitance, order 0, ...).
    InvalidValue,
    /// Text could not be read as a number, a quantity or a file format.
    Parse,
    /// The requested filter cannot be realized with the given crystals.
    Unrealizable,
    /// The request is valid but not supported (e.g. an order above the trusted maximum).
    Unsupported,
    /// A numerical procedure failed to converge or produced non-finite values.
    Numerical,
}

/// An error from `filter-core`: a kind, a message and an optional hint.
#[derive(Debug, Clone, PartialEq)]
pub struct Error {
    kind: ErrorKind,
    message: String,
    hint: Option<String>,
}

impl Error {
    /// A new error of `kind` with `message`.
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> Self {
        Error {
            kind,
            message: message.into(),
            hint: None,
        }
    }

    /// An out-of-range value: `field` had `value`, `valid` says what would be accepted.
    pub fn invalid(field: &str, value: impl fmt::Display, valid: &str) -> Self {
        Error::new(
            ErrorKind::InvalidValue,
            format!("{field}: {value} is not valid; expected {valid}"),
        )
    }

    /// Text that could not be parsed.
    pub fn parse(what: impl Into<String>) -> Self {
        Error::new(ErrorKind::Parse, what)
    }

    /// A filter that cannot be realized.
    pub fn unrealizable(what: impl Into<String>) -> Self {
        Error::new(ErrorKind::Unrealizable, what)
    }

    /// A numerical failure.
    pub fn numerical(what: impl Into<String>) -> Self {
        Error::new(ErrorKind::Numerical, what)
    }

    /// Attach a hint: what the user could change to succeed.
    pub fn with_hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }

    /// Prefix the message with a context such as a file name and line.
    pub fn context(mut self, ctx: impl fmt::Display) -> Self {
        self.message = format!("{ctx}: {}", self.message);
        self
    }

    /// The class of failure.
    pub fn kind(&self) -> ErrorKind {
        self.kind
    }

    /// The message, without the hint.
    pub fn message(&self) -> &str {
        &self.message
    }

    /// What the user could change, when known.
    pub fn hint(&self) -> Option<&str> {
        self.hint.as_deref()
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Error {}

/// Result alias for `filter-core`.
pub type Result<T> = std::result::Result<T, Error>;

/// Check that `value` is finite and strictly positive.
pub fn require_positive(field: &str, value: f64) -> Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(Error::invalid(
            field,
            value,
            "a finite value greater than zero",
        ))
    }
}

/// Check that `value` is finite and not negative.
pub fn require_non_negative(field: &str, value: f64) -> Result<f64> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(Error::invalid(
            field,
            value,
            "a finite value of zero or more",
        ))
    }
}

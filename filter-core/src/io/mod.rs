//! Readers and writers of the file formats: pure text in, values out (and back).
//!
//! Nothing here opens files: callers pass `&str` or an `impl std::io::Write`.

pub mod spice;
pub mod sweep_csv;
pub mod touchstone;

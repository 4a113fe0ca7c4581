//! Reading inputs and writing outputs.
//!
//! - Inputs are read whole as UTF-8 text. A file that cannot be opened is an I/O failure
//!   (exit 1); a file that is empty or holds binary data is bad input (exit 2).
//! - Outputs are written atomically: into a temporary file in the same directory, which is then
//!   renamed over the target, so a reader never sees half a file and a failed run leaves any
//!   earlier file in place.
//! - An output never replaces an input of the same run: the paths are compared after
//!   resolving links, and on Unix by device and inode, so `-o ./a.csv` for input `a.csv` or a
//!   hard link to it is refused.

use crate::errors::{bad, bad_hint};
use anyhow::{Context, Result};
use std::fs;
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};

/// Read `path` as text. `what` names the file's role in messages ("sweep", "design").
///
/// # Errors
/// An I/O error when the file cannot be read; [`crate::errors::BadInput`] when it is empty or
/// not UTF-8 text.
pub fn read_text(path: &Path, what: &str) -> Result<String> {
    let bytes =
        fs::read(path).with_context(|| format!("cannot read {what} '{}'", path.display()))?;
    if bytes.iter().all(u8::is_ascii_whitespace) {
        return Err(bad_hint(
            format!("{what} '{}' is empty", path.display()),
            "give a file that holds data",
        ));
    }
    if bytes.contains(&0) {
        return Err(bad(format!(
            "{what} '{}' is not a text file (it holds binary data)",
            path.display()
        )));
    }
    let mut text = String::from_utf8(bytes).map_err(|e| {
        bad(format!(
            "{what} '{}' is not UTF-8 text (invalid byte at offset {})",
            path.display(),
            e.utf8_error().valid_up_to()
        ))
    })?;
    if text.starts_with('\u{feff}') {
        text.remove(0);
    }
    Ok(text)
}

/// True when `a` and `b` name the same existing file.
fn same_file(a: &Path, b: &Path) -> bool {
    let (Ok(ma), Ok(mb)) = (fs::metadata(a), fs::metadata(b)) else {
        return false;
    };
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if ma.dev() == mb.dev() && ma.ino() == mb.ino() {
            return true;
        }
    }
    let _ = (ma, mb);
    match (fs::canonicalize(a), fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Refuse an output path that is one of the run's inputs.
///
/// # Errors
/// [`crate::errors::BadInput`] naming the path.
pub fn check_not_input(output: &Path, inputs: &[PathBuf]) -> Result<()> {
    for input in inputs {
        if output == input.as_path() || same_file(output, input) {
            return Err(bad_hint(
                format!(
                    "output '{}' is also an input of this run; refusing to overwrite it",
                    output.display()
                ),
                "choose another output file name",
            ));
        }
    }
    Ok(())
}

/// Write a file atomically: `fill` writes the content into a buffered temporary file in the
/// target's directory, which then replaces `path`.
///
/// # Errors
/// I/O errors (with the path), or whatever `fill` returns.
pub fn write_atomic(path: &Path, fill: impl FnOnce(&mut dyn Write) -> Result<()>) -> Result<()> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if path.is_dir() {
        return Err(bad(format!(
            "output '{}' is a directory; give a file name",
            path.display()
        )));
    }
    let tmp = tempfile::Builder::new()
        .prefix(".xtal-ladder-")
        .suffix(".tmp")
        .tempfile_in(&dir)
        .with_context(|| format!("cannot create a file in '{}'", dir.display()))?;
    {
        let mut w = BufWriter::new(tmp.as_file());
        fill(&mut w)?;
        w.flush()
            .with_context(|| format!("cannot write '{}'", path.display()))?;
    }
    set_permissions(tmp.as_file(), path);
    tmp.as_file()
        .sync_all()
        .with_context(|| format!("cannot write '{}'", path.display()))?;
    tmp.persist(path)
        .map_err(|e| e.error)
        .with_context(|| format!("cannot write '{}'", path.display()))?;
    Ok(())
}

/// Give the new file the mode of the file it replaces, or `rw-r--r--` (a temporary file is
/// created private to its owner). Failure here is harmless and ignored.
fn set_permissions(file: &fs::File, target: &Path) {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = fs::metadata(target)
            .map(|m| m.permissions().mode())
            .unwrap_or(0o644);
        let _ = file.set_permissions(fs::Permissions::from_mode(mode));
    }
    #[cfg(not(unix))]
    let _ = (file, target);
}

/// Write `bytes` to `path` atomically.
///
/// # Errors
/// As [`write_atomic`].
pub fn write_bytes(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic(path, |w| {
        w.write_all(bytes)
            .with_context(|| format!("cannot write '{}'", path.display()))
    })
}

/// Run `fill` on a buffered stdout.
///
/// # Errors
/// Whatever `fill` returns, and errors flushing stdout.
pub fn write_stdout(fill: impl FnOnce(&mut dyn Write) -> Result<()>) -> Result<()> {
    let stdout = io::stdout();
    let mut w = BufWriter::new(stdout.lock());
    fill(&mut w)?;
    w.flush().context("cannot write to stdout")?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_replaces_and_refuses_inputs() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.txt");
        write_bytes(&a, b"one").unwrap();
        write_bytes(&a, b"two").unwrap();
        assert_eq!(fs::read_to_string(&a).unwrap(), "two");
        // Only the target is left behind: no temporary files.
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
        let dotted = dir.path().join(".").join("a.txt");
        assert!(check_not_input(&dotted, std::slice::from_ref(&a)).is_err());
        assert!(check_not_input(&dir.path().join("b.txt"), &[a]).is_ok());
    }

    #[test]
    fn failed_fill_leaves_the_old_file() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.txt");
        write_bytes(&a, b"keep").unwrap();
        let r = write_atomic(&a, |w| {
            w.write_all(b"partial")?;
            Err(bad("stop"))
        });
        assert!(r.is_err());
        assert_eq!(fs::read_to_string(&a).unwrap(), "keep");
    }

    #[test]
    fn empty_and_binary_inputs_are_bad_input() {
        let dir = tempfile::tempdir().unwrap();
        let e = dir.path().join("e.csv");
        fs::write(&e, "  \n").unwrap();
        let err = read_text(&e, "sweep").unwrap_err();
        assert_eq!(
            crate::errors::classify(&err).0,
            crate::errors::EXIT_BAD_INPUT
        );
        let b = dir.path().join("b.csv");
        fs::write(&b, [0x89, b'P', b'N', b'G', 0, 1, 2]).unwrap();
        let err = read_text(&b, "sweep").unwrap_err();
        assert_eq!(
            crate::errors::classify(&err).0,
            crate::errors::EXIT_BAD_INPUT
        );
        let err = read_text(&dir.path().join("missing.csv"), "sweep").unwrap_err();
        assert_eq!(crate::errors::classify(&err).0, crate::errors::EXIT_FAILURE);
    }
}

//! Writing files so that no reader ever sees half of one.
//!
//! Every file genloom writes goes first to a temporary name in the same folder, is flushed to
//! disk, and is then renamed over the target: a rename within one file system is atomic, so an
//! interrupted or failed write leaves either the old file or none, never a partial one.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

static COUNTER: AtomicU64 = AtomicU64::new(0);

fn temp_name(path: &Path) -> PathBuf {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    path.with_file_name(format!(".{name}.{}-{n}.partial", std::process::id()))
}

/// Writes `bytes` to `path` through a temporary file and a rename.
///
/// # Errors
/// [`Error::Io`] naming the file when the folder is missing or not writable.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic_with(path, |w| w.write_all(bytes).map_err(|e| Error::io("write", path, e)))
}

/// Writes to `path` through a temporary file: `fill` writes the content, and only when it
/// succeeds is the file renamed into place. When `fill` fails, the temporary file is removed
/// and the target is left as it was.
///
/// # Errors
/// The error of `fill`, or [`Error::Io`] for the file operations.
pub fn write_atomic_with(
    path: &Path,
    fill: impl FnOnce(&mut std::io::BufWriter<std::fs::File>) -> Result<()>,
) -> Result<()> {
    let tmp = temp_name(path);
    let file = std::fs::File::create(&tmp).map_err(|e| Error::io("create", &tmp, e))?;
    let mut w = std::io::BufWriter::new(file);
    let result = fill(&mut w).and_then(|()| {
        let file = w.into_inner().map_err(|e| Error::io("write", path, e.into_error()))?;
        file.sync_all().map_err(|e| Error::io("flush", path, e))
    });
    match result {
        Ok(()) => std::fs::rename(&tmp, path).map_err(|e| {
            let _ = std::fs::remove_file(&tmp);
            Error::io("rename into", path, e)
        }),
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(e)
        }
    }
}

/// Writes several files so that a failure leaves none of them changed: every file is first
/// written and flushed under a temporary name, and only when all of them are on disk are they
/// renamed into place (an export and its report, for example).
///
/// # Errors
/// [`Error::Io`] naming the file that could not be written; every temporary file is removed
/// and every target is left as it was.
pub fn write_all_atomic(files: &[(&Path, &[u8])]) -> Result<()> {
    let mut staged: Vec<(PathBuf, &Path)> = Vec::with_capacity(files.len());
    let remove_all = |staged: &[(PathBuf, &Path)]| {
        for (tmp, _) in staged {
            let _ = std::fs::remove_file(tmp);
        }
    };
    // A rename cannot replace a folder: refuse before anything is written, so that the renames
    // below do not stop half-way.
    if let Some((path, _)) = files.iter().find(|(p, _)| p.is_dir()) {
        return Err(Error::io(
            "write",
            path,
            std::io::Error::new(std::io::ErrorKind::IsADirectory, "it is a folder, expected a file name"),
        ));
    }
    for (path, bytes) in files {
        let tmp = temp_name(path);
        let written =
            std::fs::File::create(&tmp).map_err(|e| Error::io("create", &tmp, e)).and_then(|mut f| {
                staged.push((tmp.clone(), path));
                f.write_all(bytes).map_err(|e| Error::io("write", path, e))?;
                f.sync_all().map_err(|e| Error::io("flush", path, e))
            });
        if let Err(e) = written {
            remove_all(&staged);
            return Err(e);
        }
    }
    for (i, (tmp, path)) in staged.iter().enumerate() {
        if let Err(e) = std::fs::rename(tmp, path) {
            remove_all(&staged[i..]);
            return Err(Error::io("rename into", path, e));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn failed_fill_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.bin");
        let err = write_atomic_with(&target, |w| {
            w.write_all(b"half").unwrap();
            Err(Error::invalid("test", "stop", "nothing"))
        });
        assert!(err.is_err());
        assert!(!target.exists());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0, "temporary file left behind");
        write_atomic(&target, b"whole").unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"whole");
    }

    #[test]
    fn missing_folder_is_named() {
        let e = write_atomic(Path::new("no/such/folder/x.png"), b"x").unwrap_err();
        assert!(e.to_string().contains("no/such/folder"), "{e}");
    }

    #[test]
    fn a_failed_second_file_leaves_the_first_untouched() {
        let dir = tempfile::tempdir().unwrap();
        let first = dir.path().join("export.onnx");
        std::fs::write(&first, b"old export").unwrap();
        // The second target's folder does not exist: its write fails after the first is staged.
        let second = dir.path().join("missing/report.json");
        let e = write_all_atomic(&[(&first, b"new export"), (&second, b"{}")]).unwrap_err();
        assert!(e.to_string().contains("missing"), "{e}");
        assert_eq!(std::fs::read(&first).unwrap(), b"old export");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1, "temporary file left behind");
        let second = dir.path().join("report.json");
        write_all_atomic(&[(&first, b"new export"), (&second, b"{}")]).unwrap();
        assert_eq!(std::fs::read(&first).unwrap(), b"new export");
        assert_eq!(std::fs::read(&second).unwrap(), b"{}");
    }
}

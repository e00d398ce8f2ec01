//! Writing output files so that nothing is lost: every file is written to a temporary file
//! in its own folder, flushed to disk and renamed into place, so an existing file stays
//! intact until a complete new one replaces it; and every output path is checked before
//! any solving starts.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

use crate::error::{Error, Result};

/// The folder a file path lives in (`.` for a bare file name).
fn folder_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// A fresh name for a temporary file beside `path` (hidden, with the process id and a
/// counter, so concurrent writers never share one).
fn temp_beside(path: &Path, what: &str) -> PathBuf {
    static NEXT: AtomicUsize = AtomicUsize::new(0);
    let n = NEXT.fetch_add(1, Ordering::Relaxed);
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    folder_of(path).join(format!(".{name}.{what}-{}-{n}", std::process::id()))
}

/// Whether `a` and `b` name the same existing file (same device and inode on Unix, so
/// hard links and symbolic links are seen through; canonical paths elsewhere).
fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(ma), Ok(mb)) = (fs::metadata(a), fs::metadata(b)) {
            return ma.dev() == mb.dev() && ma.ino() == mb.ino();
        }
    }
    match (fs::canonicalize(a), fs::canonicalize(b)) {
        (Ok(ca), Ok(cb)) => ca == cb,
        _ => false,
    }
}

/// Checks, before any work, that `path` can receive the output of `flag`: it is not a
/// directory, its folder exists and accepts a new file (probed by creating and removing
/// one), and it is none of `inputs`. Errors are usage errors (exit 2) naming the flag and
/// the path. O(number of inputs) file-system calls.
pub fn check_output(flag: &str, path: &Path, inputs: &[&Path]) -> Result<()> {
    let refuse = |why: String| Err(Error::Usage(format!("{flag} {}: {why}", path.display())));
    if path.is_dir() {
        return refuse("is a directory; name a file".into());
    }
    if path.file_name().is_none() {
        return refuse("names no file".into());
    }
    let folder = folder_of(path);
    if !folder.is_dir() {
        return refuse(format!("folder {} does not exist", folder.display()));
    }
    if let Some(input) = inputs.iter().find(|i| same_file(path, i)) {
        return refuse(format!(
            "is the input file {}; it would be overwritten",
            input.display()
        ));
    }
    let probe = temp_beside(path, "probe");
    match OpenOptions::new().write(true).create_new(true).open(&probe) {
        Ok(_) => {
            let _ = fs::remove_file(&probe);
            Ok(())
        }
        Err(e) => refuse(format!(
            "cannot create a file in folder {}: {e}",
            folder.display()
        )),
    }
}

/// Writes a file atomically: `write` fills a temporary file beside `path`, which is then
/// flushed, synced to disk and renamed over `path` (and the folder synced). On any failure
/// the temporary file is removed and `path` keeps its old content. Invariant: at every
/// moment `path` holds either its old content or the complete new one.
pub fn write_atomic(
    path: &Path,
    write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
) -> Result<()> {
    let tmp = temp_beside(path, "tmp");
    let result = (|| -> io::Result<()> {
        let file = OpenOptions::new().write(true).create_new(true).open(&tmp)?;
        let mut w = BufWriter::new(file);
        write(&mut w)?;
        let file = w.into_inner().map_err(io::IntoInnerError::into_error)?;
        file.sync_all()?;
        fs::rename(&tmp, path)?;
        // Make the rename itself durable; not every platform can open a folder.
        if let Ok(dir) = File::open(folder_of(path)) {
            let _ = dir.sync_all();
        }
        Ok(())
    })();
    result.map_err(|source| {
        let _ = fs::remove_file(&tmp);
        Error::Io {
            path: path.to_path_buf(),
            source,
        }
    })
}

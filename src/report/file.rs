//! Writing output files so that nothing is lost: every file is written to a temporary file
//! in its own folder, flushed to disk and renamed into place, so an existing file stays
//! intact until a complete new one replaces it; and every output path is checked before
//! any solving starts.
//!
//! What is already at an output path is never replaced by something of another kind:
//! - a symbolic link is followed: its target (a regular file) is replaced atomically and the
//!   link stays a link; a link to nothing is refused;
//! - a character device (`/dev/null`, a terminal) or a FIFO is written through in place;
//! - a directory, a block device or a socket is refused with a usage error.
//!
//! Temporary files are removed on every way out: a failed write, an interrupt seen before
//! the rename ([`crate::audit::interrupted`]), a panic (a guard removes them on drop), and a
//! second signal, which exits at once after [`remove_temporaries`].

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Component, Path, PathBuf};
use std::sync::Mutex;
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

/// The temporary files that exist right now. A file is created and renamed away while this
/// lock is held, so [`remove_temporaries`] (which holds it until the process exits) never
/// misses one that is about to appear.
static TEMPORARIES: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

fn temporaries() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    TEMPORARIES.lock().unwrap_or_else(|p| p.into_inner())
}

/// Removes every temporary file this process has open and keeps the registry locked, so
/// no new one is created; for a signal handler that exits right after. O(temporaries).
pub fn remove_temporaries() {
    let list = temporaries();
    for p in list.iter() {
        let _ = fs::remove_file(p);
    }
    // The caller exits: the lock is never released, so no other thread creates a file.
    std::mem::forget(list);
}

/// A temporary file that is removed when dropped unless it was renamed into place.
struct Temporary {
    path: PathBuf,
    live: bool,
}

impl Temporary {
    /// Creates `path` exclusively (never following a link, never reusing a file) and
    /// registers it for [`remove_temporaries`].
    fn create(path: PathBuf) -> io::Result<(Temporary, File)> {
        let mut list = temporaries();
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)?;
        list.push(path.clone());
        Ok((Temporary { path, live: true }, file))
    }

    /// Renames the file over `to`; afterwards nothing is removed on drop.
    fn rename_to(mut self, to: &Path) -> io::Result<()> {
        let mut list = temporaries();
        fs::rename(&self.path, to)?;
        list.retain(|p| p != &self.path);
        self.live = false;
        Ok(())
    }
}

impl Drop for Temporary {
    fn drop(&mut self) {
        if self.live {
            let mut list = temporaries();
            let _ = fs::remove_file(&self.path);
            list.retain(|p| p != &self.path);
        }
    }
}

/// Where the bytes for an output path go.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Target {
    /// A regular file, or nothing yet, at this path (symbolic links resolved): replaced
    /// atomically by a complete new file.
    Replace(PathBuf),
    /// A character device or a FIFO: written through in place, never replaced.
    Through(PathBuf),
}

/// What the file at `path` is, in words, for messages.
fn kind_of(m: &fs::Metadata) -> &'static str {
    let t = m.file_type();
    if t.is_dir() {
        return "a directory";
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_block_device() {
            return "a block device";
        }
        if t.is_socket() {
            return "a socket";
        }
        if t.is_char_device() {
            return "a character device";
        }
        if t.is_fifo() {
            return "a FIFO";
        }
    }
    if t.is_file() {
        "a regular file"
    } else {
        "neither a file nor a device"
    }
}

/// Whether `m` is a character device or a FIFO (written through, never replaced).
fn writes_through(m: &fs::Metadata) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        let t = m.file_type();
        t.is_char_device() || t.is_fifo()
    }
    #[cfg(not(unix))]
    {
        let _ = m;
        false
    }
}

/// Where `path`'s output goes, or why it cannot go there (the reason, without the path).
/// One `lstat`, plus a `realpath` and a `stat` for a symbolic link.
fn target_of(path: &Path) -> std::result::Result<Target, String> {
    let meta = match fs::symlink_metadata(path) {
        Ok(m) => m,
        Err(e) if e.kind() == io::ErrorKind::NotFound => {
            return Ok(Target::Replace(path.to_path_buf()));
        }
        Err(e) => return Err(format!("cannot be examined: {e}")),
    };
    let (resolved, meta) = if meta.file_type().is_symlink() {
        match fs::canonicalize(path) {
            Ok(t) => {
                let m = fs::metadata(&t).map_err(|e| format!("cannot be examined: {e}"))?;
                (t, m)
            }
            Err(e) if e.kind() == io::ErrorKind::NotFound => {
                return Err(
                    "is a symbolic link to a file that does not exist; name the target \
                     itself or create it first"
                        .into(),
                );
            }
            Err(e) => return Err(format!("is a symbolic link that cannot be followed: {e}")),
        }
    } else {
        (path.to_path_buf(), meta)
    };
    if meta.is_file() {
        Ok(Target::Replace(resolved))
    } else if writes_through(&meta) {
        Ok(Target::Through(resolved))
    } else if meta.is_dir() {
        Err("is a directory; name a file".into())
    } else {
        Err(format!(
            "is {}; name a regular file, a character device or a FIFO",
            kind_of(&meta)
        ))
    }
}

/// Whether an output `path` is written through in place (a character device or a FIFO,
/// directly or through symbolic links) rather than replaced by a new file. Such an output
/// gets no journal. Missing and unreadable paths count as files.
pub fn is_written_through(path: &Path) -> bool {
    matches!(target_of(path), Ok(Target::Through(_)))
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

/// `path` made absolute and with `.` and `..` folded, without touching the file system
/// (for folders that do not exist yet).
fn lexical(path: &Path) -> PathBuf {
    let abs = if path.is_absolute() {
        path.to_path_buf()
    } else {
        std::env::current_dir()
            .unwrap_or_else(|_| PathBuf::from("/"))
            .join(path)
    };
    let mut out = PathBuf::new();
    for c in abs.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

/// The name an output path will be written under: its folder canonicalised (or folded
/// lexically when it does not exist yet) joined with its file name; a symbolic link that
/// resolves is replaced by its target. Two outputs with the same key write one file.
fn output_key(path: &Path) -> PathBuf {
    if let Ok(Target::Replace(t) | Target::Through(t)) = target_of(path)
        && t != path
    {
        return t;
    }
    let folder = folder_of(path);
    let folder = fs::canonicalize(&folder).unwrap_or_else(|_| lexical(&folder));
    match path.file_name() {
        Some(name) => folder.join(name),
        None => lexical(path),
    }
}

/// Refuses (usage error, exit 2) two outputs of one command that would land in the same
/// file, naming both flags: each `(flag, path)` is compared by the name it will be written
/// under (its folder canonicalised, or folded lexically when new, plus its file name; a
/// symbolic link by its target) and, for files that exist, by device and inode. Call it before any work. O(outputs²).
pub fn check_distinct(outputs: &[(String, PathBuf)]) -> Result<()> {
    let keys: Vec<PathBuf> = outputs.iter().map(|(_, p)| output_key(p)).collect();
    for (i, (flag_i, path_i)) in outputs.iter().enumerate() {
        for (j, (flag_j, path_j)) in outputs.iter().enumerate().skip(i + 1) {
            if keys[i] == keys[j] || same_file(path_i, path_j) {
                return Err(Error::Usage(format!(
                    "{flag_i} {} and {flag_j} {} name the same file; each output needs a \
                     file of its own",
                    path_i.display(),
                    path_j.display()
                )));
            }
        }
    }
    Ok(())
}

/// Checks, before any work, that `path` can receive the output of `flag`: it is not a
/// directory, a block device, a socket or a dangling symbolic link; it is none of `inputs`;
/// a file to be replaced has a folder that accepts a new file (probed by creating and
/// removing one); a character device opens for writing (a FIFO is not opened: that would
/// wait for a reader). Errors are usage errors (exit 2) naming the flag and the path.
/// O(number of inputs) file-system calls.
pub fn check_output(flag: &str, path: &Path, inputs: &[&Path]) -> Result<()> {
    let refuse = |why: String| Err(Error::Usage(format!("{flag} {}: {why}", path.display())));
    if path.file_name().is_none() {
        return refuse("names no file".into());
    }
    let target = match target_of(path) {
        Ok(t) => t,
        Err(why) => return refuse(why),
    };
    if let Some(input) = inputs.iter().find(|i| same_file(path, i)) {
        return refuse(format!(
            "is the input file {}; it would be overwritten",
            input.display()
        ));
    }
    match target {
        Target::Through(t) => {
            let is_fifo = fs::metadata(&t).is_ok_and(|m| {
                #[cfg(unix)]
                {
                    use std::os::unix::fs::FileTypeExt;
                    m.file_type().is_fifo()
                }
                #[cfg(not(unix))]
                {
                    let _ = m;
                    false
                }
            });
            if is_fifo {
                return Ok(());
            }
            match OpenOptions::new().write(true).open(&t) {
                Ok(_) => Ok(()),
                Err(e) => refuse(format!("cannot be opened for writing: {e}")),
            }
        }
        Target::Replace(t) => {
            let folder = folder_of(&t);
            if !folder.is_dir() {
                return refuse(format!("folder {} does not exist", folder.display()));
            }
            match Temporary::create(temp_beside(&t, "probe")) {
                Ok(_) => Ok(()),
                Err(e) => refuse(format!(
                    "cannot create a file in folder {}: {e}",
                    folder.display()
                )),
            }
        }
    }
}

/// Writes an output file. A regular file (or a new one; through symbolic links, whose
/// target is what gets replaced) is written atomically: `write` fills a temporary file
/// beside it, which is then flushed, synced to disk and renamed over it (and the folder
/// synced); the new file keeps the old one's permissions. A character device or a FIFO is
/// opened and written in place, never replaced. A temporary file is removed on any failure,
/// and when an interrupt ([`crate::audit::interrupted`]) was asked for before the rename,
/// which then returns [`Error::Interrupted`] and leaves the old file as it was. Invariant:
/// at every moment a replaced file holds either its old content or the complete new one.
pub fn write_atomic(
    path: &Path,
    write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
) -> Result<()> {
    let io_error = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let target =
        target_of(path).map_err(|why| Error::Usage(format!("{}: {why}", path.display())))?;
    let target = match target {
        Target::Through(t) => {
            let file = OpenOptions::new().write(true).open(&t).map_err(io_error)?;
            let mut w = BufWriter::new(file);
            write(&mut w).map_err(io_error)?;
            return w.flush().map_err(io_error);
        }
        Target::Replace(t) => t,
    };
    let (tmp, file) = Temporary::create(temp_beside(&target, "tmp")).map_err(io_error)?;
    let mut w = BufWriter::new(file);
    write(&mut w).map_err(io_error)?;
    let file = w
        .into_inner()
        .map_err(io::IntoInnerError::into_error)
        .map_err(io_error)?;
    if let Ok(old) = fs::metadata(&target) {
        // Best effort: a file we cannot chmod keeps the default mode.
        let _ = file.set_permissions(old.permissions());
    }
    file.sync_all().map_err(io_error)?;
    drop(file);
    if crate::audit::interrupted() {
        return Err(Error::Interrupted(format!(
            "{} was not written (the old file, if any, is unchanged)",
            path.display()
        )));
    }
    tmp.rename_to(&target).map_err(io_error)?;
    // Make the rename itself durable; not every platform can open a folder.
    if let Ok(dir) = File::open(folder_of(&target)) {
        let _ = dir.sync_all();
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Source: POSIX path resolution (`.` is the folder itself, `..` its parent), worked by
    /// hand for the paths below.
    #[test]
    fn lexical_folds_dots() {
        assert_eq!(lexical(Path::new("/a/./b/../c")), PathBuf::from("/a/c"));
        assert_eq!(lexical(Path::new("/a/b/..")), PathBuf::from("/a"));
    }

    /// Source: the guard's contract (a temporary not renamed is gone after drop, and the
    /// registry no longer lists it), checked on the real file system.
    #[test]
    fn a_dropped_temporary_is_removed() {
        let dir = std::env::temp_dir().join(format!("redoubt-file-{}", std::process::id()));
        fs::create_dir_all(&dir).unwrap();
        let p = dir.join(".x.tmp");
        let (t, mut f) = Temporary::create(p.clone()).unwrap();
        f.write_all(b"partial").unwrap();
        assert!(p.exists() && temporaries().contains(&p));
        drop(t);
        assert!(!p.exists() && !temporaries().contains(&p));
        let _ = fs::remove_dir_all(&dir);
    }
}

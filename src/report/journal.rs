//! The resume journal: a JSON-lines file beside the `--json` output (`FILE.journal`).
//!
//! Line 1 is a header `{"redoubt_journal": 1, "fingerprint": "...", "outages": N}`; every
//! further line is `{"outage": k, "evaluation": {...}}`, one finished outage, written with
//! a single `write` call as soon as it is solved. f64 values are written and read with
//! serde_json's `float_roundtrip`, so a restored evaluation is bit-identical to the solved
//! one. A kill at any moment leaves at most a torn last line, which reading ignores.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::solve::Evaluation;

/// Version of the journal layout; a journal of another version is not resumed.
pub const VERSION: u32 = 1;

#[derive(Serialize, Deserialize)]
struct Header {
    redoubt_journal: u32,
    fingerprint: String,
    outages: usize,
}

#[derive(Serialize)]
struct LineOut<'a> {
    outage: usize,
    evaluation: &'a Evaluation,
}

#[derive(Deserialize)]
struct LineIn {
    outage: usize,
    evaluation: Evaluation,
}

/// The journal file beside an output file: `FILE.journal`.
pub fn path_for(output: &Path) -> PathBuf {
    let mut s = output.as_os_str().to_os_string();
    s.push(".journal");
    PathBuf::from(s)
}

/// A fingerprint of everything that decides a run's results: 64-bit FNV-1a over the
/// parts, each preceded by its length (so part boundaries count), as 16 hex digits. Not a
/// cryptographic hash: it guards against resuming with another file or other options by
/// mistake. O(total bytes).
pub fn fingerprint(parts: &[&[u8]]) -> String {
    const OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
    const PRIME: u64 = 0x0000_0100_0000_01b3;
    let mut h = OFFSET;
    let mut eat = |bytes: &[u8]| {
        for &b in bytes {
            h ^= u64::from(b);
            h = h.wrapping_mul(PRIME);
        }
    };
    for p in parts {
        eat(&(p.len() as u64).to_le_bytes());
        eat(p);
    }
    format!("{h:016x}")
}

/// What opening a journal found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Opened {
    /// A new journal (no `--resume`).
    Fresh,
    /// `--resume` but no journal existed: starting from the beginning.
    NothingToResume,
    /// `--resume` restored this many outages.
    Resumed(usize),
}

/// An open journal; [`Journal::record`] may be called from many threads.
pub struct Journal {
    path: PathBuf,
    file: Mutex<File>,
    outages: usize,
    /// Outages the journal holds (restored plus recorded).
    saved: AtomicUsize,
    /// The first failed write; recording stops after it (the run goes on).
    failure: Mutex<Option<String>>,
}

fn io_err(path: &Path) -> impl FnOnce(io::Error) -> Error + '_ {
    move |source| Error::Io {
        path: path.to_path_buf(),
        source,
    }
}

impl Journal {
    /// Opens the journal at `path` for a run of `outages` outages with `fingerprint`.
    /// Without `resume` it starts a new journal (replacing any old one). With `resume` it
    /// reads the old one: a torn last line is cut off, a header with another fingerprint
    /// or outage count is refused (usage error naming the file), and the evaluations found
    /// are returned (`[k]` for outage `k`). O(journal size).
    pub fn open(
        path: &Path,
        fingerprint: &str,
        outages: usize,
        resume: bool,
    ) -> Result<(Journal, Vec<Option<Evaluation>>, Opened)> {
        let mut restored = vec![None; outages];
        let existing = if resume {
            match fs::read(path) {
                Ok(b) => Some(b),
                Err(e) if e.kind() == io::ErrorKind::NotFound => None,
                Err(e) => return Err(io_err(path)(e)),
            }
        } else {
            None
        };
        // Only whole lines count: a line without its newline was torn by a kill.
        let whole = existing
            .as_deref()
            .map(|b| b.iter().rposition(|&c| c == b'\n').map_or(0, |i| i + 1));
        let opened = match (&existing, whole) {
            (Some(bytes), Some(len)) if len > 0 => {
                let text = std::str::from_utf8(&bytes[..len]).map_err(|_| damaged(path, 1))?;
                let mut lines = text.lines();
                let header: Header = lines
                    .next()
                    .and_then(|l| serde_json::from_str(l).ok())
                    .ok_or_else(|| damaged(path, 1))?;
                if header.redoubt_journal != VERSION
                    || header.fingerprint != fingerprint
                    || header.outages != outages
                {
                    return Err(Error::Usage(format!(
                        "--resume: {} was written for another network file or other options \
                         (fingerprint {}, this run {fingerprint}); rerun without --resume to \
                         start again",
                        path.display(),
                        header.fingerprint
                    )));
                }
                let mut count = 0;
                for (n, line) in lines.enumerate() {
                    let rec: LineIn =
                        serde_json::from_str(line).map_err(|_| damaged(path, n + 2))?;
                    let slot = restored
                        .get_mut(rec.outage)
                        .ok_or_else(|| damaged(path, n + 2))?;
                    if slot.is_none() {
                        count += 1;
                    }
                    *slot = Some(rec.evaluation);
                }
                let file = OpenOptions::new()
                    .write(true)
                    .open(path)
                    .map_err(io_err(path))?;
                file.set_len(len as u64).map_err(io_err(path))?;
                let journal = Journal::at(path, file, len as u64, outages, count)?;
                return Ok((journal, restored, Opened::Resumed(count)));
            }
            _ if resume => Opened::NothingToResume,
            _ => Opened::Fresh,
        };
        let mut file = File::create(path).map_err(io_err(path))?;
        let header = Header {
            redoubt_journal: VERSION,
            fingerprint: fingerprint.to_string(),
            outages,
        };
        let mut line = serde_json::to_string(&header).expect("header serialises");
        line.push('\n');
        file.write_all(line.as_bytes()).map_err(io_err(path))?;
        let journal = Journal::at(path, file, line.len() as u64, outages, 0)?;
        Ok((journal, restored, opened))
    }

    fn at(path: &Path, mut file: File, end: u64, outages: usize, saved: usize) -> Result<Journal> {
        use std::io::Seek;
        file.seek(io::SeekFrom::Start(end)).map_err(io_err(path))?;
        Ok(Journal {
            path: path.to_path_buf(),
            file: Mutex::new(file),
            outages,
            saved: AtomicUsize::new(saved),
            failure: Mutex::new(None),
        })
    }

    /// Number of outages of the run.
    pub fn outages(&self) -> usize {
        self.outages
    }

    /// Outages the journal holds (restored plus recorded since); at most [`Self::outages`]
    /// for a run that records each outage once.
    pub fn saved(&self) -> usize {
        self.saved.load(Ordering::SeqCst)
    }

    /// The journal's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Why journaling stopped, if a write failed (disk full, `ulimit -f`).
    pub fn failure(&self) -> Option<String> {
        self.failure
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .clone()
    }

    /// Appends outage `k`'s evaluation as one whole line (one `write` under a lock). The
    /// journal is insurance, not a result: a failed write stops journaling (see
    /// [`Self::failure`]) and never the run.
    pub fn record(&self, k: usize, e: &Evaluation) {
        let Ok(mut line) = serde_json::to_string(&LineOut {
            outage: k,
            evaluation: e,
        }) else {
            return;
        };
        // A value JSON cannot carry exactly (not finite) is not journaled: a resume solves
        // that outage again rather than restore something different.
        let exact = serde_json::from_str::<LineIn>(&line).is_ok_and(|r| r.evaluation == *e);
        if !exact {
            return;
        }
        line.push('\n');
        let mut file = self.file.lock().unwrap_or_else(|p| p.into_inner());
        let mut failure = self.failure.lock().unwrap_or_else(|p| p.into_inner());
        if failure.is_some() {
            return;
        }
        match file.write_all(line.as_bytes()) {
            Ok(()) => {
                self.saved.fetch_add(1, Ordering::SeqCst);
            }
            Err(err) => *failure = Some(format!("{}: {err}", self.path.display())),
        }
    }

    /// Deletes the journal once the final files are written.
    pub fn remove(self) -> Result<()> {
        drop(self.file);
        fs::remove_file(&self.path).map_err(io_err(&self.path))
    }
}

fn damaged(path: &Path, line: usize) -> Error {
    Error::Usage(format!(
        "--resume: {} is damaged at line {line}; rerun without --resume to start again",
        path.display()
    ))
}

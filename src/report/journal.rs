//! The resume journal: a JSON-lines file beside the `--json` output (`FILE.journal`).
//!
//! Line 1 is a header `{"redoubt_journal": 1, "fingerprint": "...", "outages": N}`; every
//! further line is `{"outage": k, "evaluation": {...}}`, one finished outage, written with
//! a single `write` call as soon as it is solved. f64 values are written and read with
//! serde_json's `float_roundtrip`, so a restored evaluation is bit-identical to the solved
//! one. A kill at any moment leaves at most a torn last line, which reading ignores.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufRead, BufReader, Read, Seek, Write};
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

/// An open journal; [`Journal::record`] and [`Journal::line`] may be called from many
/// threads. It remembers where each outage's line starts, so a report can read one
/// evaluation back ([`JournalReader::read`]) instead of keeping every evaluation in memory.
pub struct Journal {
    path: PathBuf,
    /// The file and the offset of its end (where the next line goes).
    file: Mutex<(File, u64)>,
    /// Per outage: the byte offset of its last whole line, if journaled.
    offsets: Mutex<Vec<Option<u64>>>,
    /// A reading handle, opened on the first [`Journal::line`].
    reader: Mutex<Option<BufReader<File>>>,
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

/// The refusal for a journal path that already holds something and no `--resume`.
fn already_there(path: &Path) -> Error {
    Error::Usage(format!(
        "{} already exists (the journal of an interrupted run?); add --resume to continue \
         that run, or remove the file to start again",
        path.display()
    ))
}

/// Opens `path` for reading without following a symbolic link (`O_NOFOLLOW` on Unix).
fn open_nofollow(path: &Path, write: bool) -> io::Result<File> {
    let mut o = OpenOptions::new();
    o.read(true).write(write);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        o.custom_flags(libc::O_NOFOLLOW);
    }
    o.open(path)
}

/// Opens an existing journal for `--resume`, read and write, refusing (usage error) a
/// symbolic link or anything but a regular file; a missing file is an I/O error of kind
/// `NotFound`.
fn open_existing(path: &Path) -> Result<File> {
    let not_regular = |what: &str| {
        Error::Usage(format!(
            "--resume: {} is {what}, not a journal; a journal is never followed or \
             replaced: remove it (or name another --json file)",
            path.display()
        ))
    };
    if fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink()) {
        return Err(not_regular("a symbolic link"));
    }
    let file = open_nofollow(path, true).map_err(|e| {
        #[cfg(unix)]
        if e.raw_os_error() == Some(libc::ELOOP) {
            return not_regular("a symbolic link");
        }
        io_err(path)(e)
    })?;
    if !file.metadata().map_err(io_err(path))?.is_file() {
        return Err(not_regular("not a regular file"));
    }
    Ok(file)
}

/// Checks, before any work, that a journal can be opened at `path` as [`Journal::open`]
/// will: nothing there without `resume`; with `resume`, nothing or a regular file (not a
/// symbolic link). Usage errors name the path. One `lstat`.
pub fn check_path(path: &Path, resume: bool) -> Result<()> {
    match fs::symlink_metadata(path) {
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(io_err(path)(e)),
        Ok(_) if !resume => Err(already_there(path)),
        Ok(m) if m.file_type().is_symlink() => Err(Error::Usage(format!(
            "--resume: {} is a symbolic link, not a journal; a journal is never followed or \
             replaced: remove it (or name another --json file)",
            path.display()
        ))),
        Ok(m) if !m.is_file() => Err(Error::Usage(format!(
            "--resume: {} is not a regular file, not a journal; remove it (or name another \
             --json file)",
            path.display()
        ))),
        Ok(_) => Ok(()),
    }
}

impl Journal {
    /// Opens the journal at `path` for a run of `outages` outages with `fingerprint`.
    /// Without `resume` it creates a new journal exclusively (`O_CREAT|O_EXCL`: never
    /// through a symbolic link, never over an existing file, which is refused with a usage
    /// error saying to add `--resume` or remove it). With `resume` it opens the old one
    /// without following a symbolic link and refuses anything but a regular file; a torn
    /// last line is cut off, a header with another fingerprint or outage count is refused
    /// (usage error naming the file), and the evaluations found are returned (`[k]` for
    /// outage `k`); when there is none, a new journal is created as without `resume`.
    /// O(journal size).
    pub fn open(
        path: &Path,
        fingerprint: &str,
        outages: usize,
        resume: bool,
    ) -> Result<(Journal, Vec<Option<Evaluation>>, Opened)> {
        let mut restored = vec![None; outages];
        let existing = if resume {
            match open_existing(path) {
                Ok(mut file) => {
                    let mut bytes = Vec::new();
                    file.read_to_end(&mut bytes).map_err(io_err(path))?;
                    Some((file, bytes))
                }
                Err(Error::Io { source, .. }) if source.kind() == io::ErrorKind::NotFound => None,
                Err(e) => return Err(e),
            }
        } else {
            None
        };
        // Only whole lines count: a line without its newline was torn by a kill.
        let whole = existing
            .as_ref()
            .map(|(_, b)| b.iter().rposition(|&c| c == b'\n').map_or(0, |i| i + 1));
        let opened = match (existing, whole) {
            (Some((file, bytes)), Some(len)) if len > 0 => {
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
                let mut offsets = vec![None; outages];
                let mut at = text.find('\n').map_or(len, |i| i + 1) as u64;
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
                    offsets[rec.outage] = Some(at);
                    at += line.len() as u64 + 1;
                }
                file.set_len(len as u64).map_err(io_err(path))?;
                let journal = Journal::at(path, file, len as u64, offsets, count)?;
                return Ok((journal, restored, Opened::Resumed(count)));
            }
            (Some((file, _)), _) => {
                // Empty or torn before its header ended: start it again in place.
                file.set_len(0).map_err(io_err(path))?;
                let journal = Journal::start(path, file, fingerprint, outages)?;
                return Ok((journal, restored, Opened::NothingToResume));
            }
            _ if resume => Opened::NothingToResume,
            _ => Opened::Fresh,
        };
        let file = OpenOptions::new()
            .read(true)
            .write(true)
            .create_new(true)
            .open(path)
            .map_err(|e| {
                if e.kind() == io::ErrorKind::AlreadyExists {
                    already_there(path)
                } else {
                    io_err(path)(e)
                }
            })?;
        let journal = Journal::start(path, file, fingerprint, outages)?;
        Ok((journal, restored, opened))
    }

    /// Writes the header line into the empty `file` and opens the journal after it.
    fn start(path: &Path, mut file: File, fingerprint: &str, outages: usize) -> Result<Journal> {
        let header = Header {
            redoubt_journal: VERSION,
            fingerprint: fingerprint.to_string(),
            outages,
        };
        let mut line = serde_json::to_string(&header).expect("header serialises");
        line.push('\n');
        file.seek(io::SeekFrom::Start(0)).map_err(io_err(path))?;
        file.write_all(line.as_bytes()).map_err(io_err(path))?;
        Journal::at(path, file, line.len() as u64, vec![None; outages], 0)
    }

    fn at(
        path: &Path,
        mut file: File,
        end: u64,
        offsets: Vec<Option<u64>>,
        saved: usize,
    ) -> Result<Journal> {
        file.seek(io::SeekFrom::Start(end)).map_err(io_err(path))?;
        Ok(Journal {
            path: path.to_path_buf(),
            file: Mutex::new((file, end)),
            outages: offsets.len(),
            offsets: Mutex::new(offsets),
            reader: Mutex::new(None),
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

    /// Appends outage `k`'s evaluation as one whole line (one `write` under a lock) and
    /// returns whether it is journaled (so [`JournalReader::read`] gives it back bit for bit). The
    /// journal is insurance, not a result: a failed write stops journaling (see
    /// [`Self::failure`]) and never the run. O(size of the evaluation).
    pub fn record(&self, k: usize, e: &Evaluation) -> bool {
        // A value JSON cannot carry exactly (not finite) is not journaled: a resume solves
        // that outage again rather than restore something different.
        let Some(mut line) = to_line(k, e) else {
            return false;
        };
        line.push('\n');
        let mut file = self.file.lock().unwrap_or_else(|p| p.into_inner());
        let mut failure = self.failure.lock().unwrap_or_else(|p| p.into_inner());
        if failure.is_some() {
            return false;
        }
        let at = file.1;
        match file.0.write_all(line.as_bytes()) {
            Ok(()) => {
                file.1 += line.len() as u64;
                self.saved.fetch_add(1, Ordering::SeqCst);
                if let Some(slot) = self
                    .offsets
                    .lock()
                    .unwrap_or_else(|p| p.into_inner())
                    .get_mut(k)
                {
                    *slot = Some(at);
                }
                true
            }
            Err(err) => {
                *failure = Some(format!("{}: {err}", self.path.display()));
                false
            }
        }
    }

    /// Outage `k`'s journaled line, without its newline (`None` when not journaled).
    /// O(line length): one seek and one read.
    pub fn line(&self, k: usize) -> Result<Option<String>> {
        let Some(at) = self
            .offsets
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .get(k)
            .copied()
            .flatten()
        else {
            return Ok(None);
        };
        line_at(&self.reader, &self.path, at, true).map(Some)
    }

    /// A reader of the lines journaled so far, independent of the journal's lifetime (it
    /// keeps the file open, so it reads even after [`Self::remove`] on Unix). O(outages).
    pub fn reader(&self) -> Result<JournalReader> {
        Ok(JournalReader {
            path: self.path.clone(),
            offsets: self
                .offsets
                .lock()
                .unwrap_or_else(|p| p.into_inner())
                .clone(),
            reader: Mutex::new(Some(BufReader::new(
                open_nofollow(&self.path, false).map_err(io_err(&self.path))?,
            ))),
        })
    }

    /// Deletes the journal once the final files are written.
    pub fn remove(self) -> Result<()> {
        drop(self.file);
        fs::remove_file(&self.path).map_err(io_err(&self.path))
    }
}

/// Reads the line starting at byte `at` of `path` (without its newline) through the
/// shared handle `reader`, opened on first use (a `journal` without following a symbolic
/// link). O(line length).
fn line_at(
    reader: &Mutex<Option<BufReader<File>>>,
    path: &Path,
    at: u64,
    journal: bool,
) -> Result<String> {
    let mut reader = reader.lock().unwrap_or_else(|p| p.into_inner());
    if reader.is_none() {
        let file = if journal {
            open_nofollow(path, false)
        } else {
            File::open(path)
        };
        *reader = Some(BufReader::new(file.map_err(io_err(path))?));
    }
    let r = reader.as_mut().expect("opened above");
    r.seek(io::SeekFrom::Start(at)).map_err(io_err(path))?;
    let mut line = String::new();
    r.read_line(&mut line).map_err(io_err(path))?;
    if line.pop() != Some('\n') {
        return Err(changed(path));
    }
    Ok(line)
}

/// Reads journaled evaluations back ([`Journal::reader`]).
pub struct JournalReader {
    path: PathBuf,
    offsets: Vec<Option<u64>>,
    reader: Mutex<Option<BufReader<File>>>,
}

impl JournalReader {
    /// Outage `k`'s evaluation as journaled (bit-identical to the recorded one), `None`
    /// when it was not journaled. O(size of the evaluation).
    pub fn read(&self, k: usize) -> Result<Option<Evaluation>> {
        let Some(at) = self.offsets.get(k).copied().flatten() else {
            return Ok(None);
        };
        let line = line_at(&self.reader, &self.path, at, true)?;
        parse_line(&line, k)
            .map(Some)
            .ok_or_else(|| changed(&self.path))
    }
}

/// Parses one journal or part line of outage `k`.
fn parse_line(line: &str, k: usize) -> Option<Evaluation> {
    serde_json::from_str::<LineIn>(line)
        .ok()
        .filter(|r| r.outage == k)
        .map(|r| r.evaluation)
}

fn changed(path: &Path) -> Error {
    Error::Usage(format!(
        "{} changed while this run was reading it back; run again",
        path.display()
    ))
}

/// Version of the part-file layout.
pub const PART_VERSION: u32 = 1;

/// The first line of a part file (`audit --shard I/N`): everything `merge` needs to
/// rebuild the run's scenario list and to check that the parts belong together.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PartHeader {
    pub redoubt_part: u32,
    /// The run's fingerprint without the shard (equal in every part of one run).
    pub fingerprint: String,
    /// This part's shard, from 1.
    pub shard: usize,
    pub shards: usize,
    /// Distinct outages of the whole run.
    pub outages: usize,
    /// The network file's text.
    pub network: String,
    pub depth: usize,
    pub kinds: String,
    pub fail: Option<String>,
    pub engine: String,
}

/// Writes a part file: the header line, then `lines` (journal lines
/// `{"outage":k,"evaluation":…}`, one per outage of the shard), each ending in a newline.
/// O(total size).
pub fn write_part(
    w: &mut dyn Write,
    header: &PartHeader,
    lines: impl Iterator<Item = Result<String>>,
) -> Result<()> {
    let io = |source| Error::Io {
        path: PathBuf::from("<part>"),
        source,
    };
    let mut head = serde_json::to_string(header).expect("header serialises");
    head.push('\n');
    w.write_all(head.as_bytes()).map_err(io)?;
    for line in lines {
        let mut line = line?;
        line.push('\n');
        w.write_all(line.as_bytes()).map_err(io)?;
    }
    Ok(())
}

/// One evaluation as a journal/part line (without newline); `None` when JSON cannot carry
/// it exactly (a non-finite value).
pub fn to_line(k: usize, e: &Evaluation) -> Option<String> {
    let line = serde_json::to_string(&LineOut {
        outage: k,
        evaluation: e,
    })
    .ok()?;
    serde_json::from_str::<LineIn>(&line)
        .is_ok_and(|r| r.evaluation == *e)
        .then_some(line)
}

/// The part files of one sharded run, read for `merge`: headers checked, every outage's
/// line located so [`Parts::read`] can give its evaluation back.
pub struct Parts {
    pub header: PartHeader,
    paths: Vec<PathBuf>,
    /// Per outage: (part, byte offset of its line).
    offsets: Vec<(usize, u64)>,
    readers: Vec<Mutex<Option<BufReader<File>>>>,
}

impl Parts {
    /// Reads the parts' headers and lines and calls `each(k, evaluation)` once per outage
    /// (in file order). Refuses (usage error naming the file) parts of different runs, a
    /// shard given twice or missing, a damaged line, and an outage missing or present in
    /// two parts; a line longer than [`crate::model::input_limit`] is refused before it is
    /// read whole. O(total size); memory O(outages) beyond what `each` keeps.
    pub fn open(paths: &[PathBuf], mut each: impl FnMut(usize, Evaluation)) -> Result<Parts> {
        let mut header: Option<PartHeader> = None;
        let mut seen_shard: Vec<bool> = Vec::new();
        let mut offsets: Vec<Option<(usize, u64)>> = Vec::new();
        // One line is at most the input limit (a part's header carries the network file).
        let limit = crate::model::input_limit()?;
        let read_line = |r: &mut BufReader<File>, line: &mut String, path: &Path| {
            let got = r
                .by_ref()
                .take(limit + 1)
                .read_line(line)
                .map_err(io_err(path))?;
            if got as u64 > limit {
                return Err(crate::model::too_large(path, limit));
            }
            Ok(got)
        };
        for (p, path) in paths.iter().enumerate() {
            let bad = |why: String| Error::Usage(format!("merge: {}: {why}", path.display()));
            let mut r = BufReader::new(File::open(path).map_err(io_err(path))?);
            let mut line = String::new();
            read_line(&mut r, &mut line, path)?;
            let h: PartHeader = serde_json::from_str(line.trim_end())
                .ok()
                .filter(|h: &PartHeader| h.redoubt_part == PART_VERSION)
                .ok_or_else(|| {
                    bad("not a redoubt part file (audit --shard I/N --json FILE)".into())
                })?;
            let mut at = line.len() as u64;
            match &header {
                None => {
                    seen_shard = vec![false; h.shards];
                    offsets = vec![None; h.outages];
                    header = Some(h.clone());
                }
                Some(first) if first.fingerprint != h.fingerprint || first.shards != h.shards => {
                    return Err(bad(format!(
                        "belongs to another run than {} (another network file, other options \
                         or another shard count)",
                        paths[0].display()
                    )));
                }
                Some(_) => {}
            }
            if h.shard == 0
                || h.shard > h.shards
                || std::mem::replace(&mut seen_shard[h.shard - 1], true)
            {
                return Err(bad(format!(
                    "shard {}/{} given twice or out of range",
                    h.shard, h.shards
                )));
            }
            let mut n = 1;
            loop {
                line.clear();
                let got = read_line(&mut r, &mut line, path)?;
                if got == 0 {
                    break;
                }
                n += 1;
                let rec: LineIn = serde_json::from_str(line.trim_end())
                    .ok()
                    .filter(|_| line.ends_with('\n'))
                    .ok_or_else(|| bad(format!("damaged at line {n}")))?;
                let slot = offsets
                    .get_mut(rec.outage)
                    .ok_or_else(|| bad(format!("damaged at line {n}")))?;
                if slot.is_some() {
                    return Err(bad(format!("outage {} is in two parts", rec.outage)));
                }
                *slot = Some((p, at));
                at += got as u64;
                each(rec.outage, rec.evaluation);
            }
        }
        let header = header.ok_or_else(|| Error::Usage("merge: name the part files".into()))?;
        if let Some(missing) = seen_shard.iter().position(|s| !s) {
            return Err(Error::Usage(format!(
                "merge: shard {}/{} is missing",
                missing + 1,
                header.shards
            )));
        }
        let offsets = offsets
            .into_iter()
            .enumerate()
            .map(|(k, o)| {
                o.ok_or_else(|| {
                    Error::Usage(format!(
                        "merge: outage {k} is in no part (a shard was stopped before it ended?)"
                    ))
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(Parts {
            header,
            readers: paths.iter().map(|_| Mutex::new(None)).collect(),
            paths: paths.to_vec(),
            offsets,
        })
    }

    /// Outage `k`'s evaluation, bit-identical to the one the shard solved. O(its size).
    pub fn read(&self, k: usize) -> Result<Evaluation> {
        let (p, at) = self.offsets[k];
        let path = &self.paths[p];
        let line = line_at(&self.readers[p], path, at, false)?;
        parse_line(&line, k).ok_or_else(|| changed(path))
    }
}

fn damaged(path: &Path, line: usize) -> Error {
    Error::Usage(format!(
        "--resume: {} is damaged at line {line}; rerun without --resume to start again",
        path.display()
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Network;
    use crate::scenario::{Element, Scenario};

    /// Source: the journal's own contract (a line read back by offset is the evaluation
    /// recorded, bit for bit, also after a resume re-reads the file), checked against the
    /// evaluations solved here.
    #[test]
    fn lines_read_back_by_offset_equal_what_was_recorded() {
        let net = Network::from_json(
            r#"{"sites":[{"id":"a","processing":3},{"id":"b"},{"id":"c","processing":1}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":2},
                     {"id":"bc","from":"b","to":"c","capacity":5},
                     {"id":"ca","from":"c","to":"a","capacity":1}],
            "demands":[{"from":"a","to":"c","volume":2,"required":1.5},
                       {"from":"b","to":"a","volume":1}]}"#,
        )
        .unwrap();
        let evals: Vec<Evaluation> = [vec![], vec![Element::Link(0)], vec![Element::Site(2)]]
            .iter()
            .map(|els| {
                crate::solve::evaluate(&net, &Scenario::new(&net, els).outage(&net)).unwrap()
            })
            .collect();
        let dir = std::env::temp_dir().join(format!("redoubt-journal-{}", std::process::id()));
        fs::create_dir_all(&dir).unwrap();
        let path = dir.join("j.journal");
        let (j, _, _) = Journal::open(&path, "fp", 3, false).unwrap();
        // Recorded out of order, outage 1 twice: the last line counts.
        assert!(j.record(2, &evals[2]) && j.record(1, &evals[0]) && j.record(1, &evals[1]));
        let r = j.reader().unwrap();
        assert_eq!(r.read(0).unwrap(), None);
        assert_eq!(r.read(1).unwrap().as_ref(), Some(&evals[1]));
        assert_eq!(r.read(2).unwrap().as_ref(), Some(&evals[2]));
        drop((j, r));
        let (j, restored, opened) = Journal::open(&path, "fp", 3, true).unwrap();
        assert_eq!(opened, Opened::Resumed(2));
        assert_eq!(restored[1].as_ref(), Some(&evals[1]));
        assert!(j.record(0, &evals[0]));
        let r = j.reader().unwrap();
        for (k, e) in evals.iter().enumerate() {
            assert_eq!(r.read(k).unwrap().as_ref(), Some(e), "outage {k}");
            assert_eq!(j.line(k).unwrap(), to_line(k, e));
        }
        let _ = fs::remove_dir_all(&dir);
    }
}

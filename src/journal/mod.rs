//! The resume journal: a JSON-lines file beside the `--json` output (`FILE.journal`).
//!
//! Line 1 is a header `{"redoubt_journal": 2, "fingerprint": "...", "outages": N}`; every
//! further line is `{"check": "<16 hex>", "outage": k, "evaluation": {...}}`, one finished
//! outage, written with a single `write` call as soon as it is solved. `check` is the
//! 64-bit FNV-1a hash of the bytes that follow the check field (from `"outage"` to the
//! end of the line), so a damaged line is recognised as such. f64 values are written and
//! read with serde_json's `float_roundtrip`, so a restored evaluation is bit-identical to
//! the solved one. A kill at any moment leaves at most a torn last line, which reading
//! ignores.
//!
//! **A journal is data, not trust.** Each evaluation carries its proof (walks and dual
//! prices, [`crate::solve::recheck`]); on `--resume` every restored evaluation is verified
//! again against the network before it is used, and a line that is damaged or does not
//! verify is ignored (said on stderr, naming the file and the line) and its outage solved
//! again. A part file (`audit --shard`) is the same lines after a header; `merge` refuses
//! a part whose header does not match its fingerprint or whose line is damaged, out of
//! order or does not verify, naming the file and the line.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufRead, BufReader, Read, Seek, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::scenario::OutageId;
use crate::solve::Evaluation;

/// Version of the journal layout; a journal of another version is not resumed.
pub const VERSION: u32 = 2;

#[derive(Serialize, Deserialize)]
struct Header {
    redoubt_journal: u32,
    fingerprint: String,
    outages: usize,
}

#[derive(Serialize)]
struct LineOut<'a> {
    outage: OutageId,
    evaluation: &'a Evaluation,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct LineIn {
    #[allow(dead_code)] // checked on the raw bytes before parsing
    check: String,
    outage: OutageId,
    evaluation: Evaluation,
}

/// What a journal line starts with, before its 16 hex digits of check.
const CHECK_OPEN: &str = "{\"check\":\"";
/// Bytes before the checked part of a line: `{"check":"<16 hex>",`.
const CHECKED_FROM: usize = CHECK_OPEN.len() + 16 + 2;

/// One evaluation restored from a journal, with the line it came from.
#[derive(Debug, Clone)]
pub struct Restored {
    pub evaluation: Evaluation,
    /// Its line in the journal, from 1.
    pub line: usize,
}

/// What `--resume` found in a journal: per outage the evaluation of its last whole line
/// (not verified yet: see [`crate::solve::recheck`]), and the lines that were ignored as
/// damaged, with the reason.
#[derive(Debug, Default)]
pub struct Resume {
    pub restored: Vec<Option<Restored>>,
    pub damaged: Vec<(usize, String)>,
}

/// The journal file beside an output file: `FILE.journal`.
pub fn path_for(output: &Path) -> PathBuf {
    let mut s = output.as_os_str().to_os_string();
    s.push(".journal");
    PathBuf::from(s)
}

/// The 64-bit FNV-1a offset basis.
const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;

/// 64-bit FNV-1a of `bytes` continued from the state `h` (start from `FNV_OFFSET`).
/// O(bytes).
fn fnv1a(mut h: u64, bytes: &[u8]) -> u64 {
    const PRIME: u64 = 0x0000_0100_0000_01b3;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(PRIME);
    }
    h
}

/// A fingerprint of everything that decides a run's results: 64-bit FNV-1a over the
/// parts, each preceded by its length (so part boundaries count), as 16 hex digits. Not a
/// cryptographic hash: it guards against resuming with another file or other options by
/// mistake. O(total bytes).
pub fn fingerprint(parts: &[&[u8]]) -> String {
    let mut h = FNV_OFFSET;
    for p in parts {
        h = fnv1a(h, &(p.len() as u64).to_le_bytes());
        h = fnv1a(h, p);
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
    /// last line is cut off, a header that is damaged or has another fingerprint or outage
    /// count is refused (usage error naming the file and line 1), a damaged line (bad
    /// check, not an evaluation line, outage out of range) is listed in
    /// [`Resume::damaged`] and otherwise ignored, and the evaluations found are returned
    /// (`[k]` for outage `k`, not verified yet); when there is none, a new journal is
    /// created as without `resume`. O(journal size).
    pub fn open(
        path: &Path,
        fingerprint: &str,
        outages: usize,
        resume: bool,
    ) -> Result<(Journal, Resume, Opened)> {
        let mut found = Resume {
            restored: vec![None; outages],
            damaged: Vec::new(),
        };
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
                let (count, offsets) = read_lines(path, &bytes[..len], fingerprint, &mut found)?;
                file.set_len(len as u64).map_err(io_err(path))?;
                let journal = Journal::at(path, file, len as u64, offsets, count)?;
                return Ok((journal, found, Opened::Resumed(count)));
            }
            (Some((file, _)), _) => {
                // Empty or torn before its header ended: start it again in place.
                file.set_len(0).map_err(io_err(path))?;
                let journal = Journal::start(path, file, fingerprint, outages)?;
                return Ok((journal, found, Opened::NothingToResume));
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
        Ok((journal, found, opened))
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

    /// Forgets outage `k`'s line (a restored line that did not verify): it is no longer
    /// read back nor counted as saved, until the outage is recorded again. O(1).
    pub fn discard(&self, k: OutageId) {
        let mut offsets = self.offsets.lock().unwrap_or_else(|p| p.into_inner());
        if let Some(slot) = offsets.get_mut(k.0)
            && slot.take().is_some()
        {
            self.saved.fetch_sub(1, Ordering::SeqCst);
        }
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
    pub fn record(&self, k: OutageId, e: &Evaluation) -> bool {
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
                    .get_mut(k.0)
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
    pub fn line(&self, k: OutageId) -> Result<Option<String>> {
        let Some(at) = self
            .offsets
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .get(k.0)
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

/// Reads the whole lines `bytes` of an existing journal at `path` (see [`Journal::open`])
/// into `found` and returns how many outages it holds and the byte offset of each one's
/// last whole line. O(bytes).
fn read_lines(
    path: &Path,
    bytes: &[u8],
    fingerprint: &str,
    found: &mut Resume,
) -> Result<(usize, Vec<Option<u64>>)> {
    let outages = found.restored.len();
    let mut lines = bytes.split_inclusive(|&c| c == b'\n');
    let first = lines.next().unwrap_or_default();
    let header: Header = std::str::from_utf8(first)
        .ok()
        .and_then(|l| serde_json::from_str(l.trim_end_matches('\n')).ok())
        .ok_or_else(|| damaged(path, 1))?;
    if header.redoubt_journal != VERSION
        || header.fingerprint != fingerprint
        || header.outages != outages
    {
        return Err(Error::Usage(format!(
            "--resume: {} (line 1) was written for another network file or other options, \
             or by another version of redoubt (fingerprint {}, this run {fingerprint}); \
             rerun without --resume to start again",
            path.display(),
            header.fingerprint
        )));
    }
    let mut count = 0;
    let mut offsets = vec![None; outages];
    let mut at = first.len() as u64;
    for (n, raw) in lines.enumerate() {
        let line_no = n + 2;
        let line = raw.strip_suffix(b"\n").unwrap_or(raw);
        match parse_line(line) {
            Ok((k, evaluation)) if k.0 < outages => {
                let slot = &mut found.restored[k];
                if slot.is_none() {
                    count += 1;
                }
                *slot = Some(Restored {
                    evaluation,
                    line: line_no,
                });
                offsets[k] = Some(at);
            }
            Ok((k, _)) => found.damaged.push((
                line_no,
                format!("outage {k} is out of range (the run has {outages})"),
            )),
            Err(why) => found.damaged.push((line_no, why)),
        }
        at += raw.len() as u64;
    }
    Ok((count, offsets))
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
    pub fn read(&self, k: OutageId) -> Result<Option<Evaluation>> {
        let Some(at) = self.offsets.get(k.0).copied().flatten() else {
            return Ok(None);
        };
        let line = line_at(&self.reader, &self.path, at, true)?;
        match parse_line(line.as_bytes()) {
            Ok((o, e)) if o == k => Ok(Some(e)),
            _ => Err(changed(&self.path)),
        }
    }
}

/// The check of a journal line: 64-bit FNV-1a of the bytes after the check field.
fn line_check(checked: &[u8]) -> u64 {
    fnv1a(FNV_OFFSET, checked)
}

/// Parses one journal or part line (without its newline) into its outage and
/// evaluation, after checking its check; `Err` says what is wrong. O(line length).
fn parse_line(line: &[u8]) -> std::result::Result<(OutageId, Evaluation), String> {
    let check = line
        .get(CHECK_OPEN.len()..CHECKED_FROM - 2)
        .filter(|_| line.starts_with(CHECK_OPEN.as_bytes()))
        .and_then(|h| std::str::from_utf8(h).ok())
        .and_then(|h| u64::from_str_radix(h, 16).ok())
        .filter(|_| line.get(CHECKED_FROM - 2..CHECKED_FROM) == Some(&b"\","[..]))
        .ok_or("damaged: it does not start with its check")?;
    if line_check(&line[CHECKED_FROM..]) != check {
        return Err("damaged: its check does not match its content".into());
    }
    let text = std::str::from_utf8(line).map_err(|_| "damaged: not UTF-8 text".to_string())?;
    let rec: LineIn = serde_json::from_str(text).map_err(|e| {
        format!(
            "not an evaluation line (column {}: {})",
            e.column(),
            first_clause(&e.to_string())
        )
    })?;
    Ok((rec.outage, rec.evaluation))
}

/// serde_json's message without its " at line L column C" (the line is always 1 here).
fn first_clause(msg: &str) -> &str {
    msg.rfind(" at line ").map_or(msg, |i| &msg[..i])
}

fn changed(path: &Path) -> Error {
    Error::Usage(format!(
        "{} changed while this run was reading it back; run again",
        path.display()
    ))
}

/// Version of the part-file layout.
pub const PART_VERSION: u32 = 2;

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
    /// `--matrix` as given (absent without it: every matrix of the network).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
    /// The run asked for `--headroom`: `merge` computes the headroom of every outage of the
    /// whole run (absent in parts of runs without it).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub headroom: bool,
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
pub fn to_line(k: OutageId, e: &Evaluation) -> Option<String> {
    let body = serde_json::to_string(&LineOut {
        outage: k,
        evaluation: e,
    })
    .ok()?;
    // `{"outage":…}` becomes `{"check":"<hex>","outage":…}`, the check over `"outage":…}`.
    let rest = body.strip_prefix('{')?;
    let line = format!("{CHECK_OPEN}{:016x}\",{rest}", line_check(rest.as_bytes()));
    parse_line(line.as_bytes())
        .is_ok_and(|(o, r)| o == k && r == *e)
        .then_some(line)
}

/// The part files of one sharded run, read for `merge`: headers checked, every line
/// checked and verified, every outage's line located so [`Parts::read`] can give its
/// evaluation back.
pub struct Parts {
    pub header: PartHeader,
    paths: Vec<PathBuf>,
    /// Per outage: (part, byte offset of its line, the line's check).
    offsets: Vec<(usize, u64, u64)>,
    readers: Vec<Mutex<Option<BufReader<File>>>>,
}

/// Reads one line of a part at `path` (with its newline, if any) into `line` and returns
/// its length; a line longer than `limit` bytes is refused
/// ([`crate::model::too_large`]) before it is read whole. O(line length).
fn read_part_line(
    r: &mut BufReader<File>,
    line: &mut Vec<u8>,
    path: &Path,
    limit: u64,
) -> Result<usize> {
    let got = r
        .by_ref()
        .take(limit + 1)
        .read_until(b'\n', line)
        .map_err(io_err(path))?;
    if got as u64 > limit {
        return Err(crate::model::too_large(path, limit));
    }
    Ok(got)
}

/// Reads the header line of the part at `path`. O(header size).
fn part_header(path: &Path) -> Result<(PartHeader, u64)> {
    let bad = |why: String| Error::Usage(format!("merge: {}: {why}", path.display()));
    let mut r = BufReader::new(File::open(path).map_err(io_err(path))?);
    let mut line = Vec::new();
    // One line is at most the input limit (a part's header carries the network file).
    read_part_line(&mut r, &mut line, path, crate::model::input_limit()?)?;
    let h: PartHeader = std::str::from_utf8(&line)
        .ok()
        .and_then(|l| serde_json::from_str(l.trim_end()).ok())
        .filter(|h: &PartHeader| h.redoubt_part == PART_VERSION && line.ends_with(b"\n"))
        .ok_or_else(|| {
            bad(
                "line 1 is not a redoubt part header (audit --shard I/N --json FILE, \
                 of this version)"
                    .into(),
            )
        })?;
    Ok((h, line.len() as u64))
}

/// The header with its shard set to 0, for comparing the parts of one run.
fn run_of(h: &PartHeader) -> PartHeader {
    PartHeader {
        shard: 0,
        ..h.clone()
    }
}

impl Parts {
    /// Reads and checks the header of every part: each is a part header whose network
    /// text and options give its recorded fingerprint (`fingerprint_of`, the audit's own
    /// fingerprint function), all belong to one run, and every shard is given exactly
    /// once. Returns the first part's header. Refusals are usage errors naming the file
    /// and line 1. O(total header size).
    pub fn headers(
        paths: &[PathBuf],
        fingerprint_of: &dyn Fn(&PartHeader) -> String,
    ) -> Result<PartHeader> {
        let mut first: Option<PartHeader> = None;
        // A set, not a vector by shard count: a header may claim any count.
        let mut seen_shard = std::collections::BTreeSet::new();
        for path in paths {
            let bad = |why: String| Error::Usage(format!("merge: {}: {why}", path.display()));
            let (h, _) = part_header(path)?;
            if fingerprint_of(&h) != h.fingerprint {
                return Err(bad(
                    "line 1: the network text or options it carries do not give its \
                     recorded fingerprint (edited after the shard was run?)"
                        .into(),
                ));
            }
            match &first {
                None => first = Some(h.clone()),
                Some(f) if run_of(f) != run_of(&h) => {
                    return Err(bad(format!(
                        "line 1: belongs to another run than {} (another network file, other \
                         options or another shard count)",
                        paths[0].display()
                    )));
                }
                Some(_) => {}
            }
            if h.shard == 0 || h.shard > h.shards || !seen_shard.insert(h.shard) {
                return Err(bad(format!(
                    "line 1: shard {}/{} given twice or out of range",
                    h.shard, h.shards
                )));
            }
        }
        let header = first.ok_or_else(|| Error::Usage("merge: name the part files".into()))?;
        // At most one more step than there are parts.
        if let Some(missing) = (1..=header.shards).find(|s| !seen_shard.contains(s)) {
            return Err(Error::Usage(format!(
                "merge: shard {missing}/{} is missing",
                header.shards
            )));
        }
        Ok(header)
    }

    /// Reads the lines of the parts whose headers [`Parts::headers`] checked (`header`)
    /// and calls `verify(k, evaluation)` once per outage, in file order. Refuses (usage
    /// error naming the file and the line) a header that changed, a damaged or truncated
    /// line, a line whose outage is not the next one of its shard (shard `i` of `n` holds
    /// the outages `k` with `k % n == i − 1`, in order), a part that ends before its last
    /// outage, and a line whose evaluation `verify` refuses. O(total size) plus what
    /// `verify` costs; memory O(outages) beyond what `verify` keeps.
    pub fn open(
        paths: &[PathBuf],
        header: &PartHeader,
        mut verify: impl FnMut(OutageId, Evaluation) -> std::result::Result<(), String>,
    ) -> Result<Parts> {
        let mut offsets: Vec<Option<(usize, u64, u64)>> = vec![None; header.outages];
        // One line is at most the input limit (a part's header carries the network file).
        let limit = crate::model::input_limit()?;
        for (p, path) in paths.iter().enumerate() {
            let bad = |why: String| Error::Usage(format!("merge: {}: {why}", path.display()));
            let (h, mut at) = part_header(path)?;
            if run_of(&h) != run_of(header) {
                return Err(changed(path));
            }
            let mut r = BufReader::new(File::open(path).map_err(io_err(path))?);
            r.seek(io::SeekFrom::Start(at)).map_err(io_err(path))?;
            let mut expected = (h.shard - 1..header.outages)
                .step_by(header.shards.max(1))
                .map(OutageId);
            let mut line = Vec::new();
            let mut n = 1;
            loop {
                line.clear();
                let got = read_part_line(&mut r, &mut line, path, limit)?;
                if got == 0 {
                    break;
                }
                n += 1;
                let Some(body) = line.strip_suffix(b"\n") else {
                    return Err(bad(format!("line {n} is truncated (no end of line)")));
                };
                let (k, e) = parse_line(body).map_err(|why| bad(format!("line {n} is {why}")))?;
                match expected.next() {
                    Some(want) if want == k => {}
                    Some(want) => {
                        return Err(bad(format!(
                            "line {n} holds outage {k}, where outage {want} of shard {}/{} \
                             belongs",
                            h.shard, h.shards
                        )));
                    }
                    None => {
                        return Err(bad(format!(
                            "line {n} holds outage {k}, beyond the last outage of shard {}/{}",
                            h.shard, h.shards
                        )));
                    }
                }
                let check = line_check(&body[CHECKED_FROM..]);
                verify(k, e).map_err(|why| {
                    bad(format!(
                        "line {n}: outage {k} does not verify against the part's network: \
                         {why}"
                    ))
                })?;
                offsets[k] = Some((p, at, check));
                at += got as u64;
            }
            if let Some(k) = expected.next() {
                return Err(bad(format!(
                    "ends after line {n} without outage {k} (truncated, or its shard was \
                     stopped before it ended?)"
                )));
            }
        }
        let offsets = offsets
            .into_iter()
            .enumerate()
            .map(|(k, o)| o.ok_or_else(|| Error::Usage(format!("merge: outage {k} is in no part"))))
            .collect::<Result<Vec<_>>>()?;
        Ok(Parts {
            header: header.clone(),
            readers: paths.iter().map(|_| Mutex::new(None)).collect(),
            paths: paths.to_vec(),
            offsets,
        })
    }

    /// Outage `k`'s evaluation, bit-identical to the one the shard solved and verified
    /// when the parts were opened (its line's check is compared). O(its size).
    pub fn read(&self, k: OutageId) -> Result<Evaluation> {
        let (p, at, check) = self.offsets[k];
        let path = &self.paths[p];
        let line = line_at(&self.readers[p], path, at, false)?;
        match parse_line(line.as_bytes()) {
            Ok((o, e)) if o == k && line_check(&line.as_bytes()[CHECKED_FROM..]) == check => Ok(e),
            _ => Err(changed(path)),
        }
    }
}

fn damaged(path: &Path, line: usize) -> Error {
    Error::Usage(format!(
        "--resume: {} is damaged at line {line} (its header); rerun without --resume to \
         start again",
        path.display()
    ))
}

#[cfg(test)]
mod tests;

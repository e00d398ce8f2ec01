//! The one harness every integration test drives the real `redoubt` binary with.
//!
//! - [`redoubt`] runs it as a child process with piped output (what scripts and CI see).
//! - [`in_terminal`] runs it under a pseudo-terminal through util-linux `script(1)`, with a
//!   time limit, so what a person at a terminal meets (the progress bar, the terminal
//!   width, Ctrl-C) is tested too: piped output alone never draws the bar.
//! - [`TempPath`] is a unique file in this test process's own temporary folder, removed on
//!   drop; [`TempDir`] a folder there, removed with its contents.
//! - [`random`] is the seeded generator and random network several files share.
//! - [`json`] reads `--json` audit documents and holds the hand-computed networks that
//!   several files share.
//!
//! Every run asserts that the binary did not panic, whatever the command.
#![allow(dead_code)] // each test crate uses part of the harness

pub mod json;
pub mod random;

use std::collections::BTreeSet;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::OnceLock;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

/// What one run of the binary left behind.
pub struct Run {
    /// The exit status (`-1` when the process was killed by a signal).
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

/// Runs `redoubt ARGS` with piped output.
pub fn redoubt(args: &[&str]) -> Run {
    redoubt_env(args, &[])
}

/// Runs `redoubt ARGS` with piped output and extra environment variables.
pub fn redoubt_env(args: &[&str], env: &[(&str, &str)]) -> Run {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_redoubt"));
    cmd.args(args).env_remove("RUST_BACKTRACE");
    for (k, v) in env {
        cmd.env(k, v);
    }
    let out = cmd.output().expect("the redoubt binary starts");
    let run = Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    };
    assert!(
        !run.stderr.contains("panicked"),
        "redoubt {args:?} panicked:\n{}",
        run.stderr
    );
    run
}

/// What a run under a pseudo-terminal left: the status and everything the terminal showed
/// (standard output and standard error interleaved, with the terminal's `\r\n`).
pub struct TerminalRun {
    pub code: i32,
    pub screen: String,
    pub elapsed: Duration,
}

/// Runs `redoubt ARGS` under a pseudo-terminal (`script -qfec CMD /dev/null`, util-linux),
/// so standard output and standard error are a terminal as they are for a person. After
/// `keys_after` (when given) the bytes are typed into the terminal (`\x03` is Ctrl-C, which
/// the terminal turns into SIGINT for the program). Panics when the run takes longer than
/// `limit` (the process is killed first): a hang is a failure, never a stuck test.
pub fn in_terminal(
    args: &[&str],
    limit: Duration,
    keys_after: Option<(Duration, &[u8])>,
) -> TerminalRun {
    let bin = env!("CARGO_BIN_EXE_redoubt");
    let line = std::iter::once(bin)
        .chain(args.iter().copied())
        .map(shell_quote)
        .collect::<Vec<_>>()
        .join(" ");
    let mut child = Command::new("script")
        .args(["-qfec", &line, "/dev/null"])
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env_remove("COLUMNS")
        .env_remove("RUST_BACKTRACE")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("util-linux `script` runs (CI installs it when missing)");
    let mut stdin = child.stdin.take().expect("piped stdin");
    let mut stdout = child.stdout.take().expect("piped stdout");
    let reader = std::thread::spawn(move || {
        let mut buf = Vec::new();
        let _ = stdout.read_to_end(&mut buf);
        buf
    });
    let start = Instant::now();
    let mut keys = keys_after;
    let status = loop {
        if let Some(status) = child.try_wait().expect("wait for script") {
            break status;
        }
        if let Some((after, bytes)) = keys
            && start.elapsed() >= after
        {
            stdin.write_all(bytes).expect("type into the terminal");
            stdin.flush().expect("flush the typed keys");
            keys = None;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            let screen = String::from_utf8_lossy(&reader.join().unwrap_or_default()).into_owned();
            panic!(
                "redoubt {args:?} did not finish within {limit:?} on a terminal; the screen:\n{}",
                tail(&screen, 2000)
            );
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    drop(stdin);
    let elapsed = start.elapsed();
    let screen = String::from_utf8_lossy(&reader.join().expect("reader thread")).into_owned();
    assert!(
        !screen.contains("panicked"),
        "redoubt {args:?} panicked on a terminal:\n{screen}"
    );
    TerminalRun {
        code: status.code().unwrap_or(-1),
        screen,
        elapsed,
    }
}

/// The last `n` bytes of `s` (at a character boundary).
pub fn tail(s: &str, n: usize) -> &str {
    let mut start = s.len().saturating_sub(n);
    while !s.is_char_boundary(start) {
        start += 1;
    }
    &s[start..]
}

fn shell_quote(s: &str) -> String {
    format!("'{}'", s.replace('\'', r"'\''"))
}

/// `fixtures/NAME` in the project.
pub fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(name)
}

/// The invented demo network.
pub fn demo() -> PathBuf {
    fixture("demo-harrowmere.json")
}

/// A path as `&str` (temp paths here are UTF-8).
pub fn s(p: &Path) -> &str {
    p.to_str().expect("utf-8 path")
}

/// This test process's own temporary folder: `temp_dir/redoubt-test-PID`.
pub fn temp_root() -> &'static Path {
    static ROOT: OnceLock<PathBuf> = OnceLock::new();
    ROOT.get_or_init(|| {
        let dir = std::env::temp_dir().join(format!("redoubt-test-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("create temp dir");
        dir
    })
}

/// A unique path in [`temp_root`]; the file (if any) is removed when this is dropped.
pub struct TempPath(pub PathBuf);

impl TempPath {
    pub fn new(stem: &str, ext: &str) -> TempPath {
        static NEXT: AtomicUsize = AtomicUsize::new(0);
        let n = NEXT.fetch_add(1, Ordering::Relaxed);
        TempPath(temp_root().join(format!("{stem}-{n}.{ext}")))
    }

    /// A new `.json` file holding `text`.
    pub fn with_text(stem: &str, text: &str) -> TempPath {
        TempPath::with_bytes(stem, text.as_bytes())
    }

    /// A new `.json` file holding `bytes` (which need not be UTF-8).
    pub fn with_bytes(stem: &str, bytes: &[u8]) -> TempPath {
        let p = TempPath::new(stem, "json");
        std::fs::write(&p.0, bytes).expect("write temp file");
        p
    }

    pub fn path(&self) -> &str {
        s(&self.0)
    }

    pub fn read_json(&self) -> serde_json::Value {
        let text = std::fs::read_to_string(&self.0).expect("file written");
        serde_json::from_str(&text).expect("file is valid JSON")
    }
}

impl Drop for TempPath {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// A fresh folder of its own under [`temp_root`], removed (with its contents) when dropped.
pub struct TempDir(pub PathBuf);

impl TempDir {
    pub fn new(stem: &str) -> TempDir {
        let p = TempPath::new(stem, "d");
        std::fs::create_dir_all(&p.0).expect("create folder");
        TempDir(p.0.clone())
    }

    /// `NAME` inside the folder.
    pub fn join(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }

    /// The names of the entries in the folder.
    pub fn names(&self) -> BTreeSet<String> {
        std::fs::read_dir(&self.0)
            .expect("list folder")
            .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
            .collect()
    }
}

impl TempDir {
    /// Panics naming `what` when the folder holds hidden files: the atomic writer's
    /// temporaries and probes, which a finished or refused run must not leave.
    pub fn assert_no_temporaries(&self, what: &str) {
        let hidden: Vec<String> = self
            .names()
            .into_iter()
            .filter(|n| n.starts_with('.'))
            .collect();
        assert!(
            hidden.is_empty(),
            "{what}: temporary files left: {hidden:?}"
        );
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// How many whole lines the file at `path` holds (0 when it does not exist yet).
pub fn journal_lines(path: &Path) -> usize {
    std::fs::read(path).map_or(0, |b| b.iter().filter(|&&c| c == b'\n').count())
}

/// Starts `redoubt args`, waits until the journal at `journal` holds at least `lines`
/// lines, sends SIGINT (with coreutils' `kill`), and returns the finished run. Panics when
/// the journal does not get there within 5 minutes.
pub fn interrupt_at(args: &[&str], journal: &Path, lines: usize) -> Run {
    let child = Command::new(env!("CARGO_BIN_EXE_redoubt"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the redoubt binary starts");
    let start = Instant::now();
    while journal_lines(journal) < lines {
        assert!(
            start.elapsed().as_secs() < 300,
            "journal never reached {lines} lines"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    let kill = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .expect("kill runs");
    assert!(kill.success());
    let out = child.wait_with_output().expect("redoubt ends");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs `redoubt AUDIT_ARGS --shard I/N --json PART` for every shard `I` of `n` (`args`
/// starts with `audit` and the file), each part written to `dir` as `part-I.jsonl`,
/// asserting that every shard exits 0; returns the part files in shard order.
pub fn shard_parts(dir: &TempDir, args: &[&str], n: usize) -> Vec<PathBuf> {
    (1..=n)
        .map(|i| {
            let part = dir.join(&format!("part-{i}.jsonl"));
            let shard = format!("{i}/{n}");
            let mut all = args.to_vec();
            all.extend_from_slice(&["--shard", &shard, "--json", s(&part)]);
            let run = redoubt(&all);
            assert_eq!(run.code, 0, "shard {shard}: {}", run.stderr);
            part
        })
        .collect()
}

/// Runs `redoubt worst PATH --k K --kinds KINDS --top TOP --by lost|shortfall --json OUT`,
/// asserts that it exits 0 and prints its proof line and a caution, and returns its text
/// output and the JSON document.
pub fn worst_json(
    path: &str,
    k: usize,
    kinds: &str,
    lost: bool,
    top: usize,
) -> (String, serde_json::Value) {
    let out = TempPath::new("worst", "json");
    let (k, top) = (k.to_string(), top.to_string());
    let by = if lost { "lost" } else { "shortfall" };
    let run = redoubt(&[
        "worst",
        path,
        "--k",
        &k,
        "--kinds",
        kinds,
        "--top",
        &top,
        "--by",
        by,
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 0, "worst failed: {}", run.stderr);
    assert!(run.stdout.contains("Proof:"), "{}", run.stdout);
    assert!(run.stdout.contains("Caution:"), "{}", run.stdout);
    (run.stdout, out.read_json())
}

/// The `failed` names of one JSON object of `worst` or `audit`, in order.
pub fn failed_names(w: &serde_json::Value) -> Vec<String> {
    w["failed"]
        .as_array()
        .expect("failed is a list")
        .iter()
        .map(|f| f.as_str().expect("a name").to_string())
        .collect()
}

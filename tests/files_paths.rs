//! Output paths, journals, signals and input sizes through the real binary: what is at an
//! output path is never replaced by a file of another kind, journals are never followed,
//! two outputs never share a file, SIGTERM and SIGHUP stop a run as Ctrl-C does without
//! leaving temporary files, inputs are read up to a limit, and `import` streams its
//! all-pairs demands.
mod common;

use std::collections::BTreeSet;
use std::os::unix::fs::FileTypeExt;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{Run, TempDir, TempPath, demo, fixture, redoubt, redoubt_env, s};
use serde_json::Value;

fn set(names: &[&str]) -> BTreeSet<String> {
    names.iter().map(|n| n.to_string()).collect()
}

fn is_symlink(p: &Path) -> bool {
    std::fs::symlink_metadata(p).is_ok_and(|m| m.file_type().is_symlink())
}

fn mkfifo(p: &Path) {
    let c = std::ffi::CString::new(s(p)).unwrap();
    // SAFETY: `c` is a valid NUL-terminated path for the duration of the call.
    let rc = unsafe { libc::mkfifo(c.as_ptr(), 0o644) };
    assert_eq!(rc, 0, "mkfifo {p:?}: {}", std::io::Error::last_os_error());
}

/// The audit JSON of the small ring, written to a plain new file: the reference that a
/// write through a link, a FIFO or a device must deliver byte for byte.
fn reference_json() -> Vec<u8> {
    let r = TempPath::new("reference", "json");
    let run = redoubt(&[
        "audit",
        s(&fixture("small-ring.json")),
        "--quiet",
        "--json",
        r.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    std::fs::read(&r.0).unwrap()
}

/// Source: POSIX rename(2) replaces the link itself, so writing "through" a link must
/// resolve it first (realpath(3)); expected: the target holds exactly what a plain file
/// gets, the link stays a link to it, and no temporary file is left.
#[test]
fn a_symbolic_link_output_writes_its_target_and_stays_a_link() {
    let want = reference_json();
    let dir = TempDir::new("link");
    let target = dir.join("target.json");
    std::fs::write(&target, "old").unwrap();
    let link = dir.join("link.json");
    std::os::unix::fs::symlink("target.json", &link).unwrap();
    let csv_target = dir.join("table.csv");
    std::fs::write(&csv_target, "old").unwrap();
    let csv_link = dir.join("link.csv");
    std::os::unix::fs::symlink(&csv_target, &csv_link).unwrap();
    let run = redoubt(&[
        "audit",
        s(&fixture("small-ring.json")),
        "--quiet",
        "--json",
        s(&link),
        "--csv",
        s(&csv_link),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        is_symlink(&link) && is_symlink(&csv_link),
        "links stay links"
    );
    assert_eq!(std::fs::read_link(&link).unwrap(), Path::new("target.json"));
    assert!(
        std::fs::read(&target).unwrap() == want,
        "target holds the JSON"
    );
    assert!(
        std::fs::read_to_string(&csv_target)
            .unwrap()
            .contains("shortfall")
    );
    assert_eq!(
        dir.names(),
        set(&["link.csv", "link.json", "table.csv", "target.json"])
    );

    // plan --apply through a link: the target is the applied network, the link a link.
    let net = dir.join("net.json");
    std::fs::copy(demo(), &net).unwrap();
    let applied = dir.join("applied.json");
    std::fs::write(&applied, "old").unwrap();
    let apply_link = dir.join("apply-link.json");
    std::os::unix::fs::symlink(&applied, &apply_link).unwrap();
    let run = redoubt(&["plan", s(&net), "--quiet", "--apply", s(&apply_link)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(is_symlink(&apply_link));
    let check = redoubt(&["check", s(&applied)]);
    assert_eq!(
        check.code, 0,
        "the applied network reads back:\n{}",
        check.stderr
    );

    // A link to nothing is refused before any work, and nothing is created.
    let dangling = dir.join("dangling.json");
    std::os::unix::fs::symlink(dir.join("nowhere/x.json"), &dangling).unwrap();
    let run = redoubt(&["audit", s(&demo()), "--quiet", "--json", s(&dangling)]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("symbolic link"), "{}", run.stderr);
    assert!(is_symlink(&dangling) && !dir.join("nowhere").exists());
}

/// Source: POSIX FIFOs (mkfifo(3)): a writer's bytes reach the reader; the FIFO itself
/// must stay a FIFO (a rename over it would replace it by a regular file nobody reads).
#[test]
fn a_fifo_output_is_written_through_to_its_reader() {
    let want = reference_json();
    let dir = TempDir::new("fifo");
    let fifo = dir.join("out.json");
    mkfifo(&fifo);
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || std::fs::read(&fifo).expect("read the FIFO"))
    };
    let run = redoubt(&[
        "audit",
        s(&fixture("small-ring.json")),
        "--quiet",
        "--json",
        s(&fifo),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    // Checked before joining: a FIFO replaced by a file would leave the reader waiting.
    let meta = std::fs::symlink_metadata(&fifo).unwrap();
    assert!(meta.file_type().is_fifo(), "still a FIFO");
    let got = reader.join().expect("reader thread");
    assert!(got == want, "the reader got the JSON a plain file gets");
    // No journal and no temporary file beside it.
    assert_eq!(dir.names(), set(&["out.json"]));
}

/// Source: mknod(2) with the null device's numbers (Linux devices.txt: character 1,3;
/// from memory); writes to it succeed and vanish, and a character device must never be
/// replaced by a regular file. A node of our own is tried first; `/dev/null` itself only
/// afterwards, so a regression cannot reach the machine's own device unchecked.
#[test]
fn a_character_device_output_stays_a_device() {
    let dir = TempDir::new("device");
    let node = dir.join("null");
    let c = std::ffi::CString::new(s(&node)).unwrap();
    // SAFETY: valid NUL-terminated path; makedev of constants.
    let rc = unsafe { libc::mknod(c.as_ptr(), libc::S_IFCHR | 0o666, libc::makedev(1, 3)) };
    if rc != 0 {
        eprintln!(
            "skipped: cannot create a device node here ({}); needs root on a filesystem \
             without nodev",
            std::io::Error::last_os_error()
        );
        return;
    }
    let net = s(&fixture("small-ring.json")).to_string();
    let run = redoubt(&["audit", &net, "--quiet", "--json", s(&node)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        std::fs::symlink_metadata(&node)
            .unwrap()
            .file_type()
            .is_char_device(),
        "our node is still a character device"
    );
    assert_eq!(dir.names(), set(&["null"]), "no journal, no temporary file");
    // --resume needs a journal, which a device output does not keep.
    let run = redoubt(&["audit", &net, "--quiet", "--json", s(&node), "--resume"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("keeps no journal"), "{}", run.stderr);

    let run = redoubt(&["audit", &net, "--quiet", "--json", "/dev/null"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let meta = std::fs::symlink_metadata("/dev/null").unwrap();
    assert!(
        meta.file_type().is_char_device(),
        "/dev/null is still a device"
    );
    assert!(!Path::new("/dev/null.journal").exists());
}

/// Source: open(2) `O_CREAT|O_EXCL` fails on any existing name, a symbolic link included,
/// and `O_NOFOLLOW` refuses a link: a journal planted in advance must never redirect our
/// writes. Expected: refused with exit 2 before solving, the victim untouched.
#[test]
fn a_planted_journal_is_never_followed_or_replaced() {
    let dir = TempDir::new("journal");
    let victim = dir.join("victim.txt");
    std::fs::write(&victim, "precious").unwrap();
    let json = dir.join("out.json");
    let journal = dir.join("out.json.journal");
    std::os::unix::fs::symlink(&victim, &journal).unwrap();
    let net = s(&fixture("small-ring.json")).to_string();
    let args = ["audit", &net, "--quiet", "--json", s(&json)];
    let run = redoubt(&args);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains("already exists") && run.stderr.contains("--resume"),
        "{}",
        run.stderr
    );
    let resume: Vec<&str> = args.iter().copied().chain(["--resume"]).collect();
    let run = redoubt(&resume);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("symbolic link"), "{}", run.stderr);
    assert_eq!(std::fs::read_to_string(&victim).unwrap(), "precious");
    assert!(is_symlink(&journal) && !json.exists());

    // A FIFO in its place: refused, not waited on.
    std::fs::remove_file(&journal).unwrap();
    mkfifo(&journal);
    let run = redoubt(&resume);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("not a regular file"), "{}", run.stderr);

    // A regular file there without --resume: refused, kept as it was.
    std::fs::remove_file(&journal).unwrap();
    std::fs::write(&journal, "someone's notes\n").unwrap();
    let run = redoubt(&args);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert_eq!(
        std::fs::read_to_string(&journal).unwrap(),
        "someone's notes\n"
    );
    // Removed, the same command runs and leaves only its output.
    std::fs::remove_file(&journal).unwrap();
    let run = redoubt(&args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_eq!(dir.names(), set(&["out.json", "victim.txt"]));
}

/// Source: the file system (one name, one file): two outputs of one command on one path
/// would leave only the one written last. Expected: refused with exit 2 before solving,
/// naming both flags, and no file written.
#[test]
fn two_outputs_on_one_new_path_are_refused() {
    let dir = TempDir::new("collide");
    let d = s(&demo()).to_string();
    let a = dir.join("a");
    let a_again = dir.0.join("sub").join("..").join("a");
    std::fs::create_dir(dir.join("sub")).unwrap();
    let b = dir.join("b.json");
    let b_journal = dir.join("b.json.journal");
    let rep = dir.join("rep");
    let rep_html = rep.join("report.html");
    let p = dir.join("p");
    let cases: Vec<(Vec<&str>, [&str; 2])> = vec![
        (
            vec!["audit", &d, "--json", s(&a), "--csv", s(&a)],
            ["--json", "--csv"],
        ),
        (
            vec!["audit", &d, "--json", s(&a), "--csv", s(&a_again)],
            ["--json", "--csv"],
        ),
        (
            vec!["audit", &d, "--json", s(&b), "--csv", s(&b_journal)],
            ["journal of --json", "--csv"],
        ),
        (
            vec!["audit", &d, "--json", s(&rep_html), "--report", s(&rep)],
            ["--json", "--report"],
        ),
        (
            vec!["plan", &d, "--json", s(&p), "--apply", s(&p)],
            ["--json", "--apply"],
        ),
    ];
    for (args, flags) in cases {
        let mut args = args.clone();
        args.push("--quiet");
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}:\n{}", run.stderr);
        for f in flags {
            assert!(
                run.stderr.contains(f),
                "{args:?} names {f}:\n{}",
                run.stderr
            );
        }
        assert!(run.stderr.contains("same file"), "{}", run.stderr);
        assert_eq!(dir.names(), set(&["sub"]), "{args:?} wrote nothing");
    }
}

fn lines_of(path: &Path) -> usize {
    std::fs::read(path).map_or(0, |b| b.iter().filter(|&&c| c == b'\n').count())
}

/// Starts `redoubt args`, waits until `journal` holds `lines` lines, sends `signal` (and a
/// second one `again` later, when given), and returns the finished run.
fn signal_at(args: &[&str], journal: &Path, lines: usize, signal: i32) -> Run {
    let child = Command::new(env!("CARGO_BIN_EXE_redoubt"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the redoubt binary starts");
    let start = Instant::now();
    while lines_of(journal) < lines {
        assert!(
            start.elapsed() < Duration::from_secs(300),
            "journal never reached {lines} lines"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    // SAFETY: kill(2) on our own child's pid.
    let rc = unsafe { libc::kill(child.id() as libc::pid_t, signal) };
    assert_eq!(rc, 0);
    let out = child.wait_with_output().expect("redoubt ends");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Source: POSIX signal conventions (SIGTERM asks a process to end, SIGHUP is sent when
/// its terminal goes away; exit status 128 + 2 for a run stopped by an interrupt is what
/// this tool documents for all three). Expected: the same clean stop as Ctrl-C, the resume
/// hint, the journal kept, no temporary file, and `--resume` finishes the run.
#[test]
fn sigterm_and_sighup_stop_like_ctrl_c_and_resume_finishes() {
    let dir = TempDir::new("term");
    let json = dir.join("grid.json");
    let journal = dir.join("grid.json.journal");
    let grid = fixture("grid-50.json");
    let args = ["audit", s(&grid), "--yes", "--json", s(&json)];
    let first = signal_at(&args, &journal, 20, libc::SIGTERM);
    assert_eq!(first.code, 130, "SIGTERM exit status:\n{}", first.stderr);
    assert!(first.stderr.contains("--resume"), "{}", first.stderr);
    assert_eq!(
        dir.names(),
        set(&["grid.json.journal"]),
        "only the journal is left"
    );
    let kept = lines_of(&journal);
    let resume: Vec<&str> = args.iter().copied().chain(["--resume"]).collect();
    let second = signal_at(&resume, &journal, kept + 10, libc::SIGHUP);
    assert_eq!(second.code, 130, "SIGHUP exit status:\n{}", second.stderr);
    assert!(second.stderr.contains("--resume"), "{}", second.stderr);
    assert_eq!(dir.names(), set(&["grid.json.journal"]));
    let last = redoubt(&resume);
    assert_eq!(last.code, 0, "{}", last.stderr);
    assert!(last.stdout.starts_with("Verdict:"), "{}", last.stdout);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert!(doc["scenarios"].as_array().is_some_and(|a| a.len() > 1));
    assert_eq!(
        dir.names(),
        set(&["grid.json"]),
        "journal removed at the end"
    );
}

/// Source: POSIX signals at an arbitrary moment (here: spread over the whole run, final
/// write included, one or two in a row). Expected whatever the moment: never a temporary
/// file left; exit 0 with a complete JSON, or 130 with the journal kept for `--resume`.
#[test]
fn a_signal_at_any_moment_leaves_no_temporary_file() {
    let net = fixture("small-ring.json");
    for (k, delay_ms) in [5u64, 40, 80, 120, 160, 220, 300].into_iter().enumerate() {
        let dir = TempDir::new("anytime");
        let json = dir.join("out.json");
        let child = Command::new(env!("CARGO_BIN_EXE_redoubt"))
            .args([
                "audit",
                s(&net),
                "--depth",
                "2",
                "--quiet",
                "--json",
                s(&json),
            ])
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .expect("starts");
        std::thread::sleep(Duration::from_millis(delay_ms));
        let pid = child.id() as libc::pid_t;
        // SAFETY: kill(2) on our own child (it may have exited: then ESRCH, ignored).
        unsafe { libc::kill(pid, libc::SIGTERM) };
        if k % 2 == 1 {
            std::thread::sleep(Duration::from_millis(2));
            // SAFETY: as above.
            unsafe { libc::kill(pid, libc::SIGTERM) };
        }
        let out = child.wait_with_output().expect("ends");
        let stderr = String::from_utf8_lossy(&out.stderr);
        let names = dir.names();
        assert!(
            names.iter().all(|n| !n.starts_with('.')),
            "after {delay_ms} ms: left {names:?}"
        );
        match out.status.code() {
            Some(0) => {
                let text = std::fs::read_to_string(&json).unwrap();
                let doc: Value = serde_json::from_str(&text).expect("complete JSON");
                assert!(doc["scenarios"].is_array());
                assert_eq!(names, set(&["out.json"]));
            }
            Some(130) => {
                assert!(
                    names.contains("out.json.journal") || names.is_empty(),
                    "after {delay_ms} ms: {names:?}"
                );
            }
            // Killed by the signal's default action: only possible before the handler is
            // installed, which is before any file is made.
            None => assert!(names.is_empty(), "after {delay_ms} ms: {names:?}"),
            other => panic!("after {delay_ms} ms: exit {other:?}\n{stderr}"),
        }
    }
}

/// Source: `/dev/zero` never ends (Linux mem(4)); a regular file one byte over a limit is
/// over it. Expected: exit 2 naming the limit and how to raise it, without reading more.
#[test]
fn inputs_are_read_up_to_a_limit() {
    let run = redoubt(&["check", "/dev/zero"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains("256 MiB") && run.stderr.contains("REDOUBT_MAX_INPUT_MIB"),
        "{}",
        run.stderr
    );
    let dir = TempDir::new("limit");
    // The demo network followed by spaces up to one byte past 1 MiB: valid JSON.
    let mut bytes = std::fs::read(demo()).unwrap();
    bytes.resize((1 << 20) + 1, b' ');
    let big = dir.join("big.json");
    std::fs::write(&big, &bytes).unwrap();
    let over = redoubt_env(&["check", s(&big)], &[("REDOUBT_MAX_INPUT_MIB", "1")]);
    assert_eq!(over.code, 2, "{}", over.stderr);
    assert!(over.stderr.contains("1 MiB"), "{}", over.stderr);
    let under = redoubt_env(&["check", s(&big)], &[("REDOUBT_MAX_INPUT_MIB", "2")]);
    assert_eq!(under.code, 0, "{}", under.stderr);
    let bad = redoubt_env(&["check", s(&big)], &[("REDOUBT_MAX_INPUT_MIB", "lots")]);
    assert_eq!(bad.code, 2, "{}", bad.stderr);
    assert!(
        bad.stderr.contains("REDOUBT_MAX_INPUT_MIB"),
        "{}",
        bad.stderr
    );
    // Every reader is bounded: an import source and a part file too.
    let limit = [("REDOUBT_MAX_INPUT_MIB", "1")];
    let out = dir.join("net.json");
    let import = redoubt_env(
        &["import", "networkx", "/dev/zero", "--json", s(&out)],
        &limit,
    );
    assert_eq!(import.code, 2, "{}", import.stderr);
    assert!(import.stderr.contains("1 MiB"), "{}", import.stderr);
    let merge = redoubt_env(&["merge", "/dev/zero", "--json", s(&out)], &limit);
    assert_eq!(merge.code, 2, "{}", merge.stderr);
    assert!(merge.stderr.contains("1 MiB"), "{}", merge.stderr);
    assert!(!out.exists());
}

/// Source: the definition of the import's demands (one per ordered pair of distinct sites,
/// n·(n − 1) of them; hand count for n = 30: 870), checked pair by pair here, and `check`
/// of the written file reading back the network the import printed.
#[test]
fn import_writes_every_ordered_pair_and_reads_back() {
    let n = 30;
    let nodes: Vec<Value> = (0..n).map(|i| serde_json::json!({"id": i})).collect();
    let mut links: Vec<Value> = (0..n)
        .map(|i| serde_json::json!({"source": i, "target": (i + 1) % n}))
        .collect();
    links.extend(
        (0..n)
            .step_by(3)
            .map(|i| serde_json::json!({"source": i, "target": (i + 7) % n})),
    );
    let topo = serde_json::json!({"directed": false, "graph": {"name": "ring30"},
                                  "nodes": nodes, "links": links});
    let dir = TempDir::new("import");
    let src = dir.join("topo.json");
    std::fs::write(&src, topo.to_string()).unwrap();
    let out = dir.join("net.json");
    let run = redoubt(&[
        "import",
        "networkx",
        s(&src),
        "--json",
        s(&out),
        "--capacity",
        "10",
        "--processing-sites",
        "3",
        "--processing",
        "50",
        "--demand",
        "2",
        "--required-fraction",
        "0.25",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap();
    let demands = doc["demands"].as_array().unwrap();
    assert_eq!(demands.len(), 870);
    let got: BTreeSet<(String, String)> = demands
        .iter()
        .map(|d| {
            assert_eq!(d["volume"].as_f64(), Some(2.0));
            assert_eq!(d["required"].as_f64(), Some(0.5), "2 · 0.25");
            (
                d["from"].as_str().unwrap().to_string(),
                d["to"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    let want: BTreeSet<(String, String)> = (0..n)
        .flat_map(|a| (0..n).filter(move |&b| b != a).map(move |b| (a, b)))
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect();
    assert_eq!(got, want);
    let check = redoubt(&["check", s(&out)]);
    assert_eq!(check.code, 0, "{}", check.stderr);
    assert_eq!(
        check.stdout, run.stdout,
        "the file reads back as the import printed"
    );
}

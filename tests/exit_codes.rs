//! Exit statuses through the real binary, one per row of the README's table: 0 done, 1 a
//! gate failed, 2 bad input or usage, 130 interrupted, 141 standard output closed. The
//! remaining status, 3 (an internal fault: the LP backend failed, or a state the program
//! relies on did not hold), has no input that reaches it (every model the tool builds is
//! feasible and bounded) and the product has no switch to force it, so its mapping is
//! checked by the unit test `error::tests::every_kind_has_its_status`.
//!
//! Sources: the statuses 128 + SIGINT (2) = 130 and 128 + SIGPIPE (13) = 141 are the shell
//! convention for a process a signal stopped (common practice, no source; signal numbers
//! from signal(7), Linux); the shortfalls are hand calculations written beside each case.

mod common;

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{TempPath, demo, fixture, redoubt, s};

/// Two sites joined by one link of capacity 10; `a` processes 100; one demand a → b of
/// volume 5, all of it required.
const PAIR: &str = r#"{
  "name": "pair",
  "sites": [{"id": "a", "processing": 100}, {"id": "b"}],
  "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 10}],
  "demands": [{"from": "a", "to": "b", "volume": 5, "required": 5}]
}"#;

/// Hand calculation: intact, the demand is served in full (5 ≤ capacity 10, processed at
/// `a`); with link ab failed, b is cut off, so the worst shortfall is 5. A gate at 5 passes
/// (exit 0), a gate at 4.9 fails (exit 1), and the run is otherwise the same.
#[test]
fn a_gate_decides_between_0_and_1() {
    let net = TempPath::with_text("pair", PAIR);
    let pass = redoubt(&["audit", net.path(), "--quiet", "--max-shortfall", "5"]);
    assert_eq!(pass.code, 0, "{}", pass.stderr);
    let fail = redoubt(&["audit", net.path(), "--quiet", "--max-shortfall", "4.9"]);
    assert_eq!(fail.code, 1, "{}", fail.stderr);
    assert!(
        fail.stdout.contains("link:ab"),
        "the failing scenario is named:\n{}",
        fail.stdout
    );
    let check = redoubt(&["check", net.path()]);
    assert_eq!(check.code, 0, "{}", check.stderr);
}

/// Usage errors (a flag value out of range, a flag that needs another, a scenario naming
/// an element the file lacks), input errors (a file that is not a network, a missing
/// file) and an output that cannot be written all exit 2, with a message on stderr and
/// nothing on stdout; so does a command line clap refuses.
#[test]
fn bad_input_and_usage_exit_2() {
    let net = TempPath::with_text("pair-usage", PAIR);
    let not_json = TempPath::with_text("not-a-network", "{\"sites\": 3}");
    let missing = TempPath::new("missing", "json");
    let d = demo();
    let cases: Vec<Vec<&str>> = vec![
        vec!["audit", net.path(), "--threads", "0"],
        vec!["audit", net.path(), "--max-minutes", "-1"],
        vec!["audit", net.path(), "--gate-tolerance", "1"],
        vec!["audit", net.path(), "--fail", "link:nowhere"],
        vec![
            "audit",
            net.path(),
            "--shard",
            "3/2",
            "--json",
            missing.path(),
        ],
        vec!["plan", net.path(), "--budget", "-1"],
        vec!["compare", net.path(), s(&d), "--tolerance", "-1"],
        vec!["check", not_json.path()],
        vec!["check", missing.path()],
        vec!["audit", net.path(), "--json", "/proc/version/out.json"],
        vec!["audit", net.path(), "--no-such-flag"],
    ];
    for args in cases {
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}:\n{}", run.stderr);
        assert!(!run.stderr.is_empty(), "{args:?} says why");
        assert!(run.stdout.is_empty(), "{args:?} prints no report");
    }
}

/// Standard output is a pipe whose reader is already gone: the first write fails with
/// EPIPE and the run ends quietly with 141, whatever the command.
#[test]
fn closed_stdout_exits_141() {
    let d = demo();
    for args in [vec!["check", s(&d)], vec!["audit", s(&d), "--quiet"]] {
        let (reader, writer) = std::io::pipe().expect("a pipe");
        drop(reader);
        let out = Command::new(env!("CARGO_BIN_EXE_redoubt"))
            .args(&args)
            .stdout(Stdio::from(writer))
            .stderr(Stdio::piped())
            .output()
            .expect("the redoubt binary starts");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(141), "{args:?}:\n{stderr}");
        assert!(stderr.is_empty(), "quiet:\n{stderr}");
    }
}

/// SIGTERM once the run has started (its journal holds the header line): the run stops
/// at the next outage with 130 and says how to resume. The double-link-failure audit of
/// the 50-site fixture has thousands of outages, far more than finish before the signal.
#[test]
fn an_interrupted_run_exits_130() {
    let json = TempPath::new("grid-interrupted", "json");
    let journal = std::path::PathBuf::from(format!("{}.journal", json.path()));
    let grid = fixture("grid-50.json");
    let args = [
        "audit",
        s(&grid),
        "--depth",
        "2",
        "--kinds",
        "links",
        "--yes",
        "--json",
        json.path(),
    ];
    let child = Command::new(env!("CARGO_BIN_EXE_redoubt"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the redoubt binary starts");
    let start = Instant::now();
    while std::fs::read(&journal).map_or(0, |b| b.iter().filter(|&&c| c == b'\n').count()) < 1 {
        assert!(
            start.elapsed() < Duration::from_secs(300),
            "the journal was never started"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    // SAFETY: kill(2) on our own child's pid.
    let rc = unsafe { libc::kill(child.id() as libc::pid_t, libc::SIGTERM) };
    assert_eq!(rc, 0);
    let out = child.wait_with_output().expect("redoubt ends");
    let stderr = String::from_utf8_lossy(&out.stderr);
    let _ = std::fs::remove_file(&journal);
    assert_eq!(out.status.code(), Some(130), "{stderr}");
    assert!(stderr.contains("--resume"), "{stderr}");
    assert!(out.stdout.is_empty(), "no report after an interrupt");
}

//! Output that never hurts, through the binary: a closed pipe, a failed write, output paths checked before solving, threads capped, huge values printed readably, the CSV against the JSON.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use std::collections::BTreeSet;
use std::path::Path;
use std::process::Command;

use common::json::*;
use common::*;
use serde_json::Value;

/// Source: POSIX shell convention (common practice, no source): a tool stopped by a
/// closed pipe reports 128 + SIGPIPE = 141; the README (the --json file is still written).
/// The reader takes one line of a report far larger than a pipe buffer (64 KiB on Linux)
/// and closes the pipe.
#[test]
fn closed_stdout_exits_141_quietly_and_json_is_written() {
    use std::io::{BufRead, BufReader};
    let n = 24;
    let f = TempPath::with_text("ring-pipe", &ring_net(n));
    let out = TempPath::new("ring-pipe-out", "json");
    let mut child = Command::new(env!("CARGO_BIN_EXE_redoubt"))
        .args([
            "audit",
            f.path(),
            "--depth",
            "2",
            "--top",
            "100000",
            "--quiet",
            "--json",
            out.path(),
        ])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("the redoubt binary starts");
    let mut first = String::new();
    BufReader::new(child.stdout.take().expect("piped"))
        .read_line(&mut first)
        .expect("one line");
    // The reader is dropped here: the pipe is closed.
    let result = child.wait_with_output().expect("redoubt ends");
    let stderr = String::from_utf8_lossy(&result.stderr);
    // The audit text opens with its verdict line.
    assert!(first.starts_with("Verdict:"), "first line: {first}");
    assert_eq!(result.status.code(), Some(141), "stderr:\n{stderr}");
    assert!(
        stderr.is_empty(),
        "a closed pipe ends quietly, got:\n{stderr}"
    );
    // 1 + 2n + C(2n, 2) scenarios over n links and n sites (hand count).
    let pool = 2 * n;
    assert_eq!(
        scenarios(&out.read_json()).len(),
        1 + pool + pool * (pool - 1) / 2
    );
}

/// Source: POSIX `ulimit -f` (writes past the limit fail with EFBIG once SIGXFSZ is
/// ignored); the README (the old file stays intact until a complete new one replaces it).
#[test]
fn failed_write_keeps_the_old_json_intact() {
    let dir = TempDir::new("ulimit");
    let json = dir.0.join("out.json");
    let old = "{\"old\": \"complete\"}\n";
    std::fs::write(&json, old).expect("old file");
    // 8 blocks of 512 bytes: far less than the depth-2 report of the small ring.
    let script = format!(
        "ulimit -f 8; exec '{}' audit '{}' --depth 2 --quiet --json '{}' >/dev/null",
        env!("CARGO_BIN_EXE_redoubt"),
        s(&fixture("small-ring.json")),
        s(&json)
    );
    let out = Command::new("sh")
        .args(["-c", &script])
        .output()
        .expect("sh runs");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr:\n{stderr}");
    assert!(stderr.contains("out.json"), "names the file:\n{stderr}");
    assert_eq!(std::fs::read_to_string(&json).expect("still there"), old);
    // No temporary file is left behind (the journal may stay: it is valid to resume).
    let names: Vec<String> = dir
        .names()
        .into_iter()
        .filter(|n| n != "out.json" && n != "out.json.journal")
        .collect();
    assert!(names.is_empty(), "left behind: {names:?}");
    // Without the limit the same command (resuming the journal the failed run kept, which
    // is never replaced without --resume) replaces the file with the full report.
    let run = redoubt(&[
        "audit",
        s(&fixture("small-ring.json")),
        "--depth",
        "2",
        "--quiet",
        "--json",
        s(&json),
        "--resume",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert!(!scenarios(&doc).is_empty());
    assert_eq!(dir.names(), BTreeSet::from(["out.json".to_string()]));
}

/// Source: the README (refuse, exit 2, the input untouched), through the same path, a
/// different spelling of it and a symbolic link.
#[test]
fn json_naming_the_input_is_refused() {
    let dir = TempDir::new("self");
    let input = dir.0.join("net.json");
    std::fs::write(&input, PATH_NET).unwrap();
    let link = dir.0.join("alias.json");
    std::os::unix::fs::symlink(&input, &link).expect("symlink");
    let respelled = dir.0.join(".").join("net.json");
    for target in [&input, &respelled, &link] {
        let run = redoubt(&["audit", s(&input), "--quiet", "--json", s(target)]);
        assert_eq!(run.code, 2, "--json {target:?}:\n{}", run.stderr);
        assert!(run.stderr.contains("input file"), "{}", run.stderr);
        assert_eq!(std::fs::read_to_string(&input).unwrap(), PATH_NET);
    }
}

/// Source: the README (every output path is checked before any solving). The 50-site
/// fixture at depth 1 takes minutes (DEVELOPERS.md); each refusal comes in seconds.
#[test]
fn bad_output_paths_are_refused_before_solving() {
    let dir = TempDir::new("paths");
    let missing = dir.0.join("no-such-folder").join("out.json");
    // /proc refuses new files even to root.
    let unwritable = Path::new("/proc/redoubt-out.json");
    let grid = fixture("grid-50.json");
    for (target, says) in [
        (dir.0.as_path(), "directory"),
        (missing.as_path(), "does not exist"),
        (unwritable, "cannot create"),
    ] {
        let start = std::time::Instant::now();
        let run = redoubt(&["audit", s(&grid), "--quiet", "--json", s(target)]);
        assert_eq!(run.code, 2, "--json {target:?}:\n{}", run.stderr);
        assert!(run.stderr.contains(says), "{says}: {}", run.stderr);
        assert!(start.elapsed().as_secs() < 20, "refused only after solving");
        let plan = redoubt(&["plan", s(&grid), "--quiet", "--json", s(target)]);
        assert_eq!(plan.code, 2, "plan --json {target:?}:\n{}", plan.stderr);
    }
    assert!(dir.names().is_empty(), "nothing written: {:?}", dir.names());
}

/// Source: the README (capped at the core count with a note; results unchanged). The
/// core count is read here from `nproc` (coreutils), not from the product.
#[test]
fn threads_above_the_core_count_are_capped() {
    let nproc = Command::new("nproc").output().expect("nproc runs");
    let cores = String::from_utf8_lossy(&nproc.stdout).trim().to_string();
    let ring = fixture("small-ring.json");
    let mut texts = Vec::new();
    for threads in ["1", "10000"] {
        let out = TempPath::new("threads", "json");
        let start = std::time::Instant::now();
        let run = redoubt(&[
            "audit",
            s(&ring),
            "--depth",
            "2",
            "--threads",
            threads,
            "--json",
            out.path(),
        ]);
        assert_eq!(run.code, 0, "{}", run.stderr);
        assert!(
            start.elapsed().as_secs() < 60,
            "--threads {threads} too slow"
        );
        if threads == "10000" {
            assert!(
                run.stderr.contains(&format!("using {cores}")),
                "note naming {cores} cores:\n{}",
                run.stderr
            );
        }
        texts.push(std::fs::read_to_string(&out.0).unwrap());
    }
    assert!(texts[0] == texts[1], "--threads 10000 changed the JSON");
}

/// Source: the README (engineering notation past 1e9, percentages never overflow, never
/// "0.0e0"); IEEE 754 double range (common practice, no source) for the magnitudes.
#[test]
fn huge_values_print_readably() {
    let net = r#"{"name": "huge", "unit": "bit/s",
      "sites": [{"id": "a", "processing": 1e299}, {"id": "b"}],
      "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 1e299}],
      "demands": [{"from": "a", "to": "b", "volume": 1.5e299}]}"#;
    let f = TempPath::with_text("huge-text", net);
    let check = redoubt(&["check", f.path()]);
    assert_eq!(check.code, 0, "{}", check.stderr);
    assert!(check.stdout.contains("volume 150e297"), "{}", check.stdout);
    let run = redoubt(&["audit", f.path(), "--quiet", "--kinds", "links"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let text = format!("{}{}", check.stdout, run.stdout);
    for bad in ["inf", "NaN", "0.0e0"] {
        assert!(!text.contains(bad), "{bad:?} in:\n{text}");
    }
    let longest_digits = text
        .split(|c: char| !c.is_ascii_digit())
        .map(str::len)
        .max()
        .unwrap_or(0);
    assert!(
        longest_digits <= 12,
        "a {longest_digits}-digit number in:\n{text}"
    );
    // Baseline: 1e299 served of 1.5e299 required (the largest amounts a file may hold are
    // 1e300, see docs/network-format.md), 66.7% (hand computation).
    assert!(
        run.stdout.contains("serves 100e297 of 150e297"),
        "{}",
        run.stdout
    );
    assert!(run.stdout.contains("(66.7%)"), "{}", run.stdout);
}

/// A CSV reader for the test (RFC 4180 quoting), written here independently of the
/// product: returns the rows after the `#` comment lines.
fn parse_csv(text: &str) -> Vec<Vec<String>> {
    let mut rows = Vec::new();
    for line in text.lines().filter(|l| !l.starts_with('#')) {
        let (mut row, mut cur, mut quoted, mut chars) =
            (Vec::new(), String::new(), false, line.chars().peekable());
        while let Some(c) = chars.next() {
            match (c, quoted) {
                ('"', true) if chars.peek() == Some(&'"') => {
                    cur.push('"');
                    chars.next();
                }
                ('"', _) => quoted = !quoted,
                (',', false) => row.push(std::mem::take(&mut cur)),
                (c, _) => cur.push(c),
            }
        }
        row.push(cur);
        rows.push(row);
    }
    rows
}

/// CSV and JSON written by the same run agree on every scenario and field (both parsed
/// here); the CSV starts with its header row, has one row per scenario and carries the
/// caution in its last column.
#[test]
fn csv_agrees_with_json() {
    let f = TempPath::with_text("csv", &path_net_with_probabilities());
    let csv = TempPath::new("audit", "csv");
    let (_, doc) = audit_json(f.path(), &["--depth", "2", "--close", "--csv", csv.path()]);
    let text = std::fs::read_to_string(&csv.0).expect("csv written");
    assert!(text.starts_with("failed,rank,"), "{text}");
    let rows = parse_csv(&text);
    let header = &rows[0];
    assert_eq!(header.last().map(String::as_str), Some("caution"));
    assert!(
        rows[1]
            .last()
            .unwrap()
            .starts_with("Caution: a planning aid")
    );
    assert_eq!(
        rows.len() - 1,
        scenarios(&doc).len(),
        "one row per scenario"
    );
    let col = |name: &str| {
        header
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column {name}"))
    };
    for (row, sc) in rows[1..].iter().zip(scenarios(&doc)) {
        assert_eq!(
            row[col("failed")],
            failed_of(sc).join(","),
            "same order and names"
        );
        for field in [
            "served_required",
            "shortfall",
            "stranded",
            "throughput",
            "probability",
        ] {
            let got: f64 = row[col(field)].parse().unwrap();
            assert_eq!(got, num(sc, field), "{field} of {:?}", failed_of(sc));
        }
        assert_eq!(row[col("rank")], sc["rank"].to_string());
        match sc["closing"].as_object() {
            Some(c) => assert_eq!(
                row[col("closing_cost")].parse::<f64>().unwrap(),
                c["cost"].as_f64().unwrap()
            ),
            None => assert_eq!(row[col("closing_cost")], ""),
        }
        let same_as = sc
            .get("same_as")
            .map(|v| failed_of(&serde_json::json!({"failed": v})).join(","));
        assert_eq!(row[col("same_as")], same_as.unwrap_or_default());
    }
}

//! Gates through the binary (`--max-shortfall`, `--max-stranded`, `--min-served-fraction`): by hand on the path network and at the printed precision on the demo.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use common::json::*;
use common::*;

/// Source: the README (exit 1 when the gate fails, 0 otherwise); worst shortfall 6 by hand
/// (PATH_NET's table: link:bc and group:spine).
#[test]
fn max_shortfall_gate() {
    let f = TempPath::with_text("gate", PATH_NET);
    let run = redoubt(&["audit", f.path(), "--quiet", "--max-shortfall", "5.5"]);
    assert_eq!(run.code, 1, "gate at 5.5 must fail:\n{}", run.stderr);
    let run = redoubt(&["audit", f.path(), "--quiet", "--max-shortfall", "6.5"]);
    assert_eq!(run.code, 0, "gate at 6.5 must pass:\n{}", run.stderr);
    // One named scenario: site:b has shortfall 1.
    let run = redoubt(&[
        "audit",
        f.path(),
        "--quiet",
        "--fail",
        "site:b",
        "--max-shortfall",
        "0.5",
    ]);
    assert_eq!(run.code, 1, "site:b gate at 0.5:\n{}", run.stderr);
    let run = redoubt(&[
        "audit",
        f.path(),
        "--quiet",
        "--fail",
        "site:b",
        "--max-shortfall",
        "1.5",
    ]);
    assert_eq!(run.code, 0, "site:b gate at 1.5:\n{}", run.stderr);
}

fn gate_lines(stdout: &str) -> Vec<&str> {
    stdout
        .lines()
        .filter(|l| l.starts_with("PASS ") || l.starts_with("FAIL "))
        .collect()
}

/// Source: a reproduced defect (the demo's site:millbrook prints a shortfall of 14; a gate at 14
/// passes, with a PASS line naming the scenario, value and limit).
#[test]
fn gate_compares_at_the_printed_precision() {
    let run = redoubt(&[
        "audit",
        s(&demo()),
        "--quiet",
        "--fail",
        "site:millbrook",
        "--max-shortfall",
        "14",
    ]);
    assert_eq!(run.code, 0, "{}\n{}", run.stdout, run.stderr);
    let lines = gate_lines(&run.stdout);
    assert_eq!(lines.len(), 1, "{}", run.stdout);
    assert!(lines[0].starts_with("PASS --max-shortfall"), "{}", lines[0]);
    for part in ["site:millbrook", "shortfall 14 ", "limit 14 "] {
        assert!(lines[0].contains(part), "{part:?} in {}", lines[0]);
    }
    let run = redoubt(&[
        "audit",
        s(&demo()),
        "--quiet",
        "--fail",
        "site:millbrook",
        "--max-shortfall",
        "13.9",
    ]);
    assert_eq!(run.code, 1, "{}", run.stdout);
    let lines = gate_lines(&run.stdout);
    assert!(lines[0].starts_with("FAIL --max-shortfall"), "{}", lines[0]);
    assert!(lines[0].contains("exceeds the limit 13.9"), "{}", lines[0]);
}

/// Source: hand computation on PATH_NET (common practice, no source): worst stranded 8
/// (site:b), worst served fraction 5/11 = 45.455% (link:bc, before group:spine in list
/// order), worst shortfall 6 (link:bc).
#[test]
fn stranded_and_served_fraction_gates_by_hand() {
    let f = TempPath::with_text("gates", PATH_NET);
    let gate = |args: &[&str]| {
        let mut all = vec!["audit", f.path(), "--quiet"];
        all.extend_from_slice(args);
        let run = redoubt(&all);
        let lines: Vec<String> = gate_lines(&run.stdout)
            .into_iter()
            .map(String::from)
            .collect();
        (run.code, lines)
    };
    let (code, lines) = gate(&["--max-stranded", "8"]);
    assert_eq!(code, 0, "{lines:?}");
    assert!(lines[0].contains("stranded 8 Gbit/s (site:b)"), "{lines:?}");
    let (code, lines) = gate(&["--max-stranded", "7.5"]);
    assert_eq!(code, 1, "{lines:?}");
    assert!(lines[0].starts_with("FAIL --max-stranded"), "{lines:?}");
    let (code, lines) = gate(&["--min-served-fraction", "0.45"]);
    assert_eq!(code, 0, "{lines:?}");
    assert!(
        lines[0].contains("served fraction 45.455% (link:bc)"),
        "{lines:?}"
    );
    let (code, lines) = gate(&["--min-served-fraction", "46%"]);
    assert_eq!(code, 1, "{lines:?}");
    assert!(lines[0].contains("is below the limit 46%"), "{lines:?}");
    // Several gates: one line each, exit 1 when any fails.
    let (code, lines) = gate(&["--max-shortfall", "6", "--max-stranded", "1"]);
    assert_eq!(code, 1, "{lines:?}");
    assert_eq!(lines.len(), 2, "{lines:?}");
    assert!(lines[0].starts_with("PASS --max-shortfall"), "{lines:?}");
    assert!(lines[1].starts_with("FAIL --max-stranded"), "{lines:?}");
    // An explicit tolerance compares raw values: 6 is within 5.5 + 0.6.
    let (code, _) = gate(&["--max-shortfall", "5.5", "--gate-tolerance", "0.6"]);
    assert_eq!(code, 0);
    let (code, _) = gate(&["--max-shortfall", "5.5", "--gate-tolerance", "0.4"]);
    assert_eq!(code, 1);
}

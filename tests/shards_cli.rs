//! Long runs through the binary: estimates before enumerating, SIGINT and `--resume`, `--shard` and `merge`.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use std::path::PathBuf;

use common::json::ring_net;
use common::*;

/// Source: the README (SIGINT leaves a valid journal; `--resume` skips what is done and
/// writes byte-identical final files to an uninterrupted run; a torn last line is
/// ignored; a fingerprint mismatch is refused). A real audit (the demo at depth 2,
/// several hundred outages) is interrupted twice, damaged at its end, and resumed.
#[test]
fn interrupted_audit_resumes_to_identical_files() {
    let demo = demo();
    let reference = TempPath::new("resume-ref", "json");
    let full = redoubt(&[
        "audit",
        s(&demo),
        "--depth",
        "2",
        "--quiet",
        "--json",
        reference.path(),
    ]);
    assert_eq!(full.code, 0, "{}", full.stderr);
    let want_json = std::fs::read(&reference.0).unwrap();

    let dir = TempDir::new("resume");
    let json = dir.0.join("audit.json");
    let journal = dir.0.join("audit.json.journal");
    let args = ["audit", s(&demo), "--depth", "2", "--json", s(&json)];
    let resume: Vec<&str> = args.iter().copied().chain(["--resume"]).collect();

    let first = interrupt_at(&args, &journal, 40);
    assert_eq!(first.code, 130, "SIGINT exit status:\n{}", first.stderr);
    assert!(first.stderr.contains("--resume"), "{}", first.stderr);
    assert!(!json.exists(), "no final file from an interrupted run");
    let kept = journal_lines(&journal);
    assert!(kept > 40, "journal kept {kept} lines");

    // Another scenario list or other network bytes: refused, journal untouched.
    let other_depth = redoubt(&["audit", s(&demo), "--json", s(&json), "--resume"]);
    assert_eq!(other_depth.code, 2, "{}", other_depth.stderr);
    assert!(
        other_depth
            .stderr
            .contains("another network file or other options")
    );
    let edited = dir.0.join("edited.json");
    let mut bytes = std::fs::read(&demo).unwrap();
    bytes.push(b'\n');
    std::fs::write(&edited, bytes).unwrap();
    let other_file = redoubt(&[
        "audit",
        s(&edited),
        "--depth",
        "2",
        "--json",
        s(&json),
        "--resume",
    ]);
    assert_eq!(other_file.code, 2, "{}", other_file.stderr);
    assert_eq!(journal_lines(&journal), kept);

    let second = interrupt_at(&resume, &journal, kept + 150);
    assert_eq!(second.code, 130, "{}", second.stderr);
    assert!(second.stderr.contains("resuming"), "{}", second.stderr);

    // A kill in the middle of a write leaves a torn last line.
    let mut torn = std::fs::OpenOptions::new()
        .append(true)
        .open(&journal)
        .unwrap();
    std::io::Write::write_all(&mut torn, b"{\"outage\": 3, \"evaluation\": {\"served_req").unwrap();
    drop(torn);

    let last = redoubt(&resume);
    assert_eq!(last.code, 0, "{}", last.stderr);
    assert!(
        std::fs::read(&json).unwrap() == want_json,
        "resumed JSON differs from the uninterrupted run"
    );
    assert!(last.stdout == full.stdout, "resumed report differs");
    assert!(
        !journal.exists(),
        "journal removed once the files are written"
    );
}

/// Source: the README (estimate the work from the scenario count and a first timed solve;
/// refuse beyond a limit unless --yes).
#[test]
fn long_runs_are_estimated_and_refused_without_yes() {
    let demo = demo();
    let args = ["audit", s(&demo), "--quiet", "--max-minutes", "0.00001"];
    let run = redoubt(&args);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("estimated"), "{}", run.stderr);
    assert!(run.stderr.contains("--yes"), "{}", run.stderr);
    assert!(run.stdout.is_empty());
    let mut yes = args.to_vec();
    yes.push("--yes");
    let run = redoubt(&yes);
    assert_eq!(run.code, 0, "{}", run.stderr);
}

/// Source: a measured defect (`--depth 2` on a 400-site file took 1.75 GB before the first
/// solve); the scenario count is the binomial sum 1 + n + C(n, 2) over n = 400 sites + 400
/// ring links, computed here. The run is counted and estimated before any scenario is
/// enumerated, and refused without --yes.
#[test]
fn depth_2_on_400_sites_is_estimated_before_enumerating() {
    let net = TempPath::with_text("ring-400", &ring_net(400));
    let run = redoubt(&[
        "audit",
        net.path(),
        "--depth",
        "2",
        "--max-minutes",
        "0.001",
    ]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    let n: u64 = 800;
    let count = 1 + n + n * (n - 1) / 2;
    assert!(
        run.stderr.contains(&format!("{count} scenarios")),
        "{count}: {}",
        run.stderr
    );
    assert!(run.stderr.contains("--yes"), "{}", run.stderr);
    assert!(run.stdout.is_empty());
}

/// Source: the README (`merge` of the shard files gives exactly the JSON an unsharded run
/// writes); the reference is the unsharded run of the same binary, compared byte for byte,
/// with shards run at different thread counts and merged in another order.
#[test]
fn sharded_audit_merges_to_the_unsharded_files() {
    let demo = demo();
    let dir = TempDir::new("shards");
    let whole = dir.0.join("whole.json");
    let base = ["audit", s(&demo), "--depth", "2", "--quiet"];
    let full: Vec<&str> = base.iter().copied().chain(["--json", s(&whole)]).collect();
    let reference = redoubt(&full);
    assert_eq!(reference.code, 0, "{}", reference.stderr);
    let parts: Vec<PathBuf> = (1..=3)
        .map(|i| dir.0.join(format!("part-{i}.jsonl")))
        .collect();
    for (i, part) in parts.iter().enumerate() {
        let shard = format!("{}/3", i + 1);
        let threads = if i == 1 { "1" } else { "2" };
        let args: Vec<&str> = base
            .iter()
            .copied()
            .chain(["--shard", &shard, "--threads", threads, "--json", s(part)])
            .collect();
        let run = redoubt(&args);
        assert_eq!(run.code, 0, "{}", run.stderr);
        assert!(
            run.stdout.contains(&format!("shard {shard}")),
            "{}",
            run.stdout
        );
        assert!(part.exists() && !dir.0.join(format!("part-{}.jsonl.journal", i + 1)).exists());
    }
    let merged = dir.0.join("merged.json");
    let run = redoubt(&[
        "merge",
        s(&parts[2]),
        s(&parts[0]),
        s(&parts[1]),
        "--json",
        s(&merged),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        std::fs::read(&merged).unwrap() == std::fs::read(&whole).unwrap(),
        "merged JSON differs from the unsharded run's"
    );
    assert_eq!(run.stdout, reference.stdout, "merged report differs");

    // A shard missing, a shard given twice, a part of another run: refused.
    let missing = redoubt(&["merge", s(&parts[0]), s(&parts[1])]);
    assert_eq!(missing.code, 2, "{}", missing.stderr);
    assert!(
        missing.stderr.contains("shard 3/3 is missing"),
        "{}",
        missing.stderr
    );
    let twice = redoubt(&["merge", s(&parts[0]), s(&parts[0]), s(&parts[1])]);
    assert_eq!(twice.code, 2, "{}", twice.stderr);
    assert!(twice.stderr.contains("twice"), "{}", twice.stderr);
    let other = dir.0.join("other.jsonl");
    let run = redoubt(&[
        "audit",
        s(&demo),
        "--depth",
        "1",
        "--quiet",
        "--shard",
        "1/3",
        "--json",
        s(&other),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let mixed = redoubt(&["merge", s(&other), s(&parts[1]), s(&parts[2])]);
    assert_eq!(mixed.code, 2, "{}", mixed.stderr);
    assert!(mixed.stderr.contains("another run"), "{}", mixed.stderr);
    for bad in ["0/3", "4/3", "3", "a/b"] {
        let run = redoubt(&["audit", s(&demo), "--shard", bad, "--json", s(&other)]);
        assert_eq!(run.code, 2, "--shard {bad}: {}", run.stderr);
    }
    // A part needs --json; gates and --close belong to whole runs.
    for extra in [&["--close"][..], &["--max-shortfall", "1"][..], &[][..]] {
        let mut args = vec!["audit", s(&demo), "--shard", "1/2"];
        if !extra.is_empty() {
            args.extend(["--json", s(&other)]);
        }
        args.extend_from_slice(extra);
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
    }
}

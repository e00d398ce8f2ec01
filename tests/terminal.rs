//! The README's commands as a person runs them: in a terminal (a pseudo-terminal made by
//! util-linux `script`), with a time limit, so a hang is a failure. Piped output never draws
//! the progress bar, which is why these runs exist beside the piped ones.
//!
//! Outside references: the README's commands themselves; the terminal semantics of
//! Ctrl-C (the terminal sends SIGINT to the foreground program; POSIX termios, common
//! practice, no source needed beyond the standard); exit status 130 for an interrupt
//! (128 + SIGINT, shell convention, common practice, no source).

mod common;

use std::time::Duration;

use common::{TempPath, demo, fixture, in_terminal, s, tail};

/// Far above any of these runs in the test profile on a 2-core machine, far below "forever".
const LIMIT: Duration = Duration::from_secs(300);

/// The lines a person sees at the end: the terminal's carriage returns and the bar's
/// erase sequences resolved to what stays on screen (text after the last `\r` of a line).
fn visible_lines(screen: &str) -> Vec<String> {
    screen
        .split('\n')
        .map(|l| {
            let l = l.trim_end_matches('\r');
            let last = l.rsplit('\r').next().unwrap_or(l);
            strip_escapes(last)
        })
        .collect()
}

/// Removes ANSI CSI escape sequences (`ESC [ … final byte`).
fn strip_escapes(s: &str) -> String {
    let mut out = String::new();
    let mut chars = s.chars().peekable();
    while let Some(c) = chars.next() {
        if c == '\u{1b}' {
            if chars.peek() == Some(&'[') {
                chars.next();
                for d in chars.by_ref() {
                    if ('@'..='~').contains(&d) {
                        break;
                    }
                }
            }
            continue;
        }
        out.push(c);
    }
    out
}

fn assert_finished(args: &[&str]) -> Vec<String> {
    let run = in_terminal(args, LIMIT, None);
    assert_eq!(
        run.code,
        0,
        "redoubt {args:?} on a terminal exited {}:\n{}",
        run.code,
        tail(&run.screen, 3000)
    );
    visible_lines(&run.screen)
}

#[test]
fn readme_audit_finishes_on_a_terminal_with_the_verdict_first_and_the_bar_cleared() {
    let lines = assert_finished(&["audit", s(&demo())]);
    let text: Vec<&String> = lines.iter().filter(|l| !l.trim().is_empty()).collect();
    assert!(
        text.first().is_some_and(|l| l.starts_with("Verdict:")),
        "the first line a person sees is the verdict: {:?}",
        text.first()
    );
    assert!(
        !lines.iter().any(|l| l.contains("solving [")),
        "the progress bar is cleared when the run ends"
    );
    // An unsized pseudo-terminal reports 0 columns: the README promises 100 then, not the
    // 40-column minimum.
    let widest = lines.iter().map(|l| l.chars().count()).max().unwrap_or(0);
    assert!(
        widest > 60 && widest <= 100,
        "text fits 100 columns and uses them: widest line {widest}"
    );
}

#[test]
fn plan_compare_check_and_close_finish_on_a_terminal() {
    let d = demo();
    for (args, expect) in [
        (vec!["check", s(&d)], "valid"),
        (vec!["plan", s(&d)], "planning aid"),
        (vec!["compare", s(&d), s(&d)], "planning aid"),
        (vec!["audit", s(&d), "--close"], "planning aid"),
        (vec!["audit", s(&d), "--routing", "steered"], "planning aid"),
    ] {
        let lines = assert_finished(&args);
        assert!(
            lines.iter().any(|l| l.contains(expect)),
            "redoubt {args:?}: {expect:?} reaches the terminal"
        );
    }
}

#[test]
fn ctrl_c_on_a_terminal_stops_the_audit_and_resume_finishes_it() {
    let json = TempPath::new("terminal-interrupt", "json");
    let journal = format!("{}.journal", json.path());
    let net = fixture("grid-50.json");
    // Every single and double site failure of grid-50 (1,276 scenarios): several times
    // longer than the 3 s before Ctrl-C in the test profile (its depth-1 audit is not).
    let args = [
        "audit",
        s(&net),
        "--depth",
        "2",
        "--kinds",
        "sites",
        "--json",
        json.path(),
    ];
    let run = in_terminal(&args, LIMIT, Some((Duration::from_secs(3), b"\x03")));
    assert_eq!(
        run.code,
        130,
        "the first Ctrl-C interrupts (exit 130):\n{}",
        tail(&run.screen, 2000)
    );
    assert!(
        run.elapsed < Duration::from_secs(3 + 60),
        "stopped soon after Ctrl-C: {:?}",
        run.elapsed
    );
    assert!(run.screen.contains("--resume"), "the resume hint is shown");
    assert!(
        std::path::Path::new(&journal).exists(),
        "the journal is kept for --resume"
    );
    let mut resume = args.to_vec();
    resume.push("--resume");
    let lines = assert_finished(&resume);
    assert!(lines.iter().any(|l| l.starts_with("Verdict:")));
    assert!(json.read_json()["scenarios"].is_array());
    assert!(
        !std::path::Path::new(&journal).exists(),
        "the journal is removed once the files are written"
    );
}

/// The rates the progress bar drew on `screen` (the text between `done, ` and `/s` of each
/// redraw, escapes removed).
fn drawn_rates(screen: &str) -> Vec<String> {
    screen
        .split(['\r', '\n'])
        .map(strip_escapes)
        .filter_map(|l| {
            let rest = &l[l.find(" done, ")? + " done, ".len()..];
            Some(rest[..rest.find("/s")?].to_string())
        })
        .collect()
}

/// The bar's rate is a whole number of scenarios a second, grouped by thousands
/// (`12,879/s`, not `12,879.2963/s`): on a terminal, every redraw of a run long enough to
/// draw several (grid-50's double site failures, stopped by Ctrl-C after 3 s, as above)
/// shows only digits and commas, or `<1`, before `/s`.
#[test]
fn the_progress_bar_shows_a_whole_rate() {
    let net = fixture("grid-50.json");
    let args = ["audit", s(&net), "--depth", "2", "--kinds", "sites"];
    let run = in_terminal(&args, LIMIT, Some((Duration::from_secs(3), b"\x03")));
    assert_eq!(run.code, 130, "{}", tail(&run.screen, 2000));
    let rates = drawn_rates(&run.screen);
    assert!(
        !rates.is_empty(),
        "the bar was drawn: {}",
        tail(&run.screen, 2000)
    );
    for r in &rates {
        let whole = !r.is_empty() && r.chars().all(|c| c.is_ascii_digit() || c == ',');
        assert!(whole || r == "<1", "rate {r:?} has no fractional digits");
    }
}

//! Journal round trips and damaged lines (unit tests of [`super`]).

use super::*;
use crate::scenario::{Element, Scenario};

/// Source: the journal's own contract (a line read back by offset is the evaluation
/// recorded, bit for bit, also after a resume re-reads the file), checked against the
/// evaluations solved here.
#[test]
fn lines_read_back_by_offset_equal_what_was_recorded() {
    let net = crate::model::test_ring();
    let evals: Vec<Evaluation> = [
        vec![],
        vec![Element::Link(0.into())],
        vec![Element::Site(2.into())],
    ]
    .iter()
    .map(|els| crate::solve::evaluate(&net, &Scenario::new(&net, els).outage(&net)).unwrap())
    .collect();
    let dir = std::env::temp_dir().join(format!("redoubt-journal-{}", std::process::id()));
    fs::create_dir_all(&dir).unwrap();
    let path = dir.join("j.journal");
    let (j, _, _) = Journal::open(&path, "fp", 3, false).unwrap();
    // Recorded out of order, outage 1 twice: the last line counts.
    assert!(
        j.record(OutageId(2), &evals[2])
            && j.record(OutageId(1), &evals[0])
            && j.record(OutageId(1), &evals[1])
    );
    let r = j.reader().unwrap();
    assert_eq!(r.read(OutageId(0)).unwrap(), None);
    assert_eq!(r.read(OutageId(1)).unwrap().as_ref(), Some(&evals[1]));
    assert_eq!(r.read(OutageId(2)).unwrap().as_ref(), Some(&evals[2]));
    drop((j, r));
    let (j, restored, opened) = Journal::open(&path, "fp", 3, true).unwrap();
    assert_eq!(opened, Opened::Resumed(2));
    assert_eq!(
        restored.restored[1].as_ref().map(|r| &r.evaluation),
        Some(&evals[1])
    );
    assert_eq!(restored.restored[1].as_ref().map(|r| r.line), Some(4));
    assert!(restored.damaged.is_empty());
    assert!(j.record(OutageId(0), &evals[0]));
    let r = j.reader().unwrap();
    for (k, e) in evals.iter().enumerate() {
        let k = OutageId(k);
        assert_eq!(r.read(k).unwrap().as_ref(), Some(e), "outage {k}");
        assert_eq!(j.line(k).unwrap(), to_line(k, e));
    }
    let _ = fs::remove_dir_all(&dir);
}

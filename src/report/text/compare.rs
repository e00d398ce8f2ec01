//! The `compare` screen: worse, better, newly short, added and removed risks.

#[allow(unused_imports)]
use super::*;

/// `baseline` for an empty failed list, else the names joined with ` + `.
pub(crate) fn scenario_words(failed: &[String]) -> String {
    if failed.is_empty() {
        "baseline".into()
    } else {
        failed.join(" + ")
    }
}

/// A signed change as printed: `+2`, `-1.5`, `0`.
pub(crate) fn signed(x: f64) -> String {
    if x > 0.0 {
        format!("+{}", num(x))
    } else {
        num(x)
    }
}

/// The `compare` exporter: the verdict first, the baselines, the scenarios that got worse
/// and better, the added and removed risks, the elements added and removed, the caution.
/// `before`/`after` are the two baselines (with `--down`, the down states).
pub fn write_compare(
    out: &mut dyn Write,
    c: &crate::compare::Comparison,
    before: &Evaluation,
    after: &Evaluation,
    top: usize,
) -> io::Result<()> {
    // The lines, written here first, then wrapped to the screen width into `out`.
    let mut buf: Vec<u8> = Vec::new();
    let w = &mut buf;
    let u = &c.unit;
    writeln!(w, "{}", verdict_line(c))?;
    writeln!(
        w,
        "Before: {}; after: {}.{}",
        c.before_name,
        c.after_name,
        if c.down.is_empty() {
            String::new()
        } else {
            format!(" Kept down on both sides: {}.", c.down.join(", "))
        }
    )?;
    writeln!(
        w,
        "Baseline shortfall {} → {}, stranded {} → {}, throughput {} → {}.",
        num(before.shortfall),
        amount(after.shortfall, u),
        num(before.stranded),
        amount(after.stranded, u),
        num(before.throughput),
        amount(after.throughput, u)
    )?;
    file_changes(w, c, top)?;
    let changes = |title: &str, list: &[crate::compare::Change]| -> String {
        let mut t = table(&CHANGE_COLUMNS);
        for ch in list.iter().take(top) {
            t.add_row(vec![
                Cell::new(change_words(&ch.failed, ch.matrix.as_deref())),
                Cell::new(num(ch.before.shortfall)),
                Cell::new(num(ch.after.shortfall)),
                Cell::new(signed(ch.delta_shortfall)),
                Cell::new(num(ch.before.stranded)),
                Cell::new(num(ch.after.stranded)),
            ]);
        }
        right(&mut t, &[1, 2, 3, 4, 5]);
        titled_table(
            &format!("{title} ("),
            &format!("; amounts in {u}"),
            list.len(),
            top,
            &mut t,
        )
    };
    if !c.new_short.is_empty() {
        let title = format!(
            "Newly short: short after the change and not before, a new point of failure \
             that {}",
            if c.allow_new_short {
                "--allow-new-short lets pass"
            } else {
                "fails the compare unless --allow-new-short"
            }
        );
        w.write_all(changes(&title, &c.new_short).as_bytes())?;
    }
    if !c.worse.is_empty() {
        w.write_all(changes("Got worse", &c.worse).as_bytes())?;
    }
    if !c.better.is_empty() {
        w.write_all(changes("Got better", &c.better).as_bytes())?;
    }
    let sided = |title: &str, list: &[crate::compare::OneSided]| -> String {
        let mut t = table(&[
            "failed",
            &format!("shortfall ({u})"),
            &format!("stranded ({u})"),
        ]);
        for o in list.iter().take(top) {
            t.add_row(vec![
                Cell::new(change_words(&o.failed, o.matrix.as_deref())),
                Cell::new(num(o.values.shortfall)),
                Cell::new(num(o.values.stranded)),
            ]);
        }
        right(&mut t, &[1, 2]);
        titled_table(&format!("{title} ("), "", list.len(), top, &mut t)
    };
    if !c.added_risks.is_empty() {
        w.write_all(
            sided(
                "Added risks: scenarios that name an element only the new network has",
                &c.added_risks,
            )
            .as_bytes(),
        )?;
    }
    if !c.removed_risks.is_empty() {
        w.write_all(
            sided(
                "Removed risks: scenarios that name an element the new network no longer has",
                &c.removed_risks,
            )
            .as_bytes(),
        )?;
    }
    if let Some(h) = &c.headroom {
        w.write_all(crate::report::headroom::compare_text(h, top).as_bytes())?;
    }
    writeln!(
        w,
        "\nElements added: {}.\nElements removed: {}.",
        first_k(c.elements_added.iter().cloned(), 10),
        first_k(c.elements_removed.iter().cloned(), 10)
    )?;
    writeln!(w, "{}", crate::report::caution_of(c.chains))?;
    out.write_all(crate::report::screen::finish(&String::from_utf8_lossy(&buf)).as_bytes())
}

/// The section "What changed in the file": one row per changed field (`link:l3 capacity
/// 100 → 10`), at most `top` rows, then how many more; nothing when the files are equal
/// in every compared field.
fn file_changes(w: &mut dyn Write, c: &crate::compare::Comparison, top: usize) -> io::Result<()> {
    let list = &c.file_changes;
    if list.is_empty() {
        return writeln!(
            w,
            "\nThe two files have the same sites, links, groups and demands."
        );
    }
    let mut t = table(&["element", "field", "before", "after"]);
    for e in list.iter().take(top) {
        t.add_row(vec![
            Cell::new(&e.element),
            Cell::new(e.field),
            Cell::new(edit_value(&e.before)),
            Cell::new(edit_value(&e.after)),
        ]);
    }
    writeln!(
        w,
        "\nWhat changed in the file ({} change{}, first {}; amounts in {}):\n{}",
        list.len(),
        if list.len() == 1 { "" } else { "s" },
        top.min(list.len()),
        c.unit,
        render(&mut t, &[])
    )
}

/// The verdict sentence of `compare` (PASS or FAIL, then the counts), shared by the text
/// and the `--report` pages.
pub(crate) fn verdict_line(c: &crate::compare::Comparison) -> String {
    let u = &c.unit;
    let plural = |n: usize| if n == 1 { "" } else { "s" };
    let verdict = if c.passed() { "PASS" } else { "FAIL" };
    format!(
        "{verdict} compare: {} of {} matched scenario{} got worse by more than {} \
         (shortfall or stranded, as printed); {} newly short{}; {} better; {} added risk{}, \
         {} removed{}.",
        c.worse.len(),
        c.matched,
        plural(c.matched),
        amount(c.tolerance, u),
        c.new_short.len(),
        if c.allow_new_short && !c.new_short.is_empty() {
            " (allowed)"
        } else {
            ""
        },
        c.better.len(),
        c.added_risks.len(),
        plural(c.added_risks.len()),
        c.removed_risks.len(),
        match c.headroom.as_ref().and_then(|h| h.gate) {
            Some(g) if g.passed => "; --min-headroom met",
            Some(_) => "; --min-headroom not met",
            None => "",
        }
    )
}

/// One side of a changed field as printed: a number as [`num`] writes it, a text as it
/// is (`none` when empty), `—` for a side without the field or the element.
pub(crate) fn edit_value(v: &Option<crate::model::diff::Value>) -> String {
    use crate::model::diff::Value;
    match v {
        None => "—".to_string(),
        Some(Value::Number(x)) => num(*x),
        Some(Value::Text(t)) if t.is_empty() => "none".to_string(),
        Some(Value::Text(t)) => t.clone(),
    }
}

/// A compared scenario as printed: [`scenario_words`], then ` under matrix ID` for files
/// with `matrices`.
/// The columns of a table of changed scenarios (the terminal's and the compare page's).
pub(crate) const CHANGE_COLUMNS: [&str; 6] = [
    "failed",
    "shortfall before",
    "after",
    "change",
    "stranded before",
    "after",
];

/// A table of `n` scenarios (the first `top` shown) under its title line:
/// `\n{opening}{n} scenario(s), top {k}{extra}):\n{table}\n`. O(table).
fn titled_table(
    opening: &str,
    extra: &str,
    n: usize,
    top: usize,
    t: &mut comfy_table::Table,
) -> String {
    format!(
        "\n{opening}{n} scenario{}, top {}{extra}):\n{}\n",
        plural(n),
        top.min(n),
        render(t, &[])
    )
}

pub(crate) fn change_words(failed: &[String], matrix: Option<&str>) -> String {
    match matrix {
        Some(m) => format!("{} under matrix {m}", scenario_words(failed)),
        None => scenario_words(failed),
    }
}

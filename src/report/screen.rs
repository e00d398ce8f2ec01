//! The terminal's shape: how wide a screen is, our table style, and wrapping of prose so
//! every line fits without breaking a name.
//!
//! Width: the `COLUMNS` environment variable when it holds a number, else the terminal's
//! size when standard output is one, else [`DEFAULT_WIDTH`]. Tables keep every cell that
//! holds a name or a number on one line (a column is at least as wide as its widest such
//! cell) and wrap free text at spaces; prose lines wrap at spaces too. Nothing is coloured,
//! so `NO_COLOR` has nothing to turn off.

use comfy_table::{
    Cell, CellAlignment, ColumnConstraint, ContentArrangement, ContentLineStyle, LineStyle, Table,
    TableStyle, Width,
};

/// Width used when neither `COLUMNS` nor the terminal tells.
pub const DEFAULT_WIDTH: usize = 100;

/// Narrowest width honoured from `COLUMNS` (below it, tables could not hold a name).
pub const MIN_WIDTH: usize = 40;

/// Marks a line that belongs to a table (already fitted; never wrapped again). Removed by
/// [`finish`] before anything is written.
const TABLE_LINE: char = '\u{1}';

/// Spaces after each cell's text (with the space of the column junction, two between
/// columns).
const RIGHT_PAD: usize = 1;

/// Room kept for a free-text column (when its text is that long) before headers are
/// given their whole width.
const FREE_ROOM: usize = 40;

/// Our table style: a thin rule under the header, columns set apart by space alone and a
/// thin closing rule; no side borders, no column rules, no double lines.
const STYLE: TableStyle = TableStyle::new()
    .header_lines(ContentLineStyle::none().junction(' '))
    .header_separator(LineStyle::none().fill('─').junction(' '))
    .content_lines(ContentLineStyle::none().junction(' '))
    .bottom_border(LineStyle::none().fill('─').junction(' '));

/// The screen width in columns (see the module comment).
pub fn width() -> usize {
    if let Some(w) = std::env::var("COLUMNS")
        .ok()
        .and_then(|c| c.trim().parse::<usize>().ok())
    {
        return w.max(MIN_WIDTH);
    }
    // A pseudo-terminal nobody sized reports 0 columns: that is "unknown", not "narrow".
    Table::new()
        .width()
        .filter(|&w| w > 0)
        .map_or(DEFAULT_WIDTH, usize::from)
        .max(MIN_WIDTH)
}

/// A new table in our style with this header.
pub fn table<S: ToString>(header: &[S]) -> Table {
    let mut t = Table::new();
    t.load_style(STYLE)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(u16::try_from(width()).unwrap_or(u16::MAX))
        .set_header(header.iter().map(|h| Cell::new(h.to_string())));
    t
}

/// Right-aligns the numeric columns `cols`.
pub fn right(t: &mut Table, cols: &[usize]) {
    for &c in cols {
        if let Some(col) = t.column_mut(c) {
            col.set_cell_alignment(CellAlignment::Right);
        }
    }
}

/// Renders `t` fitted to the screen: every column but the `free` ones is exactly as wide as
/// its widest cell or header word (names and numbers are never broken, headers wrap at
/// spaces); the `free` ones take the rest, at least their longest word, and wrap at
/// spaces. The lines are marked for [`finish`].
pub fn render(t: &mut Table, free: &[usize]) -> String {
    let columns = t.column_count();
    let mut widest = vec![0usize; columns];
    let mut longest_word = vec![0usize; columns];
    let mut header_word = vec![0usize; columns];
    if let Some(h) = t.header() {
        for (c, cell) in h.cell_iter().enumerate().take(columns) {
            for word in cell.content().split_whitespace() {
                header_word[c] = header_word[c].max(word.chars().count());
            }
        }
    }
    let mut header_full = vec![0usize; columns];
    if let Some(h) = t.header() {
        for (c, cell) in h.cell_iter().enumerate().take(columns) {
            header_full[c] = cell.content().chars().count();
        }
    }
    for row in t.row_iter() {
        for (c, cell) in row.cell_iter().enumerate().take(columns) {
            let text = cell.content();
            for line in text.lines() {
                widest[c] = widest[c].max(line.chars().count());
            }
            for word in text.split_whitespace() {
                longest_word[c] = longest_word[c].max(word.chars().count());
            }
        }
    }
    // Tight widths first (a header wraps at its spaces); then, left to right, a header is
    // given its whole width while the table still fits.
    let mut want: Vec<usize> = (0..columns)
        .map(|c| {
            let body = if free.contains(&c) {
                longest_word[c]
            } else {
                widest[c]
            };
            body.max(header_word[c]) + RIGHT_PAD
        })
        .collect();
    let screen = width();
    let junctions = columns.saturating_sub(1);
    for c in 0..columns {
        let reserve: usize = free
            .iter()
            .filter(|&&f| f < columns)
            .map(|&f| {
                (widest[f] + RIGHT_PAD)
                    .min(FREE_ROOM)
                    .saturating_sub(want[f])
            })
            .sum();
        let total: usize = want.iter().sum::<usize>() + junctions + reserve;
        let whole = header_full[c] + RIGHT_PAD;
        if !free.contains(&c) && whole > want[c] && total + whole - want[c] <= screen {
            want[c] = whole;
        }
    }
    for (c, &w) in want.iter().enumerate() {
        // The boundary counts the cell padding too.
        let floor = u16::try_from(w).unwrap_or(u16::MAX);
        if let Some(col) = t.column_mut(c) {
            col.set_padding((0, RIGHT_PAD as u16));
            col.set_constraint(if free.contains(&c) {
                ColumnConstraint::LowerBoundary(Width::Fixed(floor))
            } else {
                // Exactly as wide as its widest cell: its header wraps at spaces instead.
                ColumnConstraint::Absolute(Width::Fixed(floor))
            });
        }
    }
    t.to_string()
        .lines()
        .map(|l| format!("{TABLE_LINE}{}", l.trim_end()))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Wraps `line` at spaces to `width` columns; continuation lines keep its indentation. A
/// word longer than the width stays whole on its own line.
pub fn wrap(line: &str, width: usize) -> Vec<String> {
    if line.chars().count() <= width {
        return vec![line.to_string()];
    }
    let indent: String = line.chars().take_while(|c| *c == ' ').collect();
    let mut out = Vec::new();
    let mut cur = indent.clone();
    for word in line.split(' ').filter(|w| !w.is_empty()) {
        let len = cur.chars().count();
        let fresh = len == indent.chars().count();
        if !fresh && len + 1 + word.chars().count() > width {
            out.push(std::mem::replace(&mut cur, indent.clone()));
        }
        if cur.chars().count() > indent.chars().count() {
            cur.push(' ');
        }
        cur.push_str(word);
    }
    out.push(cur);
    out
}

/// The screen text of a report: prose lines wrapped to [`width`], table lines as rendered
/// (marks removed).
pub fn finish(text: &str) -> String {
    let w = width();
    let mut out = String::with_capacity(text.len() + text.len() / 16);
    for line in text.split_inclusive('\n') {
        let (body, nl) = match line.strip_suffix('\n') {
            Some(b) => (b, "\n"),
            None => (line, ""),
        };
        if let Some(t) = body.strip_prefix(TABLE_LINE) {
            out.push_str(t);
        } else {
            out.push_str(&wrap(body, w).join("\n"));
        }
        out.push_str(nl);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hand-worked: "aa bb cc" at width 5 is "aa bb" and "cc"; a 7-letter word stays whole.
    #[test]
    fn wraps_at_spaces_and_keeps_long_words() {
        assert_eq!(wrap("aa bb cc", 5), vec!["aa bb", "cc"]);
        assert_eq!(wrap("x abcdefg y", 5), vec!["x", "abcdefg", "y"]);
        assert_eq!(wrap("  aa bb cc", 7), vec!["  aa bb", "  cc"]);
    }
}

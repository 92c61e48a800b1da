//! The plain-text result block: aligned columns for consoles and `headroom run`.

use super::sweep::{columns, heading, left_out_text, table_rows};
use super::{cautions, diagnostic_warnings, signed_margin, split_number_unit, RowTexts};
use unicode_width::UnicodeWidthStr;
use worksheet_lang::results::{CellReport, CheckRow, Shown, SweepTable, ValueRow};

const INDENT: &str = "  ";
const PASS: &str = "✓ pass";
const FAIL: &str = "✗ FAIL";

#[derive(Clone, Copy)]
enum Align {
    Left,
    Right,
}

/// Rows of cells laid out in columns. `gaps[i]` is written before column `i` (ignored for the
/// first); a column that is empty in every row is left out with its gap.
struct Grid<'a> {
    align: &'a [Align],
    gaps: &'a [&'a str],
    rows: Vec<Vec<String>>,
}

impl Grid<'_> {
    fn lines(&self) -> Vec<String> {
        let ncol = self.align.len();
        let mut widths = vec![0usize; ncol];
        // Each cell's display width, measured once.
        let cell_widths: Vec<Vec<usize>> = self
            .rows
            .iter()
            .map(|row| row.iter().map(|c| display_width(c)).collect())
            .collect();
        for row in &cell_widths {
            for (w, cell) in widths.iter_mut().zip(row) {
                *w = (*w).max(*cell);
            }
        }
        let pad = |line: &mut String, mut n: usize| {
            // Whole runs of spaces at a time rather than one character at a time.
            const SPACES: &str = "                                ";
            while n > 0 {
                let k = n.min(SPACES.len());
                line.push_str(&SPACES[..k]);
                n -= k;
            }
        };
        self.rows
            .iter()
            .zip(&cell_widths)
            .map(|(row, row_widths)| {
                let mut line = String::from(INDENT);
                let mut first = true;
                for (i, (cell, width)) in row.iter().zip(row_widths).enumerate().take(ncol) {
                    if widths[i] == 0 {
                        continue;
                    }
                    if !first {
                        line.push_str(self.gaps[i]);
                    }
                    first = false;
                    match self.align[i] {
                        Align::Left => {
                            line.push_str(cell);
                            pad(&mut line, widths[i] - width);
                        }
                        Align::Right => {
                            pad(&mut line, widths[i] - width);
                            line.push_str(cell);
                        }
                    }
                }
                line.truncate(line.trim_end().len());
                line
            })
            .collect()
    }
}

/// Columns a cell takes in a terminal. Printable ASCII takes one column a byte, so most cells
/// (names, numbers, unit symbols) skip the Unicode width tables.
fn display_width(s: &str) -> usize {
    if printable_ascii(s) {
        s.len()
    } else {
        s.width()
    }
}

fn printable_ascii(s: &str) -> bool {
    s.bytes().all(|b| (b' '..=b'~').contains(&b))
}

/// Notes and messages are one line in a table: runs of white space become one space.
fn one_line(s: &str) -> String {
    let single_spaced =
        printable_ascii(s) && !s.contains("  ") && !s.starts_with(' ') && !s.ends_with(' ');
    if single_spaced {
        return s.to_string();
    }
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

const VALUE_ALIGN: &[Align] = &[
    Align::Left,
    Align::Right,
    Align::Left,
    Align::Left,
    Align::Left,
];
const VALUE_GAPS: &[&str] = &["", "  ", " ", "   ", "   "];

fn value_cells(v: &ValueRow, t: &RowTexts) -> Vec<String> {
    let (number, unit, range) = match &v.shown {
        Shown::Number { bounds, .. } => {
            let (n, u) = split_number_unit(&t.value);
            let mut range = t.range.clone().unwrap_or_default();
            if bounds.as_ref().is_some_and(|b| b.conservative) && !range.is_empty() {
                range.push_str(" (conservative)");
            }
            // A sizing result leads with its worst case; the range column says so.
            if let Some(note) = &t.worst {
                range = format!("{note}; {range}");
            }
            (n.to_string(), u.to_string(), range)
        }
        Shown::Text(_) | Shown::Other(_) => (t.value.clone(), String::new(), String::new()),
    };
    vec![one_line(&v.name), number, unit, range, one_line(&v.note)]
}

const CHECK_ALIGN: &[Align] = &[
    Align::Left,
    Align::Left,
    Align::Left,
    Align::Right,
    Align::Left,
    Align::Left,
    Align::Left,
];
const CHECK_GAPS: &[&str] = &["", "  ", "   ", " ", " ", "   ", "   "];

fn check_cells(c: &CheckRow) -> Vec<String> {
    let margin = signed_margin(c);
    let (n, u) = split_number_unit(&margin);
    let (worst, limit) = c.side_texts();
    let mut detail = format!("worst {worst}, limit {limit}");
    if c.conservative {
        detail.push_str(" (conservative)");
    }
    vec![
        if c.passed { PASS } else { FAIL }.to_string(),
        one_line(&c.text),
        "margin".to_string(),
        n.to_string(),
        u.to_string(),
        detail,
        one_line(&c.note),
    ]
}

/// The result block; `texts[i]` are the display texts of `r.values[i]`.
pub(super) fn report(r: &CellReport, texts: &[RowTexts]) -> String {
    let mut sections: Vec<String> = Vec::new();

    let rows = || r.values.iter().zip(texts);
    let inputs: Vec<(&ValueRow, &RowTexts)> = rows().filter(|(v, _)| v.given).collect();
    let derived: Vec<(&ValueRow, &RowTexts)> = rows().filter(|(v, _)| !v.given).collect();
    // One grid for both, so inputs and values share their columns.
    let grid = Grid {
        align: VALUE_ALIGN,
        gaps: VALUE_GAPS,
        rows: inputs
            .iter()
            .chain(&derived)
            .map(|(v, t)| value_cells(v, t))
            .collect(),
    };
    let mut lines = grid.lines().into_iter();
    if !inputs.is_empty() {
        let body: Vec<String> = lines.by_ref().take(inputs.len()).collect();
        sections.push(format!("Inputs\n{}", body.join("\n")));
    }
    if !derived.is_empty() {
        let body: Vec<String> = lines.collect();
        sections.push(format!("Values\n{}", body.join("\n")));
    }

    if !r.checks.is_empty() {
        let grid = Grid {
            align: CHECK_ALIGN,
            gaps: CHECK_GAPS,
            rows: r.checks.iter().map(check_cells).collect(),
        };
        sections.push(format!("Checks\n{}", grid.lines().join("\n")));
    }

    if !r.sweeps.is_empty() {
        let tables: Vec<String> = r.sweeps.iter().map(sweep_table).collect();
        sections.push(format!("Sweeps\n{}", tables.join("\n\n")));
    }

    let mut warnings: Vec<String> = r
        .warnings
        .iter()
        .map(|w| format!("{INDENT}! {}: {}", one_line(&w.source), one_line(&w.text)))
        .collect();
    warnings.extend(
        diagnostic_warnings(r)
            .iter()
            .map(|w| format!("{INDENT}! {}", one_line(w))),
    );
    if !warnings.is_empty() {
        sections.push(format!("Warnings\n{}", warnings.join("\n")));
    }

    sections.extend(cautions(&[r]).into_iter().map(str::to_string));
    sections.join("\n\n")
}

/// A sweep as a table under its heading: the swept value, then each series' nominal value
/// and worst-case range. A long table is shortened (see `sweep::table_rows`), its extremes
/// marked, and a closing line says how many rows are left out.
fn sweep_table(s: &SweepTable) -> String {
    let rows = table_rows(s);
    let cols = columns(s, &rows);
    let marked = rows.rows.iter().any(|r| !r.marks.is_empty());
    let mut align: Vec<Align> = cols
        .iter()
        .map(|c| {
            if c.is_range {
                Align::Left
            } else {
                Align::Right
            }
        })
        .collect();
    let mut gaps: Vec<&str> = cols
        .iter()
        .map(|c| if c.is_range { "  " } else { "   " })
        .collect();
    if marked {
        align.push(Align::Left);
        gaps.push("   ");
    }
    let mut grid_rows: Vec<Vec<String>> = vec![cols.iter().map(|c| c.heading.clone()).collect()];
    for (k, row) in rows.rows.iter().enumerate() {
        let mut cells: Vec<String> = cols.iter().map(|c| c.cells[k].clone()).collect();
        if marked {
            cells.push(row.marks.join(", "));
        }
        grid_rows.push(cells);
    }
    let grid = Grid {
        align: &align,
        gaps: &gaps,
        rows: grid_rows,
    };
    let mut lines = vec![format!("{INDENT}{}", one_line(&heading(s)))];
    lines.extend(grid.lines().into_iter().map(|l| format!("{INDENT}{l}")));
    if let Some(t) = left_out_text(&rows) {
        lines.push(format!("{INDENT}{INDENT}({t})"));
    }
    lines.join("\n")
}

/// The bare-expression values: one alone is just "6.00 V" (with " (5.70 V … 6.30 V)" when
/// uncertain); several are an aligned table with their expressions.
pub(super) fn shown(rows: &[ValueRow]) -> Option<String> {
    match rows {
        [] => None,
        [v] => Some(match v.range_text() {
            Some(range) => format!("{} ({range})", v.text()),
            None => v.text(),
        }),
        _ => shown_table(rows),
    }
}

/// The bare-expression values with their expressions, one aligned row each.
pub(super) fn shown_table(rows: &[ValueRow]) -> Option<String> {
    if rows.is_empty() {
        return None;
    }
    let grid = Grid {
        align: VALUE_ALIGN,
        gaps: VALUE_GAPS,
        rows: rows
            .iter()
            .map(|v| value_cells(v, &RowTexts::of(v)))
            .collect(),
    };
    let lines: Vec<String> = grid
        .lines()
        .into_iter()
        .map(|l| l.strip_prefix(INDENT).unwrap_or(&l).to_string())
        .collect();
    Some(lines.join("\n"))
}

#[cfg(test)]
mod tests {
    use super::{display_width, one_line};
    use unicode_width::UnicodeWidthStr;

    /// The ASCII shortcuts agree with the general rules on every kind of cell text.
    #[test]
    fn the_ascii_shortcuts_agree_with_the_general_rules() {
        let samples = [
            "",
            " ",
            "u1.loss",
            "10.8 V … 13.2 V",
            "°C",
            "Ω",
            "a  b",
            " lead",
            "trail ",
            "tab\there",
            "line\nbreak",
            "wide 漢字",
            "cr\rlf",
            "nbsp\u{a0}kept",
            "~!@#$%^&*()_+{}|:\"<>?`-=[]\\;',./",
        ];
        for s in samples {
            assert_eq!(display_width(s), s.width(), "{s:?}");
            let general = s.split_whitespace().collect::<Vec<_>>().join(" ");
            assert_eq!(one_line(s), general, "{s:?}");
        }
    }
}

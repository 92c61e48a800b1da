//! The HTML result block.
//!
//! Notebooks written by `headroom run` open untrusted, and JupyterLab then passes HTML through
//! its sanitizer: no `<style>` or `<script>` survives, and each inline style declaration is kept
//! only when its value passes a per-property pattern. Those patterns accept hex and `rgba()`
//! colours, lengths and keywords, but not `var(…)`. So every coloured declaration comes twice:
//! first a value the sanitizer keeps (mid-tone colours and translucent backgrounds that read on
//! light and dark themes alike), then the JupyterLab theme variable, which wins where the HTML
//! is trusted. Body text sets no colour at all and inherits the theme's.
//! JupyterLab's own table rules right-align cells and centre tables, so every cell states its
//! alignment and the table its margin.

use super::sweep::{columns, heading, left_out_text, table_rows};
use super::{
    cautions, diagnostic_warnings, signed_margin, split_number_unit, RowTexts,
    MAX_CELL_OUTPUT_BYTES,
};
use html_escape::encode_text;
use std::fmt::Write as _;
use worksheet_lang::results::{CellReport, CheckRow, Shown, SweepTable, ValueRow};

const BLOCK: &str = "margin: 2px 0; padding: 0";
const TABLE: &str = "border-collapse: collapse; margin: 2px 0; border: none";
const SECTION: &str = "text-align: left; font-weight: bold; padding: 6px 8px 2px 4px; \
border-bottom: 1px solid rgba(128, 128, 128, 0.45); \
border-bottom: 1px solid var(--jp-border-color1, rgba(128, 128, 128, 0.45))";
const NAME: &str = "text-align: left; padding: 2px 8px 2px 4px; white-space: nowrap; \
font-family: monospace; font-family: var(--jp-code-font-family, monospace)";
const NUMBER: &str = "text-align: right; padding: 2px 0 2px 12px; white-space: nowrap";
const UNIT: &str = "text-align: left; padding: 2px 12px 2px 4px; white-space: nowrap";
const RANGE: &str = "text-align: left; padding: 2px 12px 2px 4px; white-space: nowrap";
const NOTE: &str = "text-align: left; padding: 2px 4px; font-style: italic; opacity: 0.75";
const PLAIN: &str = "text-align: left; padding: 2px 8px 2px 4px";
const SOFT: &str = "opacity: 0.7";
const PASS: &str = "text-align: left; padding: 2px 8px 2px 4px; white-space: nowrap; \
font-weight: bold; color: #2e8b57; color: var(--jp-success-color1, #2e8b57)";
const FAIL: &str = "text-align: left; padding: 2px 8px 2px 4px; white-space: nowrap; \
font-weight: bold; color: #d9443a; color: var(--jp-error-color1, #d9443a)";
const FAIL_ROW: &str = "background: rgba(217, 68, 58, 0.10)";
const WARNINGS: &str = "margin: 6px 0 2px 0; padding: 4px 8px; \
border-left: 3px solid #d08c00; border-left: 3px solid var(--jp-warn-color1, #d08c00); \
background: rgba(208, 140, 0, 0.10)";
const CAUTION: &str = "margin: 6px 0 2px 0; padding: 4px 8px; font-weight: bold; \
border-left: 3px solid #d9443a; border-left: 3px solid var(--jp-error-color1, #d9443a); \
background: rgba(217, 68, 58, 0.08)";
const LIST: &str = "margin: 2px 0; padding-left: 18px";
const LIVE: &str = "margin: 2px 0 4px 0; padding: 2px 8px; font-size: 90%; \
border-left: 3px solid #3b7dd8; border-left: 3px solid var(--jp-brand-color1, #3b7dd8); \
background: rgba(59, 125, 216, 0.08)";
const HEAD_NUMBER: &str = "text-align: right; padding: 2px 0 2px 12px; white-space: nowrap; \
font-weight: normal; opacity: 0.75";
const HEAD_TEXT: &str = "text-align: left; padding: 2px 12px 2px 10px; white-space: nowrap; \
font-weight: normal; opacity: 0.75";
const SWEEP_RANGE: &str = "text-align: left; padding: 2px 12px 2px 10px; white-space: nowrap";
const SWEEP_NOTE: &str = "margin: 2px 0 4px 4px; font-style: italic; opacity: 0.75";
const HEAD_RULE: &str = "border-bottom: 1px solid rgba(128, 128, 128, 0.30); \
border-bottom: 1px solid var(--jp-border-color2, rgba(128, 128, 128, 0.30))";
const MARK: &str = "text-align: left; padding: 2px 4px 2px 12px; white-space: nowrap; opacity: 0.8";
const CAPPED: &str = "margin: 6px 0 2px 0; padding: 4px 8px; \
border-left: 3px solid rgba(128, 128, 128, 0.6); background: rgba(128, 128, 128, 0.10)";

/// Text escaped for element content; borrowed when it needs no escaping.
fn esc(s: &str) -> std::borrow::Cow<'_, str> {
    encode_text(s)
}

/// Writes `<TAG style="STYLE">` (every element of the block carries its own style).
fn open(out: &mut String, tag: &str, style: &str) {
    out.push('<');
    out.push_str(tag);
    out.push_str(" style=\"");
    out.push_str(style);
    out.push_str("\">");
}

/// Writes `<TAG style="STYLE">TEXT</TAG>` with the text escaped. Cells are written piece by
/// piece, without the formatting machinery: a block has a few of them for every row.
fn element(out: &mut String, tag: &str, style: &str, text: &str) {
    open(out, tag, style);
    out.push_str(&esc(text));
    out.push_str("</");
    out.push_str(tag);
    out.push('>');
}

fn section(out: &mut String, title: &str, span: usize) {
    let _ = write!(
        out,
        r#"<tr><th colspan="{span}" style="{SECTION}">{}</th></tr>"#,
        esc(title)
    );
}

/// A value's row; `t` holds its display texts.
fn value_row(out: &mut String, v: &ValueRow, t: &RowTexts) {
    out.push_str("<tr>");
    element(out, "td", NAME, &v.name);
    match &v.shown {
        Shown::Number { bounds, .. } => {
            let (n, u) = split_number_unit(&t.value);
            element(out, "td", NUMBER, n);
            element(out, "td", UNIT, u);
            open(out, "td", RANGE);
            // A sizing result leads with its worst case; the range column says so.
            if let Some(note) = &t.worst {
                open(out, "span", SOFT);
                out.push_str(&esc(note));
                out.push_str(";</span> ");
            }
            let range = t.range.as_deref().unwrap_or_default();
            out.push_str(&esc(range));
            if bounds.as_ref().is_some_and(|b| b.conservative) && !range.is_empty() {
                let _ = write!(
                    out,
                    r#" <span style="{SOFT}" title="guaranteed to enclose the worst case, perhaps wider">(conservative)</span>"#
                );
            }
            out.push_str("</td>");
        }
        Shown::Text(_) | Shown::Other(_) => {
            let _ = write!(
                out,
                r#"<td colspan="3" style="{PLAIN}">{}</td>"#,
                esc(&t.value)
            );
        }
    }
    element(out, "td", NOTE, &v.note);
    out.push_str("</tr>");
}

fn check_row(out: &mut String, c: &CheckRow) {
    if c.passed {
        out.push_str("<tr>");
        element(out, "td", PASS, "✓ pass");
    } else {
        open(out, "tr", FAIL_ROW);
        element(out, "td", FAIL, "✗ FAIL");
    }
    let margin = signed_margin(c);
    let (n, u) = split_number_unit(&margin);
    element(out, "td", NAME, &c.text);
    element(out, "td", NUMBER, n);
    element(out, "td", UNIT, u);
    let (worst, limit) = c.side_texts();
    open(out, "td", RANGE);
    element(out, "span", SOFT, "worst");
    out.push(' ');
    out.push_str(&esc(&worst));
    out.push(' ');
    element(out, "span", SOFT, "limit");
    out.push(' ');
    out.push_str(&esc(&limit));
    if c.conservative {
        out.push_str(" (conservative)");
    }
    out.push_str("</td>");
    element(out, "td", NOTE, &c.note);
    out.push_str("</tr>");
}

/// The result block. Past the cell's output cap the sweep tables give way to a note first
/// (see [`MAX_CELL_OUTPUT_BYTES`]); the caller replaces a block still too large.
#[cfg(test)]
pub(super) fn report(r: &CellReport) -> String {
    report_texts(r, &RowTexts::of_all(&r.values))
}

/// `report` with the value rows' display texts made already (`texts[i]` of `r.values[i]`).
pub(super) fn report_texts(r: &CellReport, texts: &[RowTexts]) -> String {
    let full = report_with(r, texts, true);
    if full.len() <= MAX_CELL_OUTPUT_BYTES || r.sweeps.is_empty() {
        return full;
    }
    report_with(r, texts, false)
}

fn report_with(r: &CellReport, texts: &[RowTexts], sweep_tables: bool) -> String {
    let mut out = format!(r#"<div style="{BLOCK}">"#);
    for n in super::live_notes(r) {
        let _ = write!(out, r#"<div style="{LIVE}">{}</div>"#, esc(&n));
    }
    let rows = || r.values.iter().zip(texts);
    if !r.values.is_empty() {
        let _ = write!(out, r#"<table style="{TABLE}"><tbody>"#);
        if r.values.iter().any(|v| v.given) {
            section(&mut out, "Inputs", 5);
            rows()
                .filter(|(v, _)| v.given)
                .for_each(|(v, t)| value_row(&mut out, v, t));
        }
        if r.values.iter().any(|v| !v.given) {
            section(&mut out, "Values", 5);
            rows()
                .filter(|(v, _)| !v.given)
                .for_each(|(v, t)| value_row(&mut out, v, t));
        }
        out.push_str("</tbody></table>");
    }
    if !r.checks.is_empty() {
        let _ = write!(out, r#"<table style="{TABLE}"><tbody>"#);
        section(&mut out, "Checks", 6);
        r.checks.iter().for_each(|c| check_row(&mut out, c));
        out.push_str("</tbody></table>");
    }
    if sweep_tables {
        r.sweeps.iter().for_each(|s| sweep_table(&mut out, s));
    } else if !r.sweeps.is_empty() {
        let _ = write!(
            out,
            r#"<div style="{CAPPED}">{}</div>"#,
            esc(&capped_note("The sweep tables are"))
        );
    }
    let mut warnings: Vec<String> = r
        .warnings
        .iter()
        .map(|w| format!("<b>{}</b>: {}", esc(&w.source), esc(&w.text)))
        .collect();
    warnings.extend(diagnostic_warnings(r).iter().map(|w| esc(w).into_owned()));
    if !warnings.is_empty() {
        let _ = write!(
            out,
            r#"<div style="{WARNINGS}"><div style="font-weight: bold">Warnings</div><ul style="{LIST}">"#
        );
        for w in &warnings {
            let _ = write!(out, "<li>{w}</li>");
        }
        out.push_str("</ul></div>");
    }
    for c in cautions(&[r]) {
        let _ = write!(out, r#"<div style="{CAUTION}">{}</div>"#, esc(c));
    }
    out.push_str("</div>");
    out
}

/// "The sweep tables are left out: …", for output past the cell's cap.
pub(super) fn capped_note(what: &str) -> String {
    format!(
        "{what} left out: this cell's output would pass its cap of {} MiB. \
The plain text and the results data hold everything.",
        MAX_CELL_OUTPUT_BYTES / (1024 * 1024)
    )
}

/// A sweep as a table: a heading row, column headings, then the rows (see `sweep::table_rows`)
/// and, for a shortened table, a closing line saying how many rows are left out.
fn sweep_table(out: &mut String, s: &SweepTable) {
    let rows = table_rows(s);
    let cols = columns(s, &rows);
    let marked = rows.rows.iter().any(|r| !r.marks.is_empty());
    let span = cols.len() + usize::from(marked);
    let _ = write!(out, r#"<table style="{TABLE}"><tbody>"#);
    section(out, &format!("Sweep: {}", heading(s)), span);
    let _ = write!(out, r#"<tr style="{HEAD_RULE}">"#);
    for c in &cols {
        let style = if c.is_range { HEAD_TEXT } else { HEAD_NUMBER };
        let _ = write!(out, r#"<th style="{style}">{}</th>"#, esc(&c.heading));
    }
    if marked {
        let _ = write!(out, r#"<th style="{HEAD_TEXT}"></th>"#);
    }
    out.push_str("</tr>");
    for (k, row) in rows.rows.iter().enumerate() {
        out.push_str("<tr>");
        for c in &cols {
            let style = if c.is_range { SWEEP_RANGE } else { NUMBER };
            let _ = write!(out, r#"<td style="{style}">{}</td>"#, esc(&c.cells[k]));
        }
        if marked {
            let _ = write!(
                out,
                r#"<td style="{MARK}">{}</td>"#,
                esc(&row.marks.join(", "))
            );
        }
        out.push_str("</tr>");
    }
    out.push_str("</tbody></table>");
    // Below the table rather than in a row of it, so its length does not widen the columns.
    if let Some(t) = left_out_text(&rows) {
        let _ = write!(out, r#"<div style="{SWEEP_NOTE}">{}</div>"#, esc(&t));
    }
}

/// The bare-expression values as a small table without section headers.
pub(super) fn shown(rows: &[ValueRow]) -> String {
    let mut out = format!(r#"<table style="{TABLE}"><tbody>"#);
    rows.iter()
        .for_each(|v| value_row(&mut out, v, &RowTexts::of(v)));
    out.push_str("</tbody></table>");
    out
}

/// The whole result block's stand-in when it is too large to send.
pub(super) fn capped_block() -> String {
    format!(
        r#"<div style="{CAPPED}">{}</div>"#,
        esc(&capped_note("The result block is"))
    )
}

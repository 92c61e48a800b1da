//! Rendering of results data into plain text, HTML and the results JSON.
//!
//! Shared by the kernel and the command line, so a worksheet run from the shell shows the very
//! same outputs as in JupyterLab. The rows of the results data make their own display texts
//! (`ValueRow::text` and `range_text`, `CheckRow::side_texts` and `margin_text`), which the
//! renderers lay out; the JSON carries the raw SI numbers beside them.

mod chart;
mod html;
mod json;
#[cfg(test)]
mod live_tests;
mod sweep;
mod text;

use serde_json::{Map, Value};
use worksheet_lang::diagnostic;
use worksheet_lang::results::{CellReport, CheckRow, Hazard, Shown, ValueRow};
use worksheet_lang::units::Dim;

/// MIME type of the results data, the same for the kernel and `headroom run --json`.
pub const RESULTS_MIME: &str = "application/vnd.headroom.results+json";

/// Most bytes of rendered output one cell may send: its HTML result block and every chart's
/// SVG and PNG (as base64) together. Beyond it whole parts give way to a short note, never a
/// cut in the middle of markup: charts go first, then the HTML sweep tables, then the HTML
/// block as a whole. The plain text and the results data are always complete. 2 MiB keeps a
/// notebook with a few dozen sweeps responsive in a browser (common practice, no source).
pub const MAX_CELL_OUTPUT_BYTES: usize = 2 * 1024 * 1024;

/// Shown wherever a worksheet holds a temperature hot enough to burn.
pub const HOT_SURFACE_CAUTION: &str = "Caution: surfaces above about 60 °C burn on touch; \
confirm with the part's datasheet and by measurement.";

/// 60 °C in kelvin. The project's caution rule sets this threshold; touch-temperature limits in
/// product safety standards for briefly touched metal parts are of this order (from memory).
const HOT_SURFACE_K: f64 = 273.15 + 60.0;

/// Shown wherever a worksheet holds a voltage that can give a dangerous shock.
pub const SHOCK_CAUTION: &str = "Caution: more than 60 V (30 V rms for AC) can give a \
dangerous shock; mains and other high-voltage circuits need the safety standards, codes and \
licensed practice that apply.";

/// 60 V: the limit of touch-safe DC in product safety standards (IEC 62368-1's ES1, the SELV
/// limit before it; from memory). A worksheet does not say AC from DC, so the caution
/// follows the DC figure and names the AC one (30 V rms, from memory).
const SHOCK_VOLTS: f64 = 60.0;

/// Shown wherever a worksheet models a battery.
pub const BATTERY_CAUTION: &str = "Caution: cells, lithium cells above all, can overheat, \
vent or catch fire when shorted, overcharged, over-discharged or damaged; follow the cell \
maker's datasheet and the battery safety standards that apply.";

/// The display bundle of a cell's result block: `text/plain`, `text/html` and the results JSON.
pub fn bundle(report: &CellReport) -> Map<String, Value> {
    // The plain text and the HTML show the same numbers: they are formatted once.
    let texts = RowTexts::of_all(&report.values);
    let mut m = Map::new();
    m.insert(
        "text/plain".into(),
        Value::String(text_with(report, &texts)),
    );
    m.insert(
        "text/html".into(),
        Value::String(html_block_with(report, &texts)),
    );
    m.insert(RESULTS_MIME.into(), results_json(&[report]));
    m
}

/// The display texts of a value row, made once for every renderer: its leading number with
/// its unit ("79.4 °C"), its worst-case range ("69.8 °C … 91.0 °C") and, for a sizing result,
/// what its leading number is ("at worst (nominal 3.40 K/W)").
pub(super) struct RowTexts {
    pub value: String,
    pub range: Option<String>,
    pub worst: Option<String>,
}

impl RowTexts {
    pub fn of(v: &ValueRow) -> RowTexts {
        match &v.shown {
            Shown::Number { .. } => RowTexts {
                value: v.value_text(),
                range: v.range_text(),
                worst: v.worst_note(),
            },
            Shown::Text(_) | Shown::Other(_) => RowTexts {
                value: v.text(),
                range: None,
                worst: None,
            },
        }
    }

    pub fn of_all(rows: &[ValueRow]) -> Vec<RowTexts> {
        rows.iter().map(RowTexts::of).collect()
    }
}

/// The HTML result block, or a note in its place when even without its sweep tables it would
/// pass [`MAX_CELL_OUTPUT_BYTES`].
#[cfg(test)]
fn html_block(report: &CellReport) -> String {
    html_block_with(report, &RowTexts::of_all(&report.values))
}

/// `html_block` with the value rows' texts made already (`texts[i]` of `report.values[i]`).
fn html_block_with(report: &CellReport, texts: &[RowTexts]) -> String {
    let h = html::report_texts(report, texts);
    if h.len() <= MAX_CELL_OUTPUT_BYTES {
        h
    } else {
        html::capped_block()
    }
}

/// One display bundle per sweep chart of the cell, to be sent after its result block: for
/// each sweep, one chart per group of series that share a dimension (and absoluteness), each
/// with `image/svg+xml`, an `image/png` fallback (base64) and a one-line `text/plain`. Charts
/// that would take the cell past [`MAX_CELL_OUTPUT_BYTES`], or that fail to draw, are
/// replaced by a bundle holding a note (`text/plain` and `text/html`). Empty without sweeps.
#[cfg(test)]
pub fn charts(report: &CellReport) -> Vec<Map<String, Value>> {
    charts_after(report, html_block(report).len())
}

/// The result block's bundle (`bundle`) and then its charts (`charts`), with the HTML block
/// made once: its length is what the block takes of the cell's output cap.
pub fn bundle_and_charts(report: &CellReport) -> (Map<String, Value>, Vec<Map<String, Value>>) {
    let block = bundle(report);
    let used = block
        .get("text/html")
        .and_then(Value::as_str)
        .map_or(0, str::len);
    let charts = charts_after(report, used);
    (block, charts)
}

/// The charts, when the result block's HTML takes `used` bytes of the output cap.
fn charts_after(report: &CellReport, used: usize) -> Vec<Map<String, Value>> {
    if report.sweeps.is_empty() {
        return Vec::new();
    }
    chart::bundles(report, MAX_CELL_OUTPUT_BYTES.saturating_sub(used))
}

/// The bundle of the bare-expression values of a cell (its `execute_result`), or `None` when
/// the cell has none. With one value, `text/plain` is just its text and worst-case range.
pub fn shown_bundle(report: &CellReport) -> Option<Map<String, Value>> {
    let plain = shown_text(report)?;
    let mut m = Map::new();
    m.insert("text/plain".into(), Value::String(plain));
    m.insert(
        "text/html".into(),
        Value::String(html::shown(&report.shown)),
    );
    m.insert(
        RESULTS_MIME.into(),
        json::results_of(&report.shown, &[], &[], &[]),
    );
    Some(m)
}

/// The plain text of the bare-expression values, or `None` when there are none.
pub fn shown_text(report: &CellReport) -> Option<String> {
    text::shown(&report.shown)
}

/// The bare-expression values as an aligned table with their expressions, for a listing of
/// a whole worksheet (`headroom run`), where a value alone would not say what it is.
pub fn shown_listing(report: &CellReport) -> Option<String> {
    text::shown_table(&report.shown)
}

/// `(ename, evalue, traceback)` for the kernel's error reply, from the cell's error
/// diagnostics; `None` when the cell has no error. `ename` is the first error's stable code;
/// the traceback carries every error with its caret excerpt, the header line in red.
pub fn error_traceback(report: &CellReport) -> Option<(String, String, Vec<String>)> {
    let errors: Vec<_> = report.diagnostics.iter().filter(|d| d.is_error()).collect();
    let first = errors.first()?;
    let mut traceback = Vec::new();
    for (i, d) in errors.iter().enumerate() {
        if i > 0 {
            traceback.push(String::new());
        }
        let rendered = diagnostic::render(&report.source, d);
        for (j, line) in rendered.lines().enumerate() {
            if j == 0 {
                traceback.push(format!("\x1b[1;31m{line}\x1b[0m"));
            } else {
                traceback.push(line.to_string());
            }
        }
    }
    Some((
        first.kind.code().to_string(),
        first.message.clone(),
        traceback,
    ))
}

/// The "results as data" object over one or more cells (version 1).
pub fn results_json(reports: &[&CellReport]) -> Value {
    json::results(reports)
}

/// The aligned plain-text result block of a cell: inputs, values, checks, warnings and,
/// where it applies, the hot-surface caution. Empty when the cell has nothing to show.
pub fn text(report: &CellReport) -> String {
    text_with(report, &RowTexts::of_all(&report.values))
}

/// `text` with the value rows' texts made already (`texts[i]` of `report.values[i]`).
fn text_with(report: &CellReport, texts: &[RowTexts]) -> String {
    let notes = live_notes(report);
    let body = text::report(report, texts);
    if notes.is_empty() {
        return body;
    }
    let mut out: String = notes.iter().map(|n| format!("{n}\n")).collect();
    if !body.is_empty() {
        out.push('\n');
        out.push_str(&body);
    }
    out
}

/// What a living worksheet says of a block: which change updated it (on a block refreshed by
/// another cell's run), or which other cells a run updated (on the cell that was run).
pub(crate) fn live_notes(report: &CellReport) -> Vec<String> {
    let mut notes = Vec::new();
    if !report.updated_by.is_empty() {
        let changes: Vec<String> = report
            .updated_by
            .iter()
            .map(|c| format!("{} {} → {}", c.name, c.old, c.new))
            .collect();
        notes.push(format!("↻ updated: {}", changes.join("; ")));
    }
    match report.updated_cells.len() {
        0 => {}
        1 => notes.push(format!(
            "↻ this run updated another cell: {}",
            report.updated_cells[0]
        )),
        n => notes.push(format!(
            "↻ this run updated {n} other cells: {}",
            report.updated_cells.join(" · ")
        )),
    }
    notes
}

/// The cautions to show with these results, in this order: hot surfaces, shock, batteries.
/// Hot surfaces and shock are read from the numbers (nominal or worst case) of values, shown
/// values, check sides and sweeps; batteries from the built-ins a cell calls.
pub fn cautions(reports: &[&CellReport]) -> Vec<&'static str> {
    let (mut hot, mut shock, mut battery) = (false, false, false);
    for r in reports {
        each_number(r, |dim, absolute, x| {
            hot |= dim == Dim::TEMPERATURE && absolute && x > HOT_SURFACE_K;
            shock |= dim == Dim::VOLTAGE && x.abs() > SHOCK_VOLTS;
        });
        battery |= r.hazards.contains(&Hazard::Battery);
    }
    [
        (hot, HOT_SURFACE_CAUTION),
        (shock, SHOCK_CAUTION),
        (battery, BATTERY_CAUTION),
    ]
    .into_iter()
    .filter_map(|(on, text)| on.then_some(text))
    .collect()
}

/// Calls `f` with every number of a report, its dimension and whether it is an absolute
/// temperature: value and shown rows (nominal and worst case), check sides, swept points and
/// series.
fn each_number(r: &CellReport, mut f: impl FnMut(Dim, bool, f64)) {
    for v in r.values.iter().chain(&r.shown) {
        if let Shown::Number { value, bounds } = &v.shown {
            f(value.dim, value.absolute, value.si);
            if let Some(b) = bounds {
                f(value.dim, value.absolute, b.min);
                f(value.dim, value.absolute, b.max);
            }
        }
    }
    for c in &r.checks {
        f(c.dim, c.worst_absolute, c.worst);
        f(c.dim, c.limit_absolute, c.limit);
    }
    for s in &r.sweeps {
        s.points.iter().for_each(|&x| f(s.dim, s.absolute, x));
        for se in &s.series {
            se.nominal
                .iter()
                .chain(se.min.iter().flatten())
                .chain(se.max.iter().flatten())
                .for_each(|&x| f(se.dim, se.absolute, x));
        }
    }
}

/// Splits a display text such as "79.4 °C" into its number and unit ("79.4", "°C") so the
/// columns can align numbers right and units left. Texts without a space stay whole.
fn split_number_unit(text: &str) -> (&str, &str) {
    match text.split_once(' ') {
        Some((num, unit))
            if num.starts_with(|c: char| c.is_ascii_digit() || "+-−.".contains(c)) =>
        {
            (num, unit)
        }
        _ => (text, ""),
    }
}

/// The margin text with its sign always written ("+34.0 K", "-14.0 W").
fn signed_margin(c: &CheckRow) -> String {
    let margin = c.margin_text();
    let t = margin.trim();
    if t.starts_with(['+', '-', '−']) {
        t.to_string()
    } else if c.margin < 0.0 {
        format!("-{t}")
    } else {
        format!("+{t}")
    }
}

/// One line per warning diagnostic (errors go to the traceback or stderr instead).
fn diagnostic_warnings(r: &CellReport) -> Vec<String> {
    r.diagnostics
        .iter()
        .filter(|d| !d.is_error())
        .map(|d| {
            let (line, _) = diagnostic::line_col(&r.source, d.span.start);
            match &d.hint {
                Some(h) => format!("line {line}: {} (hint: {h})", d.message),
                None => format!("line {line}: {}", d.message),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests;

#[cfg(test)]
mod chart_tests;

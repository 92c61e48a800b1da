//! Stored results against recomputed ones.
//!
//! The results data (`application/vnd.headroom.results+json`) is the authority: numbers agree
//! when they are within 1e-9 of each other relative to the larger, texts when they are equal.
//! The rendering (plain text, HTML) is not compared: it is drawn from the same data, and may
//! change between engine versions without any result changing.

use super::execute::CellRun;
use super::ipynb;
use crate::outputs::CellOutput;
use crate::render::RESULTS_MIME;
use serde_json::Value;

/// Relative tolerance of a number that still counts as reproduced.
pub(crate) const RELATIVE: f64 = 1e-9;

/// The side of a difference where the item does not exist.
pub(crate) const ABSENT: &str = "(absent)";

/// What one code cell shows, as data.
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct CellResults {
    /// The cell has outputs at all (a cell never run has none).
    pub ran: bool,
    /// The results data of the result block.
    pub block: Option<Value>,
    /// The results data of the bare-expression values.
    pub shown: Option<Value>,
    /// `ename: evalue` of an error output.
    pub error: Option<String>,
}

impl CellResults {
    /// The stored results of a cell in a notebook file.
    pub fn stored(cell: &Value) -> CellResults {
        let mut r = CellResults::default();
        let outputs = cell.get("outputs").and_then(Value::as_array);
        for o in outputs.into_iter().flatten() {
            r.ran = true;
            let data = o.get("data").and_then(|d| d.get(RESULTS_MIME));
            match o.get("output_type").and_then(Value::as_str) {
                Some("display_data") if r.block.is_none() => r.block = data.cloned(),
                Some("execute_result") => r.shown = data.cloned(),
                Some("error") => {
                    r.error = Some(format!(
                        "{}: {}",
                        o.get("ename").and_then(Value::as_str).unwrap_or(""),
                        ipynb::multiline(o.get("evalue"))
                    ));
                }
                _ => {}
            }
        }
        r.ran |= cell.get("execution_count").is_some_and(|c| !c.is_null());
        r
    }

    /// The results of a cell that was just run.
    pub fn recomputed(run: &CellRun) -> CellResults {
        let mut r = CellResults {
            ran: run.execution_count.is_some(),
            ..CellResults::default()
        };
        for o in &run.outputs {
            match o {
                CellOutput::Display { data, .. } if r.block.is_none() => {
                    r.block = data.get(RESULTS_MIME).cloned();
                }
                CellOutput::Result { data } => r.shown = data.get(RESULTS_MIME).cloned(),
                CellOutput::Error { ename, evalue, .. } => {
                    r.error = Some(format!("{ename}: {evalue}"));
                }
                _ => {}
            }
        }
        r
    }

    /// Every value row of the cell (block and shown values).
    pub fn values(&self) -> impl Iterator<Item = &Value> {
        [&self.block, &self.shown]
            .into_iter()
            .flatten()
            .flat_map(|d| {
                d.get("values")
                    .and_then(Value::as_array)
                    .into_iter()
                    .flatten()
            })
    }

    pub fn checks(&self) -> impl Iterator<Item = &Value> {
        self.block.iter().flat_map(|d| {
            d.get("checks")
                .and_then(Value::as_array)
                .into_iter()
                .flatten()
        })
    }
}

#[derive(Debug, Clone, PartialEq)]
pub(crate) enum DiffKind {
    Value,
    /// A check whose pass/fail differs: `now_passes` is the recomputed verdict.
    Flipped {
        now_passes: bool,
    },
    Check,
    Warning,
    Sweep,
    Error,
    /// The cell has no stored outputs (it was never run) but shows something now.
    NotRun,
}

/// One difference between a stored and a recomputed result.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Diff {
    pub kind: DiffKind,
    /// What differs: a value's name, a check's text, "warning", "sweep over x".
    pub subject: String,
    pub stored: String,
    pub recomputed: String,
    /// The display texts of a value (old, new), for a short "old → new" line.
    pub texts: Option<(String, String)>,
    /// A value's `si` or a check's margin (old, new) in `unit`, when both sides have one.
    pub numbers: Option<(f64, f64, String)>,
}

pub(crate) fn close(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= RELATIVE * a.abs().max(b.abs())
}

/// Every difference between what a cell stored and what it shows now.
pub(crate) fn diff_cell(stored: &CellResults, now: &CellResults) -> Vec<Diff> {
    let mut out = Vec::new();
    if !stored.ran {
        if now.ran {
            out.push(Diff {
                kind: DiffKind::NotRun,
                subject: "outputs".into(),
                stored: "none (the cell was not run)".into(),
                recomputed: summary(now),
                texts: None,
                numbers: None,
            });
        }
        return out;
    }
    if stored.error != now.error {
        out.push(Diff {
            kind: DiffKind::Error,
            subject: "error".into(),
            stored: stored.error.clone().unwrap_or_else(|| "no error".into()),
            recomputed: now.error.clone().unwrap_or_else(|| "no error".into()),
            texts: None,
            numbers: None,
        });
    }
    diff_data(stored.block.as_ref(), now.block.as_ref(), &mut out);
    diff_data(stored.shown.as_ref(), now.shown.as_ref(), &mut out);
    out
}

fn summary(r: &CellResults) -> String {
    if let Some(e) = &r.error {
        return format!("an error ({e})");
    }
    let values = r.values().count();
    let checks = r.checks().count();
    format!("{values} values, {checks} checks")
}

fn diff_data(old: Option<&Value>, new: Option<&Value>, out: &mut Vec<Diff>) {
    let empty = Value::Null;
    let old = old.unwrap_or(&empty);
    let new = new.unwrap_or(&empty);
    let list = |d: &Value, k: &str| -> Vec<Value> {
        d.get(k)
            .and_then(Value::as_array)
            .cloned()
            .unwrap_or_default()
    };
    diff_values(&list(old, "values"), &list(new, "values"), out);
    diff_checks(&list(old, "checks"), &list(new, "checks"), out);
    diff_warnings(&list(old, "warnings"), &list(new, "warnings"), out);
    diff_sweeps(&list(old, "sweeps"), &list(new, "sweeps"), out);
}

fn text_of<'a>(v: &'a Value, key: &str) -> &'a str {
    v.get(key).and_then(Value::as_str).unwrap_or("")
}

fn num_of(v: &Value, key: &str) -> Option<f64> {
    v.get(key).and_then(Value::as_f64)
}

/// Two JSON leaves agree: numbers within the relative tolerance, anything else equal.
fn same(a: Option<&Value>, b: Option<&Value>) -> bool {
    match (a, b) {
        (Some(Value::Number(x)), Some(Value::Number(y))) => match (x.as_f64(), y.as_f64()) {
            (Some(x), Some(y)) => close(x, y),
            _ => x == y,
        },
        (Some(Value::Array(xs)), Some(Value::Array(ys))) => {
            xs.len() == ys.len() && xs.iter().zip(ys).all(|(x, y)| same(Some(x), Some(y)))
        }
        (Some(Value::Object(x)), Some(Value::Object(y))) => {
            x.len() == y.len() && x.iter().all(|(k, v)| same(Some(v), y.get(k)))
        }
        (a, b) => a == b,
    }
}

/// "79.4 °C (si 352.55 K, 342.91 … 364.19)".
fn describe_value(v: &Value) -> String {
    let text = text_of(v, "text");
    match num_of(v, "si") {
        Some(si) => {
            let unit = text_of(v, "unit");
            let range = match (num_of(v, "min"), num_of(v, "max")) {
                (Some(lo), Some(hi)) => format!(", {lo} … {hi}"),
                _ => String::new(),
            };
            format!("{text} (si {si} {unit}{range})")
        }
        None => text.to_string(),
    }
}

/// Items keyed by a text field; a repeated key gets its occurrence number.
fn keyed<'a>(items: &'a [Value], key: &str) -> Vec<(String, &'a Value)> {
    let mut out: Vec<(String, &Value)> = Vec::new();
    for it in items {
        let base = text_of(it, key).to_string();
        let n = out
            .iter()
            .filter(|(k, _)| *k == base || k.starts_with(&format!("{base} #")))
            .count();
        let k = if n == 0 {
            base
        } else {
            format!("{base} #{}", n + 1)
        };
        out.push((k, it));
    }
    out
}

fn diff_values(old: &[Value], new: &[Value], out: &mut Vec<Diff>) {
    let old = keyed(old, "name");
    let new = keyed(new, "name");
    for (name, n) in &new {
        match old.iter().find(|(k, _)| k == name) {
            Some((_, o)) => {
                let fields = [
                    "si",
                    "min",
                    "max",
                    "text",
                    "unit",
                    "absolute",
                    "conservative",
                    "given",
                    "note",
                ];
                if fields.iter().any(|f| !same(o.get(*f), n.get(*f))) {
                    out.push(Diff {
                        kind: DiffKind::Value,
                        subject: name.clone(),
                        stored: describe_value(o),
                        recomputed: describe_value(n),
                        texts: Some((text_of(o, "text").into(), text_of(n, "text").into())),
                        numbers: num_of(o, "si")
                            .zip(num_of(n, "si"))
                            .map(|(a, b)| (a, b, text_of(n, "unit").to_string())),
                    });
                }
            }
            None => out.push(Diff {
                kind: DiffKind::Value,
                subject: name.clone(),
                stored: ABSENT.into(),
                recomputed: describe_value(n),
                texts: Some(("(new)".into(), text_of(n, "text").into())),
                numbers: None,
            }),
        }
    }
    for (name, o) in &old {
        if !new.iter().any(|(k, _)| k == name) {
            out.push(Diff {
                kind: DiffKind::Value,
                subject: name.clone(),
                stored: describe_value(o),
                recomputed: ABSENT.into(),
                texts: Some((text_of(o, "text").into(), "(gone)".into())),
                numbers: None,
            });
        }
    }
}

/// "passes, margin 33.96 K (worst 364.19, limit 398.15)".
fn describe_check(c: &Value) -> String {
    let verdict = if c.get("passed") == Some(&Value::Bool(true)) {
        "passes"
    } else {
        "fails"
    };
    let n = |k: &str| num_of(c, k).map_or_else(|| "?".to_string(), |x| x.to_string());
    format!(
        "{verdict}, margin {} {} (worst {}, limit {})",
        n("margin"),
        text_of(c, "unit"),
        n("worst"),
        n("limit")
    )
}

fn diff_checks(old: &[Value], new: &[Value], out: &mut Vec<Diff>) {
    let old = keyed(old, "text");
    let new = keyed(new, "text");
    for (text, n) in &new {
        let Some((_, o)) = old.iter().find(|(k, _)| k == text) else {
            out.push(Diff {
                kind: DiffKind::Check,
                subject: text.clone(),
                stored: ABSENT.into(),
                recomputed: describe_check(n),
                texts: None,
                numbers: None,
            });
            continue;
        };
        let passed = |c: &Value| c.get("passed").and_then(Value::as_bool);
        let kind = if passed(o) != passed(n) {
            DiffKind::Flipped {
                now_passes: passed(n) == Some(true),
            }
        } else if ["worst", "limit", "margin", "absolute", "unit"]
            .iter()
            .any(|f| !same(o.get(*f), n.get(*f)))
        {
            DiffKind::Check
        } else {
            continue;
        };
        out.push(Diff {
            kind,
            subject: text.clone(),
            stored: describe_check(o),
            recomputed: describe_check(n),
            texts: None,
            numbers: num_of(o, "margin")
                .zip(num_of(n, "margin"))
                .map(|(a, b)| (a, b, text_of(n, "unit").to_string())),
        });
    }
    for (text, o) in &old {
        if !new.iter().any(|(k, _)| k == text) {
            out.push(Diff {
                kind: DiffKind::Check,
                subject: text.clone(),
                stored: describe_check(o),
                recomputed: ABSENT.into(),
                texts: None,
                numbers: None,
            });
        }
    }
}

fn diff_warnings(old: &[Value], new: &[Value], out: &mut Vec<Diff>) {
    let line = |w: &Value| format!("{}: {}", text_of(w, "source"), text_of(w, "text"));
    let old: Vec<String> = old.iter().map(line).collect();
    let new: Vec<String> = new.iter().map(line).collect();
    for w in new.iter().filter(|w| !old.contains(w)) {
        out.push(Diff {
            kind: DiffKind::Warning,
            subject: "warning".into(),
            stored: ABSENT.into(),
            recomputed: w.clone(),
            texts: None,
            numbers: None,
        });
    }
    for w in old.iter().filter(|w| !new.contains(w)) {
        out.push(Diff {
            kind: DiffKind::Warning,
            subject: "warning".into(),
            stored: w.clone(),
            recomputed: ABSENT.into(),
            texts: None,
            numbers: None,
        });
    }
}

fn diff_sweeps(old: &[Value], new: &[Value], out: &mut Vec<Diff>) {
    for i in 0..old.len().max(new.len()) {
        let (o, n) = (old.get(i), new.get(i));
        if same(o, n) {
            continue;
        }
        let over = n.or(o).map_or("", |s| text_of(s, "over"));
        let (stored, recomputed) = first_difference(o, n);
        out.push(Diff {
            kind: DiffKind::Sweep,
            subject: format!("sweep over {over}"),
            stored,
            recomputed,
            texts: None,
            numbers: None,
        });
    }
}

/// The first leaf where two JSON trees differ, as "path: value" for each side.
fn first_difference(a: Option<&Value>, b: Option<&Value>) -> (String, String) {
    fn walk(a: Option<&Value>, b: Option<&Value>, path: &str) -> Option<(String, String)> {
        match (a, b) {
            (Some(Value::Object(x)), Some(Value::Object(y))) => x
                .keys()
                .chain(y.keys())
                .find_map(|k| walk(x.get(k), y.get(k), &format!("{path}.{k}"))),
            (Some(Value::Array(x)), Some(Value::Array(y))) if x.len() == y.len() => x
                .iter()
                .zip(y)
                .enumerate()
                .find_map(|(i, (p, q))| walk(Some(p), Some(q), &format!("{path}[{i}]"))),
            _ if same(a, b) => None,
            _ => {
                let show = |v: Option<&Value>| match v {
                    Some(Value::Array(xs)) => format!("{path}: {} items", xs.len()),
                    Some(v) => format!("{path}: {v}"),
                    None => format!("{path}: (absent)"),
                };
                Some((show(a), show(b)))
            }
        }
    }
    walk(a, b, "").unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn cell(block: Value) -> CellResults {
        CellResults {
            ran: true,
            block: Some(block),
            ..CellResults::default()
        }
    }

    #[test]
    fn numbers_agree_within_one_part_in_a_billion_relative() {
        assert!(close(100.0, 100.0 + 5e-8));
        assert!(!close(100.0, 100.0 + 2e-7));
        assert!(close(0.0, 0.0));
        assert!(!close(0.0, 1e-300));
    }

    #[test]
    fn a_changed_value_and_a_flipped_check_are_both_reported() {
        let old = cell(
            json!({"values": [{"name": "t", "si": 3600.0, "text": "1.00 h"}],
            "checks": [{"text": "t >= 2 h", "passed": false, "margin": -3600.0}]}),
        );
        let new = cell(
            json!({"values": [{"name": "t", "si": 10800.0, "text": "3.00 h"}],
            "checks": [{"text": "t >= 2 h", "passed": true, "margin": 3600.0}]}),
        );
        let d = diff_cell(&old, &new);
        assert_eq!(d.len(), 2, "{d:?}");
        assert_eq!(d[0].texts, Some(("1.00 h".into(), "3.00 h".into())));
        assert_eq!(d[1].kind, DiffKind::Flipped { now_passes: true });
    }

    #[test]
    fn a_value_within_tolerance_is_not_a_difference() {
        let old = cell(json!({"values": [{"name": "v", "si": 12.0, "text": "12.0 V"}]}));
        let new = cell(json!({"values": [{"name": "v", "si": 12.000000000001, "text": "12.0 V"}]}));
        assert!(diff_cell(&old, &new).is_empty());
    }
}

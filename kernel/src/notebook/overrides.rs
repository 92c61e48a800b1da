//! `--set NAME=VALUE` on a notebook: the `given` line is rewritten to the new value in the
//! cell source (its unit declaration, note and comment kept), so the notebook written shows
//! the value it was computed with, and the run is then the plain run of that notebook.
//! The overrides are also recorded in `metadata.headroom.overrides` as a record of what
//! was set from outside.

use super::ipynb::{self, Notebook};
use serde_json::Value;
use worksheet_lang::ast::StmtKind;
use worksheet_lang::results::Shown;
use worksheet_lang::units::describe_quantity;
use worksheet_lang::{diagnostic, eval, Interrupt, Worksheet};

#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SetValue {
    pub name: String,
    pub text: String,
}

/// `NAME=VALUE`, both parts trimmed and non-empty.
pub(crate) fn parse_set(arg: &str) -> Result<SetValue, String> {
    let bad = || format!("--set `{arg}`: expected NAME=VALUE, e.g. --set iload=250mA");
    let (name, text) = arg.split_once('=').ok_or_else(bad)?;
    let (name, text) = (name.trim(), text.trim());
    if name.is_empty() || text.is_empty() {
        return Err(bad());
    }
    Ok(SetValue {
        name: name.to_string(),
        text: text.to_string(),
    })
}

/// Where a `given` was rewritten.
#[derive(Debug, Clone)]
pub(crate) struct Rewrite {
    pub name: String,
    pub text: String,
    /// Cell indices (among all cells) whose source changed.
    pub cells: Vec<usize>,
    /// The value as it was written before.
    pub old: String,
}

/// Checks every override and rewrites the `given` lines. Nothing changes unless all are
/// valid; the error is a message for the terminal.
pub(crate) fn apply(nb: &mut Notebook, sets: &[SetValue]) -> Result<Vec<Rewrite>, String> {
    // A name set twice takes the last value, as in the language.
    let mut unique: Vec<&SetValue> = Vec::new();
    for s in sets {
        unique.retain(|u| u.name != s.name);
        unique.push(s);
    }
    let mut sources: Vec<(usize, String)> = nb
        .cells()
        .iter()
        .enumerate()
        .filter(|(_, c)| ipynb::cell_type(c) == Some("code"))
        .map(|(i, c)| (i, ipynb::source_of(c)))
        .collect();
    let mut rewrites = Vec::new();
    for s in unique {
        let label = format!("--set {}={}", s.name, s.text);
        if let Err(d) = Worksheet::new().set_override(&s.name, &s.text) {
            return Err(format!("{label}\n{}", diagnostic::render(&s.text, &d)));
        }
        let mut cells = Vec::new();
        let mut old = String::new();
        let mut derived = false;
        let mut givens: Vec<String> = Vec::new();
        for (index, source) in sources.iter_mut() {
            let program = worksheet_lang::parse(source);
            // Back to front, so earlier spans stay valid after a replacement.
            let mut spans = Vec::new();
            for stmt in &program.stmts {
                match &stmt.kind {
                    StmtKind::Given(d) if d.name.name == s.name => {
                        spans.push(d.value.span.clone());
                    }
                    StmtKind::Given(d) => givens.push(d.name.name.clone()),
                    StmtKind::Define(d) if d.name.name == s.name => derived = true,
                    _ => {}
                }
            }
            for span in spans.into_iter().rev() {
                let Some(before) = source.get(span.clone()) else {
                    continue;
                };
                old = before.to_string();
                check_kind(&s.name, &old, &s.text).map_err(|e| format!("{label}: {e}"))?;
                source.replace_range(span, &s.text);
                if !cells.contains(index) {
                    cells.push(*index);
                }
            }
        }
        if cells.is_empty() {
            if derived {
                return Err(format!(
                    "{label}: `{}` is a derived value, not a given; only inputs declared with \
                     `given` can be set from outside",
                    s.name
                ));
            }
            givens.sort();
            givens.dedup();
            let hint = match eval::nearest(&s.name, &givens) {
                Some(n) => format!("did you mean `{n}`?"),
                None if givens.is_empty() => "it has no givens at all".to_string(),
                None => format!("its givens are: {}", givens.join(", ")),
            };
            return Err(format!(
                "{label}: this notebook has no given named `{}`; {hint}",
                s.name
            ));
        }
        rewrites.push(Rewrite {
            name: s.name.clone(),
            text: s.text.clone(),
            cells,
            old,
        });
    }
    for (index, source) in sources {
        if let Some(cell) = nb.cell_mut(index) {
            if ipynb::source_of(cell) != source {
                ipynb::set_source(cell, &source);
            }
        }
    }
    if rewrites.is_empty() {
        return Ok(rewrites);
    }
    let meta = nb.headroom_mut();
    let mut recorded = match meta.get("overrides") {
        Some(Value::Object(m)) => m.clone(),
        _ => Default::default(),
    };
    for r in &rewrites {
        ipynb::insert(&mut recorded, &r.name, Value::String(r.text.clone()));
    }
    ipynb::insert(meta, "overrides", Value::Object(recorded));
    Ok(rewrites)
}

/// The new value must be the same kind of quantity as the one written in the notebook
/// (checked when the written value is a literal that evaluates on its own).
fn check_kind(name: &str, old: &str, new: &str) -> Result<(), String> {
    let kind = |text: &str| {
        let mut ws = Worksheet::new();
        let ex = ws.execute(None, text, &Interrupt::new());
        match ex.report.shown.first().map(|v| &v.shown) {
            Some(Shown::Number { value, .. }) => Some((value.dim, value.absolute)),
            _ => None,
        }
    };
    match (kind(old), kind(new)) {
        (Some(a), Some(b)) if a != b => Err(format!(
            "`{name}` is {} in the notebook (`{old}`), but `{new}` is {}",
            describe_quantity(a.0, a.1),
            describe_quantity(b.0, b.1)
        )),
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn notebook(source: Value) -> Notebook {
        let doc = json!({"cells": [{"cell_type": "code", "id": "a", "metadata": {},
            "outputs": [], "execution_count": null, "source": source}],
            "metadata": {}, "nbformat": 4, "nbformat_minor": 5});
        Notebook::parse(&doc.to_string()).expect("notebook")
    }

    fn set(name: &str, text: &str) -> SetValue {
        SetValue {
            name: name.into(),
            text: text.into(),
        }
    }

    #[test]
    fn the_given_line_keeps_its_note_and_comment() {
        let mut nb = notebook(json!([
            "given iload = 180 mA ± 20 %   \"logic\"  # measured\n",
            "p = iload * 5 V\n"
        ]));
        let r = apply(&mut nb, &[set("iload", "250mA")]).expect("applied");
        assert_eq!(r[0].old, "180 mA ± 20 %");
        assert_eq!(
            nb.cells()[0]["source"],
            json!([
                "given iload = 250mA   \"logic\"  # measured\n",
                "p = iload * 5 V\n"
            ])
        );
        assert_eq!(
            nb.headroom().and_then(|h| h.get("overrides")),
            Some(&json!({"iload": "250mA"}))
        );
    }

    #[test]
    fn a_derived_name_an_unknown_name_and_a_wrong_kind_are_refused() {
        let mut nb = notebook(json!("given iload = 180 mA\np = iload * 5 V\n"));
        let e = apply(&mut nb, &[set("p", "1 W")]).expect_err("derived");
        assert!(e.contains("derived value"), "{e}");
        let e = apply(&mut nb, &[set("iloda", "1 A")]).expect_err("unknown");
        assert!(e.contains("did you mean `iload`"), "{e}");
        let e = apply(&mut nb, &[set("iload", "3 V")]).expect_err("kind");
        assert!(e.contains("current") && e.contains("voltage"), "{e}");
        assert_eq!(
            nb.cells()[0]["source"],
            json!("given iload = 180 mA\np = iload * 5 V\n")
        );
    }

    #[test]
    fn malformed_set_arguments_are_refused() {
        assert!(parse_set("iload").is_err());
        assert!(parse_set("=1 A").is_err());
        assert_eq!(parse_set(" i = 2 A ").expect("ok"), set("i", "2 A"));
    }
}

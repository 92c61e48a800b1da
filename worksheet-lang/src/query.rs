//! Completion and inspection: what an editor asks while the user types.

use crate::builtins;
use crate::eval::MATH;
use crate::results::{Quantity, Shown};
use crate::units::{self, Dim, Unit};
use crate::worksheet::{Interrupt, Worksheet};

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Completion {
    pub matches: Vec<String>,
    /// Byte range of `source` the matches replace.
    pub start: usize,
    pub end: usize,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Inspection {
    /// Plain text (Markdown-flavoured) documentation.
    pub text: String,
}

const KEYWORDS: &[&str] = &["given", "check", "sweep", "over", "steps", "by", "as"];

fn is_name_char(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}

fn floor_boundary(s: &str, mut i: usize) -> usize {
    i = i.min(s.len());
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// Start of the dotted path that ends at `cursor`.
fn path_start(source: &str, cursor: usize) -> usize {
    let mut start = cursor;
    for (i, c) in source[..cursor].char_indices().rev() {
        if is_name_char(c) || c == '.' {
            start = i;
        } else {
            break;
        }
    }
    start
}

pub fn complete(ws: &Worksheet, source: &str, cursor: usize) -> Completion {
    let cursor = floor_boundary(source, cursor);
    let start = path_start(source, cursor);
    let word = &source[start..cursor];
    let before = source[..start].trim_end_matches(' ');
    let after_number = before
        .chars()
        .next_back()
        .is_some_and(|c| c.is_ascii_digit())
        && source[..start].len() - before.len() <= 1
        && !word.contains('.');
    let mut matches: Vec<String>;
    let mut rstart = start;
    if let Some((base, partial)) = word.rsplit_once('.') {
        rstart = cursor - partial.len();
        let members: Vec<String> = if builtins::namespaces().contains(&base) {
            builtins::all()
                .iter()
                .filter_map(|b| b.path.strip_prefix(&format!("{base}.")).map(str::to_string))
                .collect()
        } else {
            ws.record_fields(base)
        };
        matches = members
            .into_iter()
            .filter(|m| m.starts_with(partial))
            .collect();
    } else if after_number && !word.chars().next().is_some_and(|c| c.is_ascii_digit()) {
        matches = crate::units::symbols()
            .into_iter()
            .filter(|u| u.starts_with(word))
            .map(str::to_string)
            .collect();
    } else if word.chars().next().is_some_and(|c| c.is_ascii_digit()) {
        // Inside a number: offer units for what follows it.
        let digits = word.trim_start_matches(|c: char| c.is_ascii_digit() || c == '.' || c == '_');
        rstart = cursor - digits.len();
        matches = crate::units::symbols()
            .into_iter()
            .filter(|u| u.starts_with(digits))
            .map(str::to_string)
            .collect();
    } else {
        let mut all: Vec<String> = ws.names();
        all.extend(builtins::namespaces().iter().map(|n| format!("{n}.")));
        all.extend(MATH.iter().map(|s| s.to_string()));
        all.extend(KEYWORDS.iter().map(|s| s.to_string()));
        all.extend(builtins::series::ALL.iter().map(|s| s.name.to_string()));
        matches = all.into_iter().filter(|m| m.starts_with(word)).collect();
    }
    matches.sort();
    matches.dedup();
    Completion {
        matches,
        start: rstart,
        end: cursor,
    }
}

/// The dotted path under the cursor.
fn path_at(source: &str, cursor: usize) -> &str {
    let cursor = floor_boundary(source, cursor);
    let start = path_start(source, cursor);
    let mut end = cursor;
    for (i, c) in source[cursor..].char_indices() {
        if is_name_char(c) || c == '.' {
            end = cursor + i + c.len_utf8();
        } else {
            break;
        }
    }
    source[start..end].trim_matches('.')
}

/// The documentation of a built-in, as shown on inspection.
pub fn builtin_doc(b: &builtins::Builtin) -> String {
    let mut t = format!(
        "{}\n\n{}\n\nFormula:\n{}\n",
        b.doc.signature, b.doc.summary, b.doc.formula
    );
    if !b.doc.fields.is_empty() {
        t.push_str("\nFields:\n");
        for f in b.doc.fields {
            t.push_str(&format!("  {:<12} [{}]  {}\n", f.name, f.unit, f.meaning));
        }
    }
    if !b.params.is_empty() {
        t.push_str("\nParameters:\n");
        for p in b.params {
            let d = if p.required {
                "required".to_string()
            } else if p.default.is_empty() {
                "optional".to_string()
            } else {
                format!("default {}", p.default)
            };
            t.push_str(&format!("  {:<12} {d}\n", p.name));
        }
    }
    t.push_str(&format!(
        "\nSource: {}\n\nCaveats: {}\n",
        b.doc.source, b.doc.caveats
    ));
    t
}

/// A spread (a difference) in the value's display unit; temperature spreads in kelvin, as
/// every temperature difference is shown.
fn spread_text(si: f64, value: &Quantity, unit: Option<&Unit>) -> String {
    const SIG: usize = 3;
    match unit {
        Some(u) if value.dim != Dim::TEMPERATURE => units::format_in(si, false, u, SIG),
        _ => units::format_si(si, value.dim, false, SIG),
    }
}

pub fn inspect(
    ws: &Worksheet,
    source: &str,
    cursor: usize,
    interrupt: &Interrupt,
) -> Option<Inspection> {
    let path = path_at(source, cursor);
    if path.is_empty() {
        return None;
    }
    if let Some(b) = builtins::lookup(path) {
        return Some(Inspection {
            text: builtin_doc(b),
        });
    }
    if builtins::namespaces().contains(&path) {
        let members: Vec<&str> = builtins::all()
            .iter()
            .filter(|b| b.path.starts_with(&format!("{path}.")))
            .map(|b| b.doc.signature)
            .collect();
        return Some(Inspection {
            text: format!("`{path}` built-ins:\n  {}", members.join("\n  ")),
        });
    }
    if let Some(s) = builtins::series::by_name(path) {
        return Some(Inspection {
            text: format!(
                "{}: IEC 60063 preferred-number series, {} values per decade:\n{}",
                s.name,
                s.values.len(),
                s.values
                    .iter()
                    .map(|v| format!("{v:.2}"))
                    .collect::<Vec<_>>()
                    .join(" ")
            ),
        });
    }
    let name = path.split('.').next().unwrap_or(path);
    if let Some((text, row)) = ws.definition_of(name) {
        let mut t = format!("{text}\n");
        if let Some(r) = row {
            t.push_str(&format!("\nvalue: {}\n", r.text()));
            if let Shown::Number {
                bounds: Some(b),
                value,
            } = &r.shown
            {
                if let Some(range) = r.range_text() {
                    t.push_str(&format!(
                        "worst case: {range}{}\n",
                        if b.conservative {
                            " (conservative)"
                        } else {
                            ""
                        }
                    ));
                }
                // Worked out now: a run leaves the spread out.
                let spread = ws.spread(&r.name, interrupt);
                // An interrupt that came after the spread was worked out changes nothing.
                if spread.is_none() && interrupt.is_raised() {
                    t.push_str("shares of the spread: not worked out (interrupted)\n");
                }
                let spread = spread.filter(|s| !s.shares.is_empty());
                for s in spread.iter().flat_map(|s| &s.shares) {
                    t.push_str(&format!(
                        "  {:>5.1} % of the spread from {}\n",
                        s.fraction * 100.0,
                        s.input
                    ));
                }
                if let Some(s) = &spread {
                    t.push_str(&format!(
                        "root-sum-square spread: ± {}\n",
                        spread_text(s.rss, value, r.unit.as_ref().or(r.preferred.as_ref()))
                    ));
                }
            }
        }
        let deps = ws.dependents_of(name);
        if !deps.is_empty() {
            t.push_str(&format!("used by: {}\n", deps.join(", ")));
        }
        return Some(Inspection { text: t });
    }
    let math = match path {
        "sqrt" => "sqrt(x): square root; halves the exponents of x's unit",
        "exp" => "exp(x): e to the power x; x must be dimensionless",
        "ln" => "ln(x): natural logarithm; x must be dimensionless and positive",
        "log10" => "log10(x): decimal logarithm; x must be dimensionless and positive",
        "abs" => "abs(x): magnitude",
        "min" => "min(a, b, …): the smallest of values of one dimension",
        "max" => "max(a, b, …): the largest of values of one dimension",
        "kelvin" => "kelvin(t): an absolute temperature as its thermodynamic value in K, for formulas such as Arrhenius",
        "tol" => "tol(x, down, up): x with an asymmetric tolerance, e.g. tol(10 µF, -20 %, +80 %)",
        _ => "",
    };
    if !math.is_empty() {
        return Some(Inspection {
            text: math.to_string(),
        });
    }
    crate::units::parse_unit(path).ok().map(|u| Inspection {
        text: format!(
            "unit {}: {} (1 {} = {} in SI)",
            u.text,
            u.dim.describe(),
            u.text,
            u.factor
        ),
    })
}

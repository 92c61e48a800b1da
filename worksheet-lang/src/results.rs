//! The results of running a worksheet, as plain data. The kernel and the command line
//! render these; nothing here knows about any output format.

use crate::diagnostic::Diagnostic;
use crate::units::Dim;

/// Everything one cell shows.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CellReport {
    /// The key the worksheet knows the cell by (a front end's cell id, or one it made).
    pub cell: String,
    /// The cell's source as last run (diagnostic spans index into it).
    pub source: String,
    /// Errors (and non-check warnings such as a unit that shadows a name) of this cell.
    pub diagnostics: Vec<Diagnostic>,
    /// Givens and derived values in statement order; record fields appear as their own
    /// rows (`u1.loss`).
    pub values: Vec<ValueRow>,
    pub checks: Vec<CheckRow>,
    pub warnings: Vec<WarningRow>,
    pub sweeps: Vec<SweepTable>,
    /// Values of bare expressions (`EXPR`, `EXPR as UNIT`), shown as the execute result.
    pub shown: Vec<ValueRow>,
    /// For a block updated by another cell's run: the changes that caused it.
    pub updated_by: Vec<Change>,
    /// For the cell that was run: the other cells it updated, each summarised by what it
    /// holds (`p, check p <= 1 W`).
    pub updated_cells: Vec<String>,
    /// What the cell works with that can hurt someone beyond what its numbers show (a
    /// battery), each once, for the renderers' cautions.
    pub hazards: Vec<Hazard>,
}

/// A danger that a built-in stands for by what it models, whatever the numbers: the
/// renderers caution about it. (Hot surfaces and shock voltages are found from the numbers.)
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Hazard {
    /// A battery: cells, lithium cells above all, can overheat, vent or burn.
    Battery,
}

impl CellReport {
    /// A short description of what the cell holds, for "updated …" notes.
    pub fn summary(&self) -> String {
        let mut parts: Vec<String> = Vec::new();
        for v in &self.values {
            let name = v.name.split('.').next().unwrap_or(&v.name).to_string();
            if !parts.contains(&name) {
                parts.push(name);
            }
        }
        parts.extend(self.checks.iter().map(|c| format!("check {}", c.text)));
        parts.extend(self.sweeps.iter().map(|s| format!("sweep over {}", s.over)));
        if parts.len() > 4 {
            let more = parts.len() - 3;
            parts.truncate(3);
            parts.push(format!("{more} more"));
        }
        if parts.is_empty() {
            self.cell.clone()
        } else {
            parts.join(", ")
        }
    }
}

impl CellReport {
    /// The same results: equal in everything but what a run says of other cells
    /// (`updated_by`, `updated_cells`), which is news of that run, not of this cell.
    pub fn same_results(&self, other: &CellReport) -> bool {
        let CellReport {
            cell,
            source,
            diagnostics,
            values,
            checks,
            warnings,
            sweeps,
            shown,
            updated_by: _,
            updated_cells: _,
            hazards,
        } = self;
        *cell == other.cell
            && *source == other.source
            && *diagnostics == other.diagnostics
            && *values == other.values
            && *checks == other.checks
            && *warnings == other.warnings
            && *sweeps == other.sweeps
            && *shown == other.shown
            && *hazards == other.hazards
    }

    pub fn has_errors(&self) -> bool {
        self.diagnostics.iter().any(|d| d.is_error())
    }
    pub fn failed_checks(&self) -> usize {
        self.checks.iter().filter(|c| !c.passed).count()
    }
}

/// A number with its dimension; `si` is in the coherent SI unit of `dim`, absolute
/// temperatures in kelvin with `absolute` set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantity {
    pub si: f64,
    pub dim: Dim,
    pub absolute: bool,
}

/// Worst-case bounds of an uncertain value.
#[derive(Debug, Clone, PartialEq)]
pub struct Bounds {
    pub min: f64,
    pub max: f64,
    /// Guaranteed to enclose, but not proven to be the exact extremes.
    pub conservative: bool,
    /// What each input contributes. It takes evaluations of its own (each input at its two
    /// ends, the others nominal), so a run leaves it out (None); `Worksheet::spread` works
    /// it out for one value when asked.
    pub spread: Option<Spread>,
}

/// How the inputs share a value's spread.
#[derive(Debug, Clone, PartialEq)]
pub struct Spread {
    /// Each input's share of the spread (fractions summing to 1 when there is a spread),
    /// largest first.
    pub shares: Vec<Share>,
    /// Root-sum-square half-spread, in SI.
    pub rss: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Share {
    /// The input's name: a given's name, or a description such as "tolerance in R7".
    pub input: String,
    pub fraction: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub enum Shown {
    Number {
        value: Quantity,
        bounds: Option<Bounds>,
    },
    Text(String),
    /// A list, or anything else shown as text (already formatted).
    Other(String),
}

#[derive(Debug, Clone, PartialEq)]
pub struct ValueRow {
    /// `tj`, `u1.loss`, or the source text of a bare expression.
    pub name: String,
    pub given: bool,
    pub note: String,
    pub shown: Shown,
    /// The declared or `as` unit, if any (the display uses it instead of the automatic one).
    pub unit: Option<crate::units::Unit>,
    /// Preferred display when no unit was declared (e.g. "%" for an efficiency), if any.
    pub preferred: Option<crate::units::Unit>,
    /// A sizing result (`heat.sink_for`, `heat.max_power`, `heat.max_ambient`): its text
    /// leads with the worst-case minimum, the side the design must meet.
    pub leads_with_minimum: bool,
}

/// Significant digits of displayed numbers.
pub(crate) const SIG: usize = 3;

/// A value in SI as text: in `unit` when given, else with an SI prefix.
pub(crate) fn fmt_value(si: f64, dim: Dim, abs: bool, unit: Option<&crate::units::Unit>) -> String {
    match unit {
        Some(u) => crate::units::format_in(si, abs, u, SIG),
        None => crate::units::format_si(si, dim, abs, SIG),
    }
}

impl ValueRow {
    /// The unit the texts use: the declared or `as` unit, else the preferred one.
    fn display_unit(&self) -> Option<&crate::units::Unit> {
        self.unit.as_ref().or(self.preferred.as_ref())
    }

    /// Display text, e.g. "79.4 °C" (three significant digits, or the declared unit's); a
    /// sizing result reads "3.12 K/W at worst (nominal 3.40 K/W)". Made when asked for: the
    /// row holds the numbers, and rendering turns them into text.
    pub fn text(&self) -> String {
        match self.worst_note() {
            Some(note) => format!("{} {note}", self.value_text()),
            None => self.value_text(),
        }
    }

    /// The number the row leads with, alone: "79.4 °C"; for a sizing result with a worst
    /// case, its worst-case minimum ("3.12 K/W"). Tables put it in their number and unit
    /// columns.
    pub fn value_text(&self) -> String {
        match &self.shown {
            Shown::Number { value, bounds } => {
                let u = self.display_unit();
                match bounds {
                    Some(b) if self.leads_with_minimum => {
                        fmt_value(b.min, value.dim, value.absolute, u)
                    }
                    _ => fmt_value(value.si, value.dim, value.absolute, u),
                }
            }
            Shown::Text(t) | Shown::Other(t) => t.clone(),
        }
    }

    /// What a sizing result's leading number is: "at worst (nominal 3.40 K/W)"; None for
    /// every other row.
    pub fn worst_note(&self) -> Option<String> {
        match &self.shown {
            Shown::Number {
                value,
                bounds: Some(_),
            } if self.leads_with_minimum => {
                let nominal = fmt_value(value.si, value.dim, value.absolute, self.display_unit());
                Some(format!("at worst (nominal {nominal})"))
            }
            _ => None,
        }
    }

    /// Display text of the worst-case range, e.g. "69.8 °C … 91.0 °C"; None for a value
    /// without one.
    pub fn range_text(&self) -> Option<String> {
        let Shown::Number {
            value,
            bounds: Some(b),
        } = &self.shown
        else {
            return None;
        };
        let u = self.display_unit();
        let (lo, hi) = (
            fmt_value(b.min, value.dim, value.absolute, u),
            fmt_value(b.max, value.dim, value.absolute, u),
        );
        Some(format!("{lo} … {hi}"))
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct CheckRow {
    /// The check as written, e.g. "tj <= 125 °C".
    pub text: String,
    pub note: String,
    pub passed: bool,
    /// The two sides at the deciding corner, in SI (`worst_absolute` and `limit_absolute`
    /// say which is an absolute temperature, in kelvin).
    pub worst: f64,
    pub limit: f64,
    /// Worst-case difference of the two sides, positive when passing, in SI of `dim`.
    pub margin: f64,
    pub dim: Dim,
    pub conservative: bool,
    /// Whether each side on its own is an absolute temperature (a side may be a
    /// difference: `check tj >= 10 K`).
    pub worst_absolute: bool,
    pub limit_absolute: bool,
}

impl CheckRow {
    /// Both sides are absolute temperatures (the results data's `absolute`).
    pub fn absolute(&self) -> bool {
        self.worst_absolute && self.limit_absolute
    }

    /// The two sides at the deciding corner as text, with enough digits that they differ
    /// in the direction of the verdict (unless the numbers are equal). Made when asked for.
    pub fn side_texts(&self) -> (String, String) {
        let mut sig = SIG;
        loop {
            let a = crate::units::format_si(self.worst, self.dim, self.worst_absolute, sig);
            let b = crate::units::format_si(self.limit, self.dim, self.limit_absolute, sig);
            if a != b || sig >= 12 || self.worst == self.limit {
                return (a, b);
            }
            sig += 1;
        }
    }

    /// The margin as text, signed ("+34.0 K"; a difference, so temperatures in kelvin).
    pub fn margin_text(&self) -> String {
        crate::units::format_difference(self.margin, self.dim, SIG)
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct WarningRow {
    /// What raised it: a definition's name (`u1`) or `check`.
    pub source: String,
    pub text: String,
}

#[derive(Debug, Clone, PartialEq)]
pub struct SweepTable {
    pub over: String,
    pub dim: Dim,
    pub absolute: bool,
    /// Swept values in SI.
    pub points: Vec<f64>,
    pub series: Vec<SweepSeries>,
    /// Check limits that apply to a swept result: (series name, limit in SI, text).
    pub limits: Vec<SweepLimit>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct SweepSeries {
    pub name: String,
    pub dim: Dim,
    pub absolute: bool,
    pub nominal: Vec<f64>,
    /// Present when the series is uncertain.
    pub min: Option<Vec<f64>>,
    pub max: Option<Vec<f64>>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct SweepLimit {
    pub series: String,
    pub limit: f64,
    pub text: String,
}

/// One name whose value changed, with its old and new display text.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    pub name: String,
    pub old: String,
    pub new: String,
}

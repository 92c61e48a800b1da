//! What the sweep tables and the sweep charts share: the unit a column or an axis is shown in,
//! families of curves, the check limits that apply to a series, and the rows a long table keeps.

use std::collections::BTreeMap;
use worksheet_lang::results::{SweepLimit, SweepSeries, SweepTable};
use worksheet_lang::units::{format_number, format_si, parse_unit, Dim, Unit};

/// A table with more rows than this is shortened to about this many: evenly spaced rows, the
/// last row, and the rows holding each series' extremes.
pub(super) const LONG_TABLE_ROWS: usize = 12;

/// The unit one column or axis shows its numbers in: the unit (with its engineering prefix)
/// that the language would pick for the largest magnitude among them, so "50 mA … 300 mA"
/// becomes a column in mA and absolute temperatures a column in °C.
pub(super) struct Scale {
    unit: Option<Unit>,
    absolute: bool,
    /// The unit text for labels: "mA", "°C"; empty for a dimensionless number.
    pub(super) text: String,
}

impl Scale {
    pub(super) fn of(values: impl IntoIterator<Item = f64>, dim: Dim, absolute: bool) -> Scale {
        let largest = values
            .into_iter()
            .filter(|x| x.is_finite())
            .fold(0.0_f64, |m, x| m.max(x.abs()));
        let shown = format_si(largest, dim, absolute, 3);
        let unit = shown
            .split_once(' ')
            .and_then(|(_, u)| parse_unit(u).ok())
            .filter(|u| u.dim == dim);
        match unit {
            Some(u) => Scale {
                text: u.text.clone(),
                unit: Some(u),
                absolute,
            },
            // No unit text (a dimensionless number) or none the unit parser reads back: the
            // coherent SI unit, in which the data already is.
            None => Scale {
                unit: None,
                absolute,
                text: if dim == Dim::NONE {
                    String::new()
                } else {
                    dim.symbol_text()
                },
            },
        }
    }

    /// An SI value in this scale's unit.
    pub(super) fn show(&self, si: f64) -> f64 {
        match &self.unit {
            Some(u) => u.from_si(si, self.absolute),
            None => si,
        }
    }

    /// An SI value as a number in this scale's unit, to three significant digits.
    pub(super) fn number(&self, si: f64) -> String {
        format_number(self.show(si), 3)
    }

    /// A heading or axis label: the name with its unit in brackets, as a declaration writes
    /// it ("iload [mA]"); a dimensionless number has its name alone.
    pub(super) fn label(&self, name: &str) -> String {
        if self.text.is_empty() || self.text == "1" {
            name.to_string()
        } else {
            format!("{name} [{}]", self.text)
        }
    }
}

/// The scale of a group of series: over all their nominal and worst-case values.
pub(super) fn series_scale(series: &[&SweepSeries], dim: Dim, absolute: bool) -> Scale {
    Scale::of(series.iter().flat_map(|s| all_values(s)), dim, absolute)
}

fn all_values(s: &SweepSeries) -> impl Iterator<Item = f64> + '_ {
    s.nominal
        .iter()
        .chain(s.min.iter().flatten())
        .chain(s.max.iter().flatten())
        .copied()
}

/// A member of a family of curves, named "loss (vin = 10.0 V)": its expression ("loss") and
/// the value of the second swept name ("vin = 10.0 V"). `None` for a series of its own.
pub(super) fn family_member(name: &str) -> Option<(&str, &str)> {
    let body = name.strip_suffix(')')?;
    let (base, member) = body.rsplit_once(" (")?;
    member.contains(" = ").then_some((base, member))
}

/// The expression a series shows, without the family value.
pub(super) fn base_name(name: &str) -> &str {
    family_member(name).map_or(name, |(base, _)| base)
}

/// A check limit on an expression applies to its series and, in a family, to every member.
pub(super) fn limit_applies(limit: &SweepLimit, series: &str) -> bool {
    series == limit.series
        || series
            .strip_prefix(limit.series.as_str())
            .is_some_and(|rest| rest.starts_with(" ("))
}

/// The worst-case band of a series at a point, when the series is uncertain.
pub(super) fn band_at(s: &SweepSeries, i: usize) -> Option<(f64, f64)> {
    if s.min.is_none() && s.max.is_none() {
        return None;
    }
    let nominal = s.nominal.get(i).copied()?;
    let lo = s.min.as_ref().and_then(|m| m.get(i).copied());
    let hi = s.max.as_ref().and_then(|m| m.get(i).copied());
    Some((lo.unwrap_or(nominal), hi.unwrap_or(nominal)))
}

/// The index of the largest (or smallest) of `xs`, the first one on a tie.
fn arg_extreme(xs: impl Iterator<Item = f64>, largest: bool) -> Option<usize> {
    xs.enumerate()
        .fold(None::<(usize, f64)>, |best, (i, x)| match best {
            Some((_, b)) if !(if largest { x > b } else { x < b }) => best,
            _ => Some((i, x)),
        })
        .map(|(i, _)| i)
}

/// A row of a sweep table: the index of its point and the extremes it holds ("▲ max").
pub(super) struct Row {
    pub(super) index: usize,
    pub(super) marks: Vec<String>,
}

/// The rows a sweep table shows, in order.
pub(super) struct TableRows {
    pub(super) rows: Vec<Row>,
    pub(super) total: usize,
    /// Every `stride`-th row is shown (1 when all are).
    pub(super) stride: usize,
}

impl TableRows {
    pub(super) fn left_out(&self) -> usize {
        self.total - self.rows.len()
    }
}

/// Every row of a short table. A long one keeps the rows where a series' band (or its nominal
/// curve, when it has no band) is largest or smallest, each marked with what it holds, the
/// last row, and every `stride`-th row from the first, the stride chosen so that the table
/// has about [`LONG_TABLE_ROWS`] rows and still shows the curve's course.
pub(super) fn table_rows(s: &SweepTable) -> TableRows {
    let n = s.points.len();
    if n <= LONG_TABLE_ROWS {
        return TableRows {
            rows: (0..n)
                .map(|index| Row {
                    index,
                    marks: Vec::new(),
                })
                .collect(),
            total: n,
            stride: 1,
        };
    }
    let mut marks: BTreeMap<usize, Vec<String>> = BTreeMap::new();
    marks.insert(0, Vec::new());
    marks.insert(n - 1, Vec::new());
    let named = s.series.len() > 1;
    for se in &s.series {
        let upper = |i: usize| band_at(se, i).map_or(se.nominal.get(i).copied(), |b| Some(b.1));
        let lower = |i: usize| band_at(se, i).map_or(se.nominal.get(i).copied(), |b| Some(b.0));
        let hi = arg_extreme((0..n).map_while(upper), true);
        let lo = arg_extreme((0..n).map_while(lower), false);
        for (at, mark) in [(hi, "▲ max"), (lo, "▼ min")] {
            if let Some(i) = at {
                let text = if named {
                    format!("{mark} {}", se.name)
                } else {
                    mark.to_string()
                };
                marks.entry(i).or_default().push(text);
            }
        }
    }
    // Evenly spaced rows, as many as the extremes leave room for (first and last included).
    let spaced = LONG_TABLE_ROWS.saturating_sub(marks.len()) + 2;
    let stride = (n - 1).div_ceil(spaced - 1).max(1);
    for i in (0..n).step_by(stride) {
        marks.entry(i).or_default();
    }
    TableRows {
        rows: marks
            .into_iter()
            .map(|(index, marks)| Row { index, marks })
            .collect(),
        total: n,
        stride,
    }
}

/// "iload from 50.0 mA to 300 mA, 26 points".
pub(super) fn heading(s: &SweepTable) -> String {
    match (s.points.first(), s.points.last()) {
        (Some(&a), Some(&b)) => format!(
            "{} from {} to {}, {} point{}",
            s.over,
            format_si(a, s.dim, s.absolute, 3),
            format_si(b, s.dim, s.absolute, 3),
            s.points.len(),
            if s.points.len() == 1 { "" } else { "s" }
        ),
        _ => format!("{}, no points", s.over),
    }
}

/// "39 of 50 rows left out: …", or `None` when the table shows every row.
pub(super) fn left_out_text(rows: &TableRows) -> Option<String> {
    let left = rows.left_out();
    (left > 0).then(|| {
        format!(
            "{left} of {} rows left out: shown are one row in {}, the last row and each \
series' extremes (marked); the results data holds every point",
            rows.total, rows.stride
        )
    })
}

/// One table column per series value: its heading, and for each row its text.
pub(super) struct Column {
    pub(super) heading: String,
    /// Nominal values are numbers (aligned right); worst-case ranges are text.
    pub(super) is_range: bool,
    pub(super) cells: Vec<String>,
}

/// The columns of a sweep table for the given rows: the swept value, then per series its
/// nominal value and, when uncertain, its worst-case range, each series in its own unit.
pub(super) fn columns(s: &SweepTable, rows: &TableRows) -> Vec<Column> {
    let over = Scale::of(s.points.iter().copied(), s.dim, s.absolute);
    let mut cols = vec![Column {
        heading: over.label(&s.over),
        is_range: false,
        cells: rows
            .rows
            .iter()
            .map(|r| {
                s.points
                    .get(r.index)
                    .map_or(String::new(), |&x| over.number(x))
            })
            .collect(),
    }];
    for se in &s.series {
        let scale = series_scale(&[se], se.dim, se.absolute);
        cols.push(Column {
            heading: scale.label(&se.name),
            is_range: false,
            cells: rows
                .rows
                .iter()
                .map(|r| {
                    se.nominal
                        .get(r.index)
                        .map_or(String::new(), |&x| scale.number(x))
                })
                .collect(),
        });
        if se.min.is_some() || se.max.is_some() {
            cols.push(Column {
                heading: "worst case".to_string(),
                is_range: true,
                cells: rows
                    .rows
                    .iter()
                    .map(|r| {
                        band_at(se, r.index).map_or(String::new(), |(lo, hi)| {
                            format!("{} … {}", scale.number(lo), scale.number(hi))
                        })
                    })
                    .collect(),
            });
        }
    }
    cols
}

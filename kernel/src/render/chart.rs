//! Sweep charts, drawn with plotters: one chart per group of series of a sweep that share a
//! dimension (and absoluteness), as SVG and as a PNG fallback for notebooks that open
//! untrusted (JupyterLab shows no SVG there).
//!
//! Each chart has the nominal curve of each series, its worst-case band (the filled area
//! between its min and max), a dashed line for each check limit on a swept result, labelled
//! with the check's text, and axis labels with units in brackets, as declarations write them.
//! A legend at the right names the curves when there are several or when a band needs naming.
//!
//! The look: a white card with hairline horizontal grid lines only, dark grey text, and a
//! small palette of mid-tone colours picked for this program, distinguishable on white and on
//! a dark page around the card. Text is laid out with DejaVu Sans (shipped beside this file,
//! licence in `fonts/LICENSE-DejaVu.txt`), so the PNG needs no system fonts; the SVG names the
//! generic "sans-serif" family and the viewer's own font draws it.

use super::html::capped_note;
use super::sweep::{base_name, family_member, limit_applies, series_scale, Scale};
use base64::Engine as _;
use html_escape::encode_text;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{register_font, FontStyle};
use serde_json::{Map, Value};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::OnceLock;
use worksheet_lang::results::{CellReport, SweepLimit, SweepSeries, SweepTable};
use worksheet_lang::units::{format_si, Dim};

const WIDTH: u32 = 760;
const HEIGHT: u32 = 420;
/// Series with at most this many points get a small marker at each point; longer ones are
/// drawn as lines alone, which keeps the SVG small.
const MARKERS_UP_TO: usize = 30;
/// Legend labels longer than this are shortened with "…".
const LEGEND_CHARS: usize = 30;

const FONT_NAME: &str = "sans-serif";
const FONT: &[u8] = include_bytes!("fonts/DejaVuSans.ttf");

const BACKGROUND: RGBColor = RGBColor(0xff, 0xff, 0xff);
const TEXT: RGBColor = RGBColor(0x33, 0x38, 0x3d);
const TICKS: RGBColor = RGBColor(0x5c, 0x63, 0x6a);
const AXIS: RGBColor = RGBColor(0x9a, 0xa0, 0xa6);
const GRID: RGBColor = RGBColor(0xe7, 0xe9, 0xec);
const LIMIT: RGBColor = RGBColor(0xc4, 0x3d, 0x33);
/// Curve colours, in order of use.
const PALETTE: [RGBColor; 8] = [
    RGBColor(0x2f, 0x71, 0x87), // deep teal blue
    RGBColor(0xc9, 0x82, 0x2b), // amber
    RGBColor(0x8a, 0x5a, 0x99), // plum
    RGBColor(0x5e, 0x8c, 0x3a), // moss
    RGBColor(0xb5, 0x52, 0x6b), // rose
    RGBColor(0x5a, 0x6f, 0xb0), // slate blue
    RGBColor(0xa3, 0x8a, 0x34), // ochre
    RGBColor(0x6f, 0x7a, 0x84), // grey
];
/// Opacity of a worst-case band: light enough that the curves and grid show through, and that
/// overlapping bands of a family stay readable.
const BAND_ALPHA: f64 = 0.16;

/// Registers the embedded font with plotters once; false if it could not be read.
fn font_ready() -> bool {
    static READY: OnceLock<bool> = OnceLock::new();
    *READY.get_or_init(|| register_font(FONT_NAME, FontStyle::Normal, FONT).is_ok())
}

/// One chart, in display units, ready to draw on any backend.
struct Chart {
    /// "tj over iload", also the `text/plain` of the bundle after "chart: ".
    title: String,
    x_label: String,
    y_label: String,
    x_range: (f64, f64),
    y_range: (f64, f64),
    xs: Vec<f64>,
    curves: Vec<Curve>,
    limits: Vec<LimitLine>,
    legend_title: Option<String>,
    /// Whether the legend needs an entry for the worst-case band.
    has_band: bool,
}

struct Curve {
    label: String,
    colour: RGBColor,
    nominal: Vec<f64>,
    band: Option<(Vec<f64>, Vec<f64>)>,
}

struct LimitLine {
    y: f64,
    label: String,
    /// Set when the limit lies far outside the data and is only named at the chart's edge:
    /// true above, false below.
    off_chart: Option<bool>,
}

/// The chart bundles of a cell, within `budget` bytes of SVG and PNG together.
pub(super) fn bundles(report: &CellReport, budget: usize) -> Vec<Map<String, Value>> {
    let charts: Vec<Chart> = report.sweeps.iter().flat_map(charts_of).collect();
    let mut out = Vec::new();
    let mut used = 0usize;
    let mut left_out: Vec<String> = Vec::new();
    for c in &charts {
        if !left_out.is_empty() {
            left_out.push(c.title.clone());
            continue;
        }
        match draw_both(c) {
            Ok((svg, png)) => {
                let png = base64::engine::general_purpose::STANDARD.encode(png);
                let size = svg.len() + png.len();
                if used + size > budget {
                    left_out.push(c.title.clone());
                    continue;
                }
                used += size;
                let mut m = Map::new();
                m.insert("image/svg+xml".into(), Value::String(svg));
                m.insert("image/png".into(), Value::String(png));
                m.insert(
                    "text/plain".into(),
                    Value::String(format!("chart: {}", c.title)),
                );
                out.push(m);
            }
            Err(e) => out.push(note(&format!("The chart of {} could not be drawn: {e}", c.title))),
        }
    }
    if !left_out.is_empty() {
        let what = if left_out.len() == 1 {
            format!("The chart of {} is", left_out[0])
        } else {
            format!(
                "{} charts ({}) are",
                left_out.len(),
                left_out.join("; ")
            )
        };
        out.push(note(&capped_note(&what)));
    }
    out
}

/// A bundle holding a note in place of a chart.
fn note(text: &str) -> Map<String, Value> {
    let mut m = Map::new();
    m.insert("text/plain".into(), Value::String(text.to_string()));
    m.insert(
        "text/html".into(),
        Value::String(format!(
            "<div style=\"margin: 6px 0 2px 0; padding: 4px 8px; \
border-left: 3px solid rgba(128, 128, 128, 0.6); background: rgba(128, 128, 128, 0.10)\">{}</div>",
            encode_text(text)
        )),
    );
    m
}

/// The charts of one sweep: its series grouped by dimension and absoluteness, in order of
/// first appearance.
fn charts_of(s: &SweepTable) -> Vec<Chart> {
    let mut groups: Vec<(Dim, bool, Vec<&SweepSeries>)> = Vec::new();
    for se in &s.series {
        match groups
            .iter_mut()
            .find(|(d, a, _)| *d == se.dim && *a == se.absolute)
        {
            Some(g) => g.2.push(se),
            None => groups.push((se.dim, se.absolute, vec![se])),
        }
    }
    groups
        .into_iter()
        .filter_map(|(dim, absolute, series)| chart_of(s, dim, absolute, &series))
        .collect()
}

fn chart_of(s: &SweepTable, dim: Dim, absolute: bool, series: &[&SweepSeries]) -> Option<Chart> {
    let n = s.points.len();
    if n == 0 {
        return None;
    }
    let xscale = Scale::of(s.points.iter().copied(), s.dim, s.absolute);
    let yscale = series_scale(series, dim, absolute);
    let xs: Vec<f64> = s.points.iter().map(|&x| xscale.show(x)).collect();

    // Names: the expressions in order, each once; a family names its curves by the value of
    // its second swept name.
    let mut bases: Vec<&str> = Vec::new();
    for se in series {
        let b = base_name(&se.name);
        if !bases.contains(&b) {
            bases.push(b);
        }
    }
    let members: Vec<&str> = series
        .iter()
        .filter_map(|se| family_member(&se.name).map(|(_, m)| m))
        .collect();
    let one_family = bases.len() == 1 && members.len() == series.len() && members.len() > 1;
    let family_of = members
        .first()
        .and_then(|m| m.split_once(" = "))
        .map(|(name, _)| name.to_string());

    let curves: Vec<Curve> = series
        .iter()
        .enumerate()
        .map(|(k, se)| {
            let take = |xs: &[f64]| -> Vec<f64> { xs.iter().take(n).map(|&y| yscale.show(y)).collect() };
            let nominal = take(&se.nominal);
            let band = (se.min.is_some() || se.max.is_some()).then(|| {
                (
                    take(se.min.as_deref().unwrap_or(&se.nominal)),
                    take(se.max.as_deref().unwrap_or(&se.nominal)),
                )
            });
            let label = match family_member(&se.name) {
                Some((_, m)) if one_family => m.to_string(),
                _ => se.name.clone(),
            };
            Curve {
                label: shorten(&label),
                colour: PALETTE[k % PALETTE.len()],
                nominal,
                band,
            }
        })
        .collect();

    let (mut lo, mut hi) = curves
        .iter()
        .flat_map(|c| {
            c.nominal
                .iter()
                .chain(c.band.iter().flat_map(|(a, b)| a.iter().chain(b)))
        })
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &y| {
            (lo.min(y), hi.max(y))
        });
    if !lo.is_finite() || !hi.is_finite() {
        return None;
    }

    // Limits that apply, each once. A limit near the data widens the axis to show it, so the
    // headroom is visible; one far away (more than two data spans off) would squash the
    // curves, and is only named at the edge.
    let mut applying: Vec<&SweepLimit> = Vec::new();
    for l in &s.limits {
        let applies = series.iter().any(|se| limit_applies(l, &se.name));
        if applies && !applying.iter().any(|a| a.limit == l.limit && a.text == l.text) {
            applying.push(l);
        }
    }
    let span = (hi - lo).max(hi.abs().max(lo.abs()) * 1e-3).max(1e-12);
    let (data_lo, data_hi) = (lo, hi);
    let mut limits = Vec::new();
    for l in applying {
        let y = yscale.show(l.limit);
        let off_chart = if y > data_hi + 2.0 * span {
            Some(true)
        } else if y < data_lo - 2.0 * span {
            Some(false)
        } else {
            lo = lo.min(y);
            hi = hi.max(y);
            None
        };
        let label = match off_chart {
            None => l.text.clone(),
            Some(above) => format!(
                "{} {}: limit {}, off the chart",
                if above { "▲" } else { "▼" },
                l.text,
                format_si(l.limit, dim, absolute, 3)
            ),
        };
        limits.push(LimitLine {
            y,
            label,
            off_chart,
        });
    }
    let span = (hi - lo).max(hi.abs().max(lo.abs()) * 0.05).max(1e-9);
    let pad_top = if limits.iter().any(|l| l.off_chart.is_none()) {
        0.12
    } else {
        0.07
    };
    let y_range = (lo - 0.07 * span, hi + pad_top * span);

    let (x0, x1) = xs
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let x_range = if x1 > x0 {
        (x0, x1)
    } else {
        let pad = (x0.abs() * 0.05).max(1e-9);
        (x0 - pad, x0 + pad)
    };

    let what = match (&family_of, one_family) {
        (Some(f), true) => format!("{} over {}, one curve per {f}", bases.join(", "), s.over),
        _ => format!("{} over {}", bases.join(", "), s.over),
    };
    let y_name = if bases.len() == 1 {
        bases[0].to_string()
    } else {
        quantity_words(dim, absolute)
    };
    Some(Chart {
        title: what,
        x_label: xscale.label(&s.over),
        y_label: yscale.label(&y_name),
        x_range,
        y_range,
        xs,
        has_band: curves.iter().any(|c| c.band.is_some()),
        curves,
        limits,
        legend_title: if one_family { Some(bases[0].to_string()) } else { None },
    })
}

/// "power", "absolute temperature": the kind of quantity, for a y axis holding several names.
fn quantity_words(dim: Dim, absolute: bool) -> String {
    let w = worksheet_lang::units::describe_quantity(dim, absolute);
    w.strip_prefix("an ")
        .or_else(|| w.strip_prefix("a "))
        .unwrap_or(&w)
        .to_string()
}

fn shorten(label: &str) -> String {
    if label.chars().count() <= LEGEND_CHARS {
        label.to_string()
    } else {
        let mut s: String = label.chars().take(LEGEND_CHARS - 1).collect();
        s.push('…');
        s
    }
}

/// Tick label: as many decimals as a tenth of the axis span needs, no "-0".
fn tick(v: f64, span: f64) -> String {
    let step = span / 10.0;
    let decimals = if step > 0.0 && step.is_finite() {
        (-step.log10().floor()).clamp(0.0, 9.0) as usize
    } else {
        3
    };
    let s = format!("{v:.decimals$}");
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => s,
    }
}

/// The chart as SVG text and as PNG bytes.
fn draw_both(c: &Chart) -> Result<(String, Vec<u8>), String> {
    if !font_ready() {
        return Err("the chart font could not be loaded".into());
    }
    // plotters may panic on coordinates it cannot handle; a chart is not worth the kernel.
    catch_unwind(AssertUnwindSafe(|| {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
            draw(&root, c)?;
            root.present().map_err(|e| e.to_string())?;
        }
        let mut rgb = vec![0u8; (WIDTH * HEIGHT * 3) as usize];
        {
            let root = BitMapBackend::with_buffer(&mut rgb, (WIDTH, HEIGHT)).into_drawing_area();
            draw(&root, c)?;
            root.present().map_err(|e| e.to_string())?;
        }
        Ok((svg, encode_png(&rgb, WIDTH, HEIGHT)?))
    }))
    .unwrap_or_else(|_| Err("the charting library failed".into()))
}

fn encode_png(rgb: &[u8], width: u32, height: u32) -> Result<Vec<u8>, String> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, width, height);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut w = enc.write_header().map_err(|e| e.to_string())?;
        w.write_image_data(rgb).map_err(|e| e.to_string())?;
        w.finish().map_err(|e| e.to_string())?;
    }
    Ok(out)
}

fn font(size: f64, colour: RGBColor) -> TextStyle<'static> {
    (FONT_NAME, size).into_font().color(&colour)
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, c: &Chart) -> Result<(), String> {
    let err = |e: DrawingAreaErrorKind<DB::ErrorType>| e.to_string();
    root.fill(&BACKGROUND).map_err(err)?;

    let legend_font = font(12.5, TEXT);
    let mut entries: Vec<(String, Swatch)> = Vec::new();
    if c.curves.len() > 1 || c.has_band {
        for cv in &c.curves {
            entries.push((cv.label.clone(), Swatch::Line(cv.colour)));
        }
        if c.has_band {
            let colour = if c.curves.len() == 1 {
                c.curves[0].colour
            } else {
                PALETTE[PALETTE.len() - 1]
            };
            entries.push(("worst case".into(), Swatch::Band(colour)));
        }
    }
    let mut legend_width = 0u32;
    if !entries.is_empty() {
        let mut widest = 0u32;
        for (label, _) in entries.iter().chain(
            c.legend_title
                .as_ref()
                .map(|t| (t.clone(), Swatch::Line(TEXT)))
                .iter(),
        ) {
            let (w, _) = root.estimate_text_size(label, &legend_font).map_err(err)?;
            widest = widest.max(w);
        }
        legend_width = (widest + 46).clamp(110, 280);
    }
    let (plot, legend) = root.split_horizontally(WIDTH - legend_width);

    // Title, top left over the plot.
    root.draw_text(&c.title, &font(15.0, TEXT), (14, 12))
        .map_err(err)?;

    let (x0, x1) = c.x_range;
    let (y0, y1) = c.y_range;
    let mut chart = ChartBuilder::on(&plot)
        .margin_top(40)
        .margin_left(8)
        .margin_right(if legend_width > 0 { 8 } else { 22 })
        .margin_bottom(8)
        .x_label_area_size(46)
        .y_label_area_size(66)
        .build_cartesian_2d(x0..x1, y0..y1)
        .map_err(err)?;
    let xspan = x1 - x0;
    let yspan = y1 - y0;
    let xfmt = |v: &f64| tick(*v, xspan);
    let yfmt = |v: &f64| tick(*v, yspan);
    chart
        .configure_mesh()
        .disable_x_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .light_line_style(TRANSPARENT)
        .axis_style(AXIS.stroke_width(1))
        .x_labels(8)
        .y_labels(7)
        .x_label_formatter(&xfmt)
        .y_label_formatter(&yfmt)
        .label_style(font(12.0, TICKS))
        .axis_desc_style(font(13.0, TEXT))
        .x_desc(c.x_label.clone())
        .y_desc(c.y_label.clone())
        .set_all_tick_mark_size(4)
        .draw()
        .map_err(err)?;

    // Bands under everything else.
    for cv in &c.curves {
        if let Some((lo, hi)) = &cv.band {
            let mut outline: Vec<(f64, f64)> = c.xs.iter().copied().zip(hi.iter().copied()).collect();
            outline.extend(c.xs.iter().copied().zip(lo.iter().copied()).rev());
            chart
                .draw_series(std::iter::once(Polygon::new(
                    outline,
                    cv.colour.mix(BAND_ALPHA).filled(),
                )))
                .map_err(err)?;
        }
    }

    // Limits: a dashed line across the plot, its text above it at the right end (below it
    // when the line runs along the top of the plot).
    let limit_font = font(12.0, LIMIT);
    for l in &c.limits {
        match l.off_chart {
            None => {
                chart
                    .draw_series(DashedLineSeries::new(
                        [(x0, l.y), (x1, l.y)],
                        7,
                        5,
                        LIMIT.stroke_width(2),
                    ))
                    .map_err(err)?;
                let near_top = (y1 - l.y) < 0.08 * yspan;
                let (w, h) = plot.estimate_text_size(&l.label, &limit_font).map_err(err)?;
                let (w, h) = (w as i32, h as i32);
                let (top, anchor) = if near_top {
                    (4, VPos::Top)
                } else {
                    (-h - 5, VPos::Bottom)
                };
                let text_y = if near_top { 5 } else { -4 };
                let backdrop = Rectangle::new(
                    [(-w - 10, top), (-2, top + h + 2)],
                    BACKGROUND.mix(0.85).filled(),
                );
                let label = Text::new(
                    l.label.clone(),
                    (-6, text_y),
                    limit_font.pos(Pos::new(HPos::Right, anchor)),
                );
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((x1, l.y)) + backdrop + label,
                    ))
                    .map_err(err)?;
            }
            Some(above) => {
                let (y, anchor, dy) = if above {
                    (y1, VPos::Top, 4)
                } else {
                    (y0, VPos::Bottom, -4)
                };
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((x1, y))
                            + Text::new(
                                l.label.clone(),
                                (-6, dy),
                                limit_font.pos(Pos::new(HPos::Right, anchor)),
                            ),
                    ))
                    .map_err(err)?;
            }
        }
    }

    // Nominal curves on top.
    for cv in &c.curves {
        let points: Vec<(f64, f64)> = c.xs.iter().copied().zip(cv.nominal.iter().copied()).collect();
        let markers = points.len() <= MARKERS_UP_TO;
        chart
            .draw_series(LineSeries::new(points.iter().copied(), cv.colour.stroke_width(2)))
            .map_err(err)?;
        if markers {
            chart
                .draw_series(
                    points
                        .iter()
                        .map(|&p| Circle::new(p, 2, cv.colour.filled())),
                )
                .map_err(err)?;
        }
    }

    if !entries.is_empty() {
        draw_legend(&legend, c.legend_title.as_deref(), &entries, &legend_font).map_err(err)?;
    }
    Ok(())
}

enum Swatch {
    Line(RGBColor),
    Band(RGBColor),
}

fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    title: Option<&str>,
    entries: &[(String, Swatch)],
    style: &TextStyle<'_>,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let left = 4;
    let mut y = 52;
    if let Some(t) = title {
        area.draw_text(t, &font(12.5, TICKS), (left, y - 6))?;
        y += 20;
    }
    for (label, swatch) in entries {
        match swatch {
            Swatch::Line(colour) => {
                area.draw(&PathElement::new(
                    vec![(left, y), (left + 24, y)],
                    colour.stroke_width(2),
                ))?;
            }
            Swatch::Band(colour) => {
                area.draw(&Rectangle::new(
                    [(left, y - 6), (left + 24, y + 6)],
                    colour.mix(BAND_ALPHA * 1.6).filled(),
                ))?;
            }
        }
        area.draw_text(
            label,
            &style.pos(Pos::new(HPos::Left, VPos::Center)),
            (left + 32, y),
        )?;
        y += 20;
    }
    Ok(())
}

#[cfg(test)]
pub(super) fn tick_text(v: f64, span: f64) -> String {
    tick(v, span)
}

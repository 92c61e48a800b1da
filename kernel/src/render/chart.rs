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
//! generic "sans-serif" family and the viewer's own font draws it. The PNG is the SVG
//! rasterised by resvg with the embedded font.

use super::html::capped_note;
use super::sweep::{base_name, family_member, limit_applies, series_scale, Scale};
use base64::Engine as _;
use html_escape::encode_text;
use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint};
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{register_font, FontStyle};
use resvg::{tiny_skia, usvg};
use serde_json::{Map, Value};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::{Arc, OnceLock};
use usvg::fontdb;
use worksheet_lang::results::{CellReport, SweepLimit, SweepSeries, SweepTable};
use worksheet_lang::units::{format_si, Dim};

/// The chart's size as shown, in pixels.
const WIDTH: u32 = 760;
/// The height of a chart whose legend fits beside it; a longer legend makes the chart taller.
const HEIGHT: u32 = 420;
/// The legend's first row and the spacing of its rows, in pixels.
const LEGEND_TOP: f64 = 54.0;
const LEGEND_ROW: f64 = 20.0;
/// plotters draws at whole pixels; drawing at this many times the size keeps straight runs of
/// a curve from showing steps.
const SCALE: u32 = 4;
/// Series with at most this many points get a small marker at each point; longer ones are
/// drawn as lines alone, which keeps the SVG small.
const MARKERS_UP_TO: usize = 30;
/// Legend labels longer than this are shortened with "…".
const LEGEND_CHARS: usize = 30;

/// The family plotters lays text out with and the SVG names.
const FONT_NAME: &str = "sans-serif";
/// The embedded font's own family name, for resvg.
const FONT_FAMILY: &str = "DejaVu Sans";
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
            Err(e) => out.push(note(&format!(
                "The chart of {} could not be drawn: {e}",
                c.title
            ))),
        }
    }
    if !left_out.is_empty() {
        let what = if left_out.len() == 1 {
            format!("The chart of {} is", left_out[0])
        } else {
            format!("{} charts ({}) are", left_out.len(), left_out.join("; "))
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
            let take =
                |xs: &[f64]| -> Vec<f64> { xs.iter().take(n).map(|&y| yscale.show(y)).collect() };
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
                colour: curve_colour(k, series.len()),
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
        if applies
            && !applying
                .iter()
                .any(|a| a.limit == l.limit && a.text == l.text)
        {
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
    // A flat curve gets a range of ±5 % around its value (±1 around zero).
    let magnitude = hi.abs().max(lo.abs());
    if hi - lo <= magnitude * 1e-9 {
        let pad = if magnitude > 0.0 {
            magnitude * 0.05
        } else {
            1.0
        };
        lo -= pad;
        hi += pad;
    }
    let span = hi - lo;
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
        legend_title: if one_family {
            Some(bases[0].to_string())
        } else {
            None
        },
    })
}

/// The colour of curve `k` of `n`: the palette in order; for more curves than it holds (a long
/// family) a ramp from deep teal blue over moss to amber, so that neighbouring values of the
/// family get neighbouring colours.
fn curve_colour(k: usize, n: usize) -> RGBColor {
    if n <= PALETTE.len() {
        return PALETTE[k % PALETTE.len()];
    }
    let stops = [PALETTE[0], PALETTE[3], PALETTE[1]];
    let t = k as f64 / (n - 1) as f64 * (stops.len() - 1) as f64;
    let i = (t.floor() as usize).min(stops.len() - 2);
    let f = t - i as f64;
    let mix = |a: u8, b: u8| (f64::from(a) + (f64::from(b) - f64::from(a)) * f).round() as u8;
    let (a, b) = (stops[i], stops[i + 1]);
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
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

/// Evenly spaced axis ticks at 1, 2 or 5 times a power of ten, at most `max` of them, and
/// the decimals their step needs.
fn ticks(lo: f64, hi: f64, max: usize) -> (Vec<f64>, usize) {
    let span = hi - lo;
    if !(span > 0.0 && span.is_finite()) {
        return (vec![lo], 3);
    }
    // Tick indices k with lo ≤ k·step ≤ hi, allowing for rounding (-0.3 / 0.1 is a hair
    // above -3).
    let indices = |step: f64| {
        (
            (lo / step - 1e-9).ceil() as i64,
            (hi / step + 1e-9).floor() as i64,
        )
    };
    let raw = span / max.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0, 20.0]
        .iter()
        .map(|m| m * mag)
        .find(|&st| {
            let (a, b) = indices(st);
            b - a < max.max(1) as i64
        })
        .unwrap_or(20.0 * mag);
    let (first, last) = indices(step);
    let values = (first..=last).map(|k| k as f64 * step).collect();
    // A step of 0.05 needs two decimals, 20 none: the decimals of its leading digit.
    let decimals = (-(step.log10() + 1e-9).floor()).clamp(0.0, 9.0) as usize;
    (values, decimals)
}

/// A linear axis whose ticks are the ones [`ticks`] chose, so their labels can be written with
/// the decimals of that step. plotters' own key-point combinator offers no formatter for its
/// labels through the mesh; this is the axis trait with the ticks fixed.
struct TickedAxis {
    linear: RangedCoordf64,
    ticks: Vec<f64>,
}

impl TickedAxis {
    fn new(lo: f64, hi: f64, ticks: Vec<f64>) -> Self {
        TickedAxis {
            linear: (lo..hi).into(),
            ticks,
        }
    }
}

impl Ranged for TickedAxis {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        self.linear.map(value, limit)
    }

    /// The ticks, for bold and light mesh lines alike (the light ones are not drawn).
    fn key_points<Hint: KeyPointHint>(&self, _hint: Hint) -> Vec<f64> {
        self.ticks.clone()
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.linear.range()
    }
}

/// A tick label with `decimals` decimals, without a "-0".
fn tick(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => s,
    }
}

/// Pixel lengths of the design, at the chart's logical size.
fn px(v: f64) -> i32 {
    (v * f64::from(SCALE)).round() as i32
}

fn stroke(colour: RGBColor, width: f64) -> ShapeStyle {
    colour.stroke_width(px(width).max(1) as u32)
}

/// The chart as SVG text and as PNG bytes.
fn draw_both(c: &Chart) -> Result<(String, Vec<u8>), String> {
    if !font_ready() {
        return Err("the chart font could not be loaded".into());
    }
    let height = HEIGHT.max(legend_rows(c) * LEGEND_ROW as u32 + LEGEND_TOP as u32 + 16);
    let canvas = (WIDTH * SCALE, height * SCALE);
    // plotters may panic on coordinates it cannot handle; a chart is not worth the kernel.
    catch_unwind(AssertUnwindSafe(|| {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, canvas).into_drawing_area();
            draw(&root, c)?;
            root.present().map_err(|e| e.to_string())?;
        }
        // plotters writes integer coordinates: it draws on a canvas SCALE times the size,
        // and the SVG is shown at the logical size through its viewBox.
        let drawn = format!(r#"<svg width="{}" height="{}""#, canvas.0, canvas.1);
        let shown = format!(r#"<svg width="{WIDTH}" height="{height}""#);
        let svg = svg.replacen(&drawn, &shown, 1);
        let png = rasterise(&svg)?;
        Ok((svg, png))
    }))
    .unwrap_or_else(|_| Err("the charting library failed".into()))
}

/// The rows of a chart's legend: its title, a row per curve and one for the bands; none when
/// a single curve without a band needs no legend.
fn legend_rows(c: &Chart) -> u32 {
    if c.curves.len() < 2 && !c.has_band {
        return 0;
    }
    (usize::from(c.legend_title.is_some()) + c.curves.len() + usize::from(c.has_band)) as u32
}

/// The fonts resvg may use: the embedded DejaVu Sans alone, standing for "sans-serif".
fn font_database() -> Arc<fontdb::Database> {
    static DB: OnceLock<Arc<fontdb::Database>> = OnceLock::new();
    DB.get_or_init(|| {
        let mut db = fontdb::Database::new();
        db.load_font_data(FONT.to_vec());
        db.set_sans_serif_family(FONT_FAMILY);
        Arc::new(db)
    })
    .clone()
}

/// The SVG drawn as a PNG at its shown size.
fn rasterise(svg: &str) -> Result<Vec<u8>, String> {
    let options = usvg::Options {
        fontdb: font_database(),
        font_family: FONT_FAMILY.to_string(),
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(svg, &options).map_err(|e| e.to_string())?;
    let size = tree.size().to_int_size();
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height())
        .ok_or_else(|| "the chart has no area".to_string())?;
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    pixmap.encode_png().map_err(|e| e.to_string())
}

/// A font whose em is `size` logical pixels. plotters writes an SVG font size of its own
/// size divided by 1.24, hence the factor.
fn font(size: f64, colour: RGBColor) -> TextStyle<'static> {
    (FONT_NAME, size * 1.24 * f64::from(SCALE))
        .into_font()
        .color(&colour)
}

/// A rectangle in canvas pixels: left, top, right, bottom.
type BoxPx = (i32, i32, i32, i32);

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, c: &Chart) -> Result<(), String> {
    let err = |e: DrawingAreaErrorKind<DB::ErrorType>| e.to_string();
    root.fill(&BACKGROUND).map_err(err)?;

    let legend_font = font(12.0, TEXT);
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
    let mut legend_width = 0i32;
    if !entries.is_empty() {
        let mut widest = 0i32;
        let title = c.legend_title.iter().map(String::as_str);
        for label in entries.iter().map(|e| e.0.as_str()).chain(title) {
            let (w, _) = root.estimate_text_size(label, &legend_font).map_err(err)?;
            widest = widest.max(w as i32);
        }
        legend_width = (widest + px(52.0)).clamp(px(110.0), px(280.0));
    }
    let full_width = root.dim_in_pixel().0 as i32;
    let (plot, legend) = root.split_horizontally(full_width - legend_width);

    root.draw_text(&c.title, &font(14.5, TEXT), (px(16.0), px(12.0)))
        .map_err(err)?;

    let (x0, x1) = c.x_range;
    let (y0, y1) = c.y_range;
    let (xticks, xdec) = ticks(x0, x1, 8);
    let (yticks, ydec) = ticks(y0, y1, 7);
    // Room left of the plot for the widest tick label, the tick marks and the rotated axis
    // label, so the axis label stays close to its numbers.
    let tick_font = font(11.5, TICKS);
    let mut widest_tick = 0i32;
    for &v in &yticks {
        let (w, _) = root
            .estimate_text_size(&tick(v, ydec), &tick_font)
            .map_err(err)?;
        widest_tick = widest_tick.max(w as i32);
    }
    let mut chart = ChartBuilder::on(&plot)
        .margin_top(px(44.0))
        .margin_left(px(8.0))
        .margin_right(px(if legend_width > 0 { 10.0 } else { 24.0 }))
        .margin_bottom(px(6.0))
        .x_label_area_size(px(44.0))
        .y_label_area_size(widest_tick + px(36.0))
        .build_cartesian_2d(
            TickedAxis::new(x0, x1, xticks),
            TickedAxis::new(y0, y1, yticks),
        )
        .map_err(err)?;
    let xfmt = |v: &f64| tick(*v, xdec);
    let yfmt = |v: &f64| tick(*v, ydec);
    chart
        .configure_mesh()
        .disable_x_mesh()
        .bold_line_style(stroke(GRID, 1.0))
        .light_line_style(TRANSPARENT)
        .axis_style(stroke(AXIS, 1.0))
        .x_label_formatter(&xfmt)
        .y_label_formatter(&yfmt)
        .label_style(tick_font)
        .axis_desc_style(font(12.5, TEXT))
        .x_desc(c.x_label.clone())
        .y_desc(c.y_label.clone())
        .set_all_tick_mark_size(px(4.0))
        .draw()
        .map_err(err)?;

    // Bands under everything else.
    for cv in &c.curves {
        if let Some((lo, hi)) = &cv.band {
            let mut outline: Vec<(f64, f64)> =
                c.xs.iter().copied().zip(hi.iter().copied()).collect();
            outline.extend(c.xs.iter().copied().zip(lo.iter().copied()).rev());
            chart
                .draw_series(std::iter::once(Polygon::new(
                    outline,
                    cv.colour.mix(BAND_ALPHA).filled(),
                )))
                .map_err(err)?;
        }
    }

    // Limit lines: dashed, across the plot.
    for l in c.limits.iter().filter(|l| l.off_chart.is_none()) {
        chart
            .draw_series(DashedLineSeries::new(
                [(x0, l.y), (x1, l.y)],
                px(7.0),
                px(4.0),
                stroke(LIMIT, 1.75),
            ))
            .map_err(err)?;
    }

    // Nominal curves over the bands and limits.
    for cv in &c.curves {
        let points: Vec<(f64, f64)> =
            c.xs.iter()
                .copied()
                .zip(cv.nominal.iter().copied())
                .collect();
        chart
            .draw_series(LineSeries::new(
                points.iter().copied(),
                stroke(cv.colour, 2.25),
            ))
            .map_err(err)?;
        if points.len() <= MARKERS_UP_TO {
            chart
                .draw_series(
                    points
                        .iter()
                        .map(|&p| Circle::new(p, px(2.75), cv.colour.filled())),
                )
                .map_err(err)?;
        }
    }

    // Limit labels last, each on a light backdrop where it covers the least of the curves.
    let to_px = |x: f64, y: f64| chart.backend_coord(&(x, y));
    let (left, top) = to_px(x0, y1);
    let (right, bottom) = to_px(x1, y0);
    let obstacles = curve_pixels(&to_px, c);
    let limit_font = font(11.5, LIMIT);
    let mut placed: Vec<BoxPx> = Vec::new();
    for l in &c.limits {
        let (w, h) = root
            .estimate_text_size(&l.label, &limit_font)
            .map_err(err)?;
        let (w, h) = (w as i32 + px(6.0), h as i32 + px(4.0));
        let ly = to_px(x0, l.y).1;
        let rows: Vec<i32> = match l.off_chart {
            None => vec![ly - px(4.0) - h, ly + px(4.0)],
            Some(true) => vec![top + px(3.0)],
            Some(false) => vec![bottom - px(3.0) - h],
        };
        let near = px(2.0);
        let mut best: Option<(f64, BoxPx)> = None;
        for &by in &rows {
            if by < top || by + h > bottom {
                continue;
            }
            for bx in [right - px(6.0) - w, left + px(6.0)] {
                let b = (bx, by, bx + w, by + h);
                let inside = |x: i32, y: i32| {
                    x >= b.0 - near && x <= b.2 + near && y >= b.1 - near && y <= b.3 + near
                };
                let mut score: f64 = obstacles
                    .iter()
                    .filter(|(x, y, _)| inside(*x, *y))
                    .map(|(_, _, weight)| weight)
                    .sum();
                if placed
                    .iter()
                    .any(|p| p.0 < b.2 && b.0 < p.2 && p.1 < b.3 && b.1 < p.3)
                {
                    score += 1e6;
                }
                if best.is_none_or(|(s, _)| score < s) {
                    best = Some((score, b));
                }
            }
        }
        // A plot too short for the label above or below the line: on the line itself.
        let b = best.map_or_else(
            || {
                let y = ly.clamp(top, bottom) - h / 2;
                (right - px(6.0) - w, y, right - px(6.0), y + h)
            },
            |(_, b)| b,
        );
        root.draw(&Rectangle::new(
            [(b.0, b.1), (b.2, b.3)],
            BACKGROUND.mix(0.85).filled(),
        ))
        .map_err(err)?;
        root.draw_text(
            &l.label,
            &limit_font.pos(Pos::new(HPos::Left, VPos::Center)),
            (b.0 + px(3.0), (b.1 + b.3) / 2),
        )
        .map_err(err)?;
        placed.push(b);
    }

    if !entries.is_empty() {
        draw_legend(&legend, c.legend_title.as_deref(), &entries, &legend_font).map_err(err)?;
    }
    Ok(())
}

/// Points along every curve in canvas pixels, a few pixels apart, with how much covering
/// them hurts: a nominal curve more than a band's edge.
fn curve_pixels(to_px: &dyn Fn(f64, f64) -> (i32, i32), c: &Chart) -> Vec<(i32, i32, f64)> {
    let mut out = Vec::new();
    let gap = px(3.0).max(1);
    let mut trace = |ys: &[f64], weight: f64| {
        let pts: Vec<(i32, i32)> = c.xs.iter().zip(ys).map(|(&x, &y)| to_px(x, y)).collect();
        for pair in pts.windows(2) {
            let ((ax, ay), (bx, by)) = (pair[0], pair[1]);
            let steps = ((bx - ax).abs().max((by - ay).abs()) / gap).clamp(1, 400);
            for k in 0..steps {
                let t = f64::from(k) / f64::from(steps);
                out.push((
                    ax + (f64::from(bx - ax) * t) as i32,
                    ay + (f64::from(by - ay) * t) as i32,
                    weight,
                ));
            }
        }
        if let Some(&(x, y)) = pts.last() {
            out.push((x, y, weight));
        }
    };
    for cv in &c.curves {
        trace(&cv.nominal, 3.0);
        if let Some((lo, hi)) = &cv.band {
            trace(lo, 1.0);
            trace(hi, 1.0);
        }
    }
    out
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
    let left = px(4.0);
    let mut y = px(LEGEND_TOP);
    let row = px(LEGEND_ROW);
    if let Some(t) = title {
        area.draw_text(
            t,
            &font(12.0, TICKS).pos(Pos::new(HPos::Left, VPos::Center)),
            (left, y),
        )?;
        y += row;
    }
    for (label, swatch) in entries {
        match swatch {
            Swatch::Line(colour) => {
                area.draw(&PathElement::new(
                    vec![(left, y), (left + px(24.0), y)],
                    stroke(*colour, 2.25),
                ))?;
            }
            Swatch::Band(colour) => {
                area.draw(&Rectangle::new(
                    [(left, y - px(6.0)), (left + px(24.0), y + px(6.0))],
                    colour.mix(BAND_ALPHA * 1.6).filled(),
                ))?;
            }
        }
        area.draw_text(
            label,
            &style.pos(Pos::new(HPos::Left, VPos::Center)),
            (left + px(32.0), y),
        )?;
        y += row;
    }
    Ok(())
}

#[cfg(test)]
pub(super) fn tick_values(lo: f64, hi: f64, max: usize) -> (Vec<f64>, usize) {
    ticks(lo, hi, max)
}

#[cfg(test)]
pub(super) fn tick_text(v: f64, decimals: usize) -> String {
    tick(v, decimals)
}

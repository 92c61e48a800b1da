//! Sweep tables and charts of hand-built sweeps. Every expected number is worked out by hand
//! from the formulas written beside the data, not taken from the renderer's output.

use super::chart::{tick_text, tick_values};
use super::*;
use base64::Engine as _;
use worksheet_lang::results::{SweepLimit, SweepSeries, SweepTable, ValueRow};

fn series(name: &str, dim: Dim, absolute: bool, nominal: Vec<f64>) -> SweepSeries {
    SweepSeries {
        name: name.into(),
        dim,
        absolute,
        nominal,
        min: None,
        max: None,
    }
}

/// The series with a worst-case band of ±`fraction` around its nominal values.
fn banded(mut s: SweepSeries, fraction: f64) -> SweepSeries {
    s.min = Some(s.nominal.iter().map(|x| x * (1.0 - fraction)).collect());
    s.max = Some(s.nominal.iter().map(|x| x * (1.0 + fraction)).collect());
    s
}

fn limit(series: &str, limit: f64, text: &str) -> SweepLimit {
    SweepLimit {
        series: series.into(),
        limit,
        text: text.into(),
    }
}

fn cell(sweeps: Vec<SweepTable>) -> CellReport {
    CellReport {
        cell: "c1".into(),
        sweeps,
        ..CellReport::default()
    }
}

/// `sweep i over 0.1 A .. 0.3 A steps 3: p, tj` with p = 7 V · i (±10 % worst case) and
/// tj = 25 °C + 40 K/W · p:
///   i = 0.1, 0.2, 0.3 A → p = 0.7, 1.4, 2.1 W, band 0.63…0.77, 1.26…1.54, 1.89…2.31 W;
///   tj = 298.15 + 28, + 56, + 84 K = 326.15, 354.15, 382.15 K = 53, 81, 109 °C.
/// A check `p <= 2 W` puts a limit of 2 W on p.
fn power_sweep() -> SweepTable {
    let i = [0.1, 0.2, 0.3];
    let p: Vec<f64> = i.iter().map(|i| 7.0 * i).collect();
    let tj: Vec<f64> = p.iter().map(|p| 298.15 + 40.0 * p).collect();
    SweepTable {
        over: "i".into(),
        dim: Dim::CURRENT,
        absolute: false,
        points: i.to_vec(),
        series: vec![
            banded(series("p", Dim::POWER, false, p), 0.10),
            series("tj", Dim::TEMPERATURE, true, tj),
        ],
        limits: vec![limit("p", 2.0, "p <= 2 W")],
    }
}

/// A family `sweep i over 0.1 A .. 0.3 A steps 3, vin over 10 V .. 14 V steps 3: loss` with
/// loss = (vin − 5 V) · i, and `check loss <= 2 W`.
fn family_sweep() -> SweepTable {
    let i = [0.1, 0.2, 0.3];
    let members = [10.0, 12.0, 14.0].map(|vin: f64| {
        series(
            &format!("loss (vin = {vin:.1} V)"),
            Dim::POWER,
            false,
            i.iter().map(|i| (vin - 5.0) * i).collect(),
        )
    });
    SweepTable {
        over: "i".into(),
        dim: Dim::CURRENT,
        absolute: false,
        points: i.to_vec(),
        series: members.into_iter().map(|s| banded(s, 0.05)).collect(),
        limits: vec![limit("loss", 2.0, "loss <= 2 W")],
    }
}

/// 50 points, i = 10 mA … 500 mA in steps of 10 mA (k = 0 … 49, i = 10 mA · (k + 1)):
/// tj = 350.15 K − |k − 23| K (a peak of 77.0 °C at k = 23, i = 240 mA), band ±2 K, so the
/// band's maximum is at k = 23 and its minimum at k = 49 (324.15 − 2 K; k = 0 gives
/// 327.15 − 2); loss = 1 W + 10 mW · |k − 10| without a band: smallest (1.00 W) at k = 10, largest (1.39 W)
/// at k = 49.
fn long_sweep() -> SweepTable {
    let k: Vec<f64> = (0..50).map(f64::from).collect();
    let tj: Vec<f64> = k.iter().map(|k| 350.15 - (k - 23.0).abs()).collect();
    let mut tj = series("tj", Dim::TEMPERATURE, true, tj);
    tj.min = Some(tj.nominal.iter().map(|t| t - 2.0).collect());
    tj.max = Some(tj.nominal.iter().map(|t| t + 2.0).collect());
    let loss: Vec<f64> = k.iter().map(|k| 1.0 + 0.01 * (k - 10.0).abs()).collect();
    SweepTable {
        over: "i".into(),
        dim: Dim::CURRENT,
        absolute: false,
        points: k.iter().map(|k| 0.01 * (k + 1.0)).collect(),
        series: vec![tj, series("loss", Dim::POWER, false, loss)],
        limits: Vec::new(),
    }
}

fn svg_of(b: &Map<String, Value>) -> &str {
    b["image/svg+xml"].as_str().expect("an SVG string")
}

fn parse(svg: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("invalid SVG: {e}"))
}

fn texts<'a>(doc: &'a roxmltree::Document<'_>) -> Vec<&'a str> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .map(str::trim)
        .collect()
}

/// The points of a `points="x,y x,y …"` attribute.
fn points_of(node: roxmltree::Node<'_, '_>) -> Vec<(f64, f64)> {
    node.attribute("points")
        .unwrap_or("")
        .split_whitespace()
        .filter_map(|p| p.split_once(','))
        .filter_map(|(x, y)| Some((x.parse().ok()?, y.parse().ok()?)))
        .collect()
}

// ---- charts ----

#[test]
fn one_chart_per_dimension_and_absoluteness() {
    let mut s = power_sweep();
    // pin = 12 V · i is a power too: it joins p's chart.
    s.series
        .push(series("pin", Dim::POWER, false, vec![1.2, 2.4, 3.6]));
    // A temperature rise is a temperature difference, not an absolute temperature: a chart
    // of its own, apart from tj.
    s.series.push(series(
        "rise",
        Dim::TEMPERATURE,
        false,
        vec![28.0, 56.0, 84.0],
    ));
    let charts = charts(&cell(vec![s, family_sweep()]));
    let plain: Vec<&str> = charts
        .iter()
        .map(|b| b["text/plain"].as_str().unwrap_or_default())
        .collect();
    assert_eq!(
        plain,
        [
            "chart: p, pin over i",
            "chart: tj over i",
            "chart: rise over i",
            "chart: loss over i, one curve per vin",
        ]
    );
    for b in &charts {
        assert_eq!(
            b.keys().map(String::as_str).collect::<Vec<_>>(),
            ["image/svg+xml", "image/png", "text/plain"]
        );
    }
    assert!(super::charts(&cell(vec![])).is_empty());
}

#[test]
fn chart_svg_has_band_limit_and_axis_units() {
    let charts = charts(&cell(vec![power_sweep()]));
    assert_eq!(charts.len(), 2, "p (W) and tj (°C)");
    let svg = svg_of(&charts[0]);
    let doc = parse(svg);
    assert_eq!(doc.root_element().tag_name().name(), "svg");

    // The band: one filled, translucent polygon around the 3 points, top edge and bottom
    // edge: 6 vertices.
    let bands: Vec<_> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polygon"))
        .filter(|n| n.attribute("fill").is_some_and(|f| f != "none"))
        .filter(|n| {
            n.attribute("opacity")
                .and_then(|o| o.parse::<f64>().ok())
                .is_some_and(|o| o > 0.0 && o < 0.5)
        })
        .collect();
    assert_eq!(bands.len(), 1, "{svg}");
    let band = points_of(bands[0]);
    assert_eq!(band.len(), 6);
    // Its upper edge (max, first three) lies above its lower edge (min, last three, in
    // reverse) at every x: smaller SVG y is higher up.
    for k in 0..3 {
        let (top, bottom) = (band[k], band[5 - k]);
        assert_eq!(top.0, bottom.0);
        assert!(top.1 < bottom.1, "{band:?}");
    }

    // The limit: its text, and a dashed line (many short segments) at one height, in the
    // band's y range: 2 W lies between the band's 1.89 W and 2.31 W at i = 0.3 A.
    let t = texts(&doc);
    assert_eq!(t.iter().filter(|s| **s == "p <= 2 W").count(), 1, "{t:?}");
    let dashes: Vec<(f64, f64)> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline") || n.has_tag_name("line"))
        .filter(|n| n.attribute("stroke") == Some("#C43D33"))
        .flat_map(|n| {
            if n.has_tag_name("line") {
                let a = |k| {
                    n.attribute(k)
                        .and_then(|v| v.parse().ok())
                        .unwrap_or(f64::NAN)
                };
                vec![(a("x1"), a("y1")), (a("x2"), a("y2"))]
            } else {
                points_of(n)
            }
        })
        .collect();
    assert!(dashes.len() >= 10, "a dashed line: {dashes:?}");
    let y = dashes[0].1;
    assert!(dashes.iter().all(|p| p.1 == y), "horizontal: {dashes:?}");
    let (right_top, right_bottom) = (band[2].1, band[3].1);
    assert!(
        right_top < y && y < right_bottom,
        "{right_top} < {y} < {right_bottom}"
    );

    // Axis labels with units: i up to 0.3 A is shown in mA, p up to 2.31 W in W.
    assert!(t.contains(&"i [mA]"), "{t:?}");
    assert!(t.contains(&"p [W]"), "{t:?}");
    assert!(
        t.contains(&"100") && t.contains(&"300"),
        "x ticks in mA: {t:?}"
    );
    assert!(
        t.contains(&"worst case"),
        "the band is named in the legend: {t:?}"
    );

    // The temperature chart has no limit and is labelled in °C (53 … 109 °C).
    let doc = parse(svg_of(&charts[1]));
    let t = texts(&doc);
    assert!(t.contains(&"tj [°C]"), "{t:?}");
    assert!(!t.iter().any(|s| s.contains("<=")), "{t:?}");
    assert!(
        !doc.descendants().any(|n| n.has_tag_name("polygon")
            && n.attribute("fill").is_some_and(|f| f != "none")
            && n.attribute("opacity") != Some("1")),
        "tj has no band"
    );
}

#[test]
fn a_family_gets_a_legend_and_one_limit() {
    let charts = charts(&cell(vec![family_sweep()]));
    assert_eq!(charts.len(), 1);
    let svg = svg_of(&charts[0]);
    let doc = parse(svg);
    let t = texts(&doc);
    for member in ["vin = 10.0 V", "vin = 12.0 V", "vin = 14.0 V"] {
        assert_eq!(
            t.iter().filter(|s| **s == member).count(),
            1,
            "{member}: {t:?}"
        );
    }
    assert!(t.contains(&"loss"), "legend title: {t:?}");
    assert!(t.contains(&"loss [W]"), "{t:?}");
    // One limit for the whole family, however many members it applies to.
    assert_eq!(
        t.iter().filter(|s| **s == "loss <= 2 W").count(),
        1,
        "{t:?}"
    );
    // Three bands and three nominal curves, each member in its own colour.
    let bands = doc
        .descendants()
        .filter(|n| n.has_tag_name("polygon") && n.attribute("opacity") != Some("1"))
        .count();
    assert_eq!(bands, 3);
    let mut colours: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline") && points_of(*n).len() == 3)
        .filter_map(|n| n.attribute("stroke"))
        .collect();
    colours.sort_unstable();
    colours.dedup();
    assert_eq!(colours.len(), 3, "{colours:?}");
}

/// Sweeps at the edges: one point, a flat zero, negative, huge and tiny values, and a limit
/// far above the data.
fn odd_sweeps() -> Vec<SweepTable> {
    let one = |name: &str, points: Vec<f64>, ys: Vec<f64>| SweepTable {
        over: "x".into(),
        dim: Dim::VOLTAGE,
        absolute: false,
        points,
        series: vec![series(name, Dim::POWER, false, ys)],
        limits: Vec::new(),
    };
    let mut far = one("far", vec![1.0, 2.0, 3.0], vec![1.0, 1.1, 1.2]);
    // 1 kW against data of about 1 W: named at the top edge, not drawn across.
    far.limits.push(limit("far", 1000.0, "far <= 1 kW"));
    vec![
        one("single", vec![5.0], vec![2.0]),
        one("flat", vec![1.0, 2.0, 3.0], vec![0.0, 0.0, 0.0]),
        one("negative", vec![-3.0, -2.0, -1.0], vec![-5e-3, -2e-3, 1e-3]),
        one("huge", vec![1e9, 2e9], vec![3e12, 4e12]),
        one("tiny", vec![1e-12, 2e-12], vec![1e-15, 3e-15]),
        far,
    ]
}

#[test]
fn odd_sweeps_still_draw() {
    let sweeps = odd_sweeps();
    let charts = charts(&cell(sweeps));
    assert_eq!(charts.len(), 6);
    for b in &charts {
        let svg = b
            .get("image/svg+xml")
            .and_then(Value::as_str)
            .unwrap_or_else(|| panic!("no chart: {:?}", b.get("text/plain")));
        parse(svg);
    }
    let far = parse(svg_of(&charts[5]));
    let t = texts(&far);
    assert!(
        t.iter()
            .any(|s| s.starts_with("▲ far <= 1 kW") && s.contains("off the chart")),
        "{t:?}"
    );
}

/// A family of 20 members, the most a family may have.
fn long_family() -> SweepTable {
    let members: Vec<SweepSeries> = (0..20)
        .map(|k| {
            series(
                &format!("loss (vin = {} V)", 10 + k),
                Dim::POWER,
                false,
                vec![0.1 * f64::from(k), 0.2 * f64::from(k)],
            )
        })
        .collect();
    SweepTable {
        over: "i".into(),
        dim: Dim::CURRENT,
        absolute: false,
        points: vec![0.1, 0.2],
        series: members,
        limits: Vec::new(),
    }
}

#[test]
fn a_long_family_fits_its_legend() {
    // Each member is named in the legend, which makes the chart taller than usual
    // (54 + 21 rows of 20 px + 16 > 420).
    let s = long_family();
    let charts = charts(&cell(vec![s]));
    let doc = parse(svg_of(&charts[0]));
    let height: f64 = doc
        .root_element()
        .attribute("height")
        .and_then(|h| h.parse().ok())
        .unwrap_or(0.0);
    assert_eq!(height, 54.0 + 21.0 * 20.0 + 16.0);
    let t = texts(&doc);
    for k in 0..20 {
        let member = format!("vin = {} V", 10 + k);
        assert!(t.contains(&member.as_str()), "{member}: {t:?}");
    }
    let mut colours: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline") && points_of(*n).len() == 2)
        .filter_map(|n| n.attribute("stroke"))
        .collect();
    colours.sort_unstable();
    colours.dedup();
    assert!(colours.len() >= 20, "{colours:?}");
}

#[test]
fn png_fallback_is_a_png_of_the_chart_size() {
    let charts = charts(&cell(vec![power_sweep()]));
    let b64 = charts[0]["image/png"].as_str().expect("base64 text");
    let bytes = base64::engine::general_purpose::STANDARD
        .decode(b64)
        .expect("valid base64");
    // The PNG signature (ISO/IEC 15948, 5.2).
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    let decoder = png::Decoder::new(std::io::Cursor::new(&bytes));
    let mut reader = decoder.read_info().expect("a PNG header");
    let mut buf = vec![0; reader.output_buffer_size().expect("a buffer size")];
    let info = reader.next_frame(&mut buf).expect("a frame");
    let svg = parse(svg_of(&charts[0]));
    let size = |k| {
        svg.root_element()
            .attribute(k)
            .and_then(|v| v.parse::<u32>().ok())
    };
    assert_eq!(
        (Some(info.width), Some(info.height)),
        (size("width"), size("height"))
    );
    // Drawn on, not a blank page: well over 1 % of the pixels are not white.
    let pixels = &buf[..info.buffer_size()];
    let inked = pixels
        .chunks(info.color_type.samples())
        .filter(|p| p.iter().any(|&c| c < 200))
        .count();
    assert!(inked * 100 > (info.width * info.height) as usize, "{inked}");
}

#[test]
fn charts_past_the_cap_become_a_note() {
    let report = cell(vec![power_sweep()]);
    let all = chart::bundles(&report, usize::MAX);
    let first = all[0]["image/svg+xml"].as_str().map_or(0, str::len)
        + all[0]["image/png"].as_str().map_or(0, str::len);
    // Room for the first chart only.
    let capped = chart::bundles(&report, first + 10);
    assert_eq!(capped.len(), 2);
    assert!(capped[0].contains_key("image/svg+xml"));
    let note = &capped[1];
    assert!(!note.contains_key("image/svg+xml") && !note.contains_key("image/png"));
    let plain = note["text/plain"].as_str().unwrap_or_default();
    assert!(
        plain.contains("tj over i") && plain.contains("left out"),
        "{plain}"
    );
    assert!(plain.contains("2 MiB"), "{plain}");
    let html = note["text/html"].as_str().unwrap_or_default();
    assert!(
        html.starts_with("<div") && html.ends_with("</div>"),
        "{html}"
    );
}

#[test]
fn oversize_html_drops_sweep_tables_first_then_the_block() {
    // A note just under the cap: the values alone fit, the sweep table would not.
    let mut r = cell(vec![long_sweep()]);
    let mut v = ValueRow {
        name: "x".into(),
        given: false,
        note: "n".repeat(MAX_CELL_OUTPUT_BYTES - 2000),
        shown: Shown::Text("a".into()),
        unit: None,
        preferred: None,
        leads_with_minimum: false,
    };
    r.values.push(v.clone());
    let b = bundle(&r);
    let h = b["text/html"].as_str().unwrap_or_default();
    assert!(h.len() <= MAX_CELL_OUTPUT_BYTES, "{}", h.len());
    assert!(h.contains("The sweep tables are left out"));
    assert!(!h.contains("Sweep: i from"));
    assert!(h.ends_with("</div>"));
    // The plain text keeps the table.
    assert!(b["text/plain"]
        .as_str()
        .unwrap_or_default()
        .contains("▲ max tj"));
    // No room left for charts: a note instead.
    let c = charts(&r);
    assert_eq!(c.len(), 1);
    assert!(c[0]["text/plain"]
        .as_str()
        .unwrap_or_default()
        .contains("left out"));

    // Values beyond the cap: the block gives way to a note.
    v.note = "n".repeat(MAX_CELL_OUTPUT_BYTES + 1);
    r.values = vec![v];
    let b = bundle(&r);
    let h = b["text/html"].as_str().unwrap_or_default();
    assert!(
        h.len() < 1000 && h.contains("The result block is left out"),
        "{}",
        h.len()
    );
}

#[test]
fn tick_labels() {
    // 100 … 300 (mA), at most 8 ticks: a step of 50 (20 would give 11), no decimals.
    assert_eq!(
        tick_values(100.0, 300.0, 8),
        (vec![100.0, 150.0, 200.0, 250.0, 300.0], 0)
    );
    // 0.97 … 1.42 (W), at most 7: a step of 0.1 (0.05 would give 1.00 … 1.40, 9), one decimal.
    let (v, d) = tick_values(0.97, 1.42, 7);
    assert_eq!(d, 1);
    let shown: Vec<String> = v.iter().map(|&x| tick_text(x, d)).collect();
    assert_eq!(shown, ["1.0", "1.1", "1.2", "1.3", "1.4"]);
    // Across zero: no "-0.0".
    let (v, d) = tick_values(-0.3, 0.25, 7);
    let shown: Vec<String> = v.iter().map(|&x| tick_text(x, d)).collect();
    assert_eq!(shown, ["-0.3", "-0.2", "-0.1", "0.0", "0.1", "0.2"]);
    assert_eq!(tick_text(-0.00001, 1), "0.0");
}

// ---- sweep tables ----

#[test]
fn text_table_of_a_short_sweep() {
    let t = text(&cell(vec![power_sweep()]));
    // Columns: i in mA (up to 300 mA), p in W with its ±10 % range, tj in °C.
    let expected = "\
Sweeps
  i from 100 mA to 300 mA, 3 points
    i [mA]   p [W]  worst case      tj [°C]
       100   0.700  0.630 … 0.770      53.0
       200    1.40  1.26 … 1.54        81.0
       300    2.10  1.89 … 2.31         109";
    assert!(t.starts_with(expected), "{t}");
    assert!(!t.contains("left out"), "a short table shows every row");
}

#[test]
fn text_table_of_a_long_sweep_keeps_the_extremes() {
    let t = text(&cell(vec![long_sweep()]));
    let lines: Vec<&str> = t.lines().collect();
    let first_cell = |l: &&str| l.split_whitespace().next().map(str::to_string);
    let row = |i_ma: &str| {
        lines
            .iter()
            .find(|l| first_cell(l).as_deref() == Some(i_ma))
            .unwrap_or_else(|| panic!("no row for {i_ma} mA in\n{t}"))
            .to_string()
    };
    assert_eq!(lines[1], "  i from 10.0 mA to 500 mA, 50 points");
    // Header: i, tj with its range, loss.
    let header: Vec<&str> = lines[2]
        .split("  ")
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .collect();
    assert_eq!(header, ["i [mA]", "tj [°C]", "worst case", "loss [W]"]);
    // The extremes (k = 10, 23, 49) leave room for 12 − 4 + 2 = 10 evenly spaced rows
    // including the first: a stride of ⌈49 / 9⌉ = 6, rows k = 0, 6, …, 48. With the
    // extremes and the last row: k = 0, 6, 10, 12, 18, 23, 24, 30, 36, 42, 48, 49.
    let shown: Vec<String> = lines[3..]
        .iter()
        .take_while(|l| !l.trim().starts_with('('))
        .filter_map(first_cell)
        .collect();
    assert_eq!(
        shown,
        ["10.0", "70.0", "110", "130", "190", "240", "250", "310", "370", "430", "490", "500"]
    );
    // The first row (k = 0): tj 350.15 − 23 = 327.15 K = 54.0 °C (52.0 … 56.0), loss
    // 1 + 0.10 = 1.10 W; no extreme there.
    let first: Vec<String> = row("10.0").split_whitespace().map(String::from).collect();
    assert_eq!(first, ["10.0", "54.0", "52.0", "…", "56.0", "1.10"]);
    // The peak (k = 23, 240 mA), off the stride: 77.0 °C, band 75.0 … 79.0; loss 1.13 W.
    let peak = row("240");
    assert!(
        peak.contains("77.0") && peak.contains("75.0 … 79.0") && peak.contains("1.13"),
        "{peak}"
    );
    assert!(peak.trim_end().ends_with("▲ max tj"), "{peak}");
    // Its neighbour on the stride (k = 24) carries no mark: 76.0 °C.
    assert!(row("250").trim_end().ends_with("1.14"), "{t}");
    // loss is smallest at k = 10 (110 mA): 1.00 W; tj there 350.15 − 13 K = 64.0 °C.
    let dip = row("110");
    assert!(dip.contains("64.0") && dip.contains("1.00"), "{dip}");
    assert!(dip.trim_end().ends_with("▼ min loss"), "{dip}");
    // The last row (k = 49, 500 mA) holds tj's band minimum (51.0 − 2 = 49.0 °C) and the
    // largest loss (1.39 W).
    let last = row("500");
    assert!(
        last.contains("49.0 … 53.0") && last.contains("1.39"),
        "{last}"
    );
    assert!(last.trim_end().ends_with("▼ min tj, ▲ max loss"), "{last}");
    assert!(
        t.contains("(38 of 50 rows left out: shown are one row in 6, the last row and each"),
        "{t}"
    );
}

#[test]
fn html_table_of_sweeps() {
    let h = html::report(&cell(vec![power_sweep(), long_sweep()]));
    assert!(
        h.contains(">Sweep: i from 100 mA to 300 mA, 3 points</th>"),
        "{h}"
    );
    assert!(
        h.contains(">i [mA]</th>") && h.contains(">worst case</th>"),
        "{h}"
    );
    assert!(h.contains(">0.630 … 0.770</td>"), "{h}");
    assert!(h.contains(">109</td>"), "{h}");
    // The long sweep: marks and the left-out count.
    assert!(h.contains(">▲ max tj</td>"), "{h}");
    assert!(h.contains(">▼ min tj, ▲ max loss</td>"), "{h}");
    assert_eq!(
        h.matches("<tr><td style=").count(),
        3 + 12,
        "3 + 12 rows of values"
    );
    assert!(h.contains("38 of 50 rows left out"), "{h}");
    let lower = h.to_lowercase();
    assert!(!lower.contains("<style") && !lower.contains("<script"));
}

#[test]
fn sweep_table_styles_survive_the_sanitizer() {
    // The same allow-list as the result block's (JupyterLab's sanitizer keeps these).
    const ALLOWED: &[&str] = &[
        "color",
        "background",
        "border",
        "border-bottom",
        "border-left",
        "border-collapse",
        "padding",
        "padding-left",
        "margin",
        "text-align",
        "font-weight",
        "font-style",
        "font-family",
        "white-space",
        "opacity",
    ];
    let h = html::report(&cell(vec![power_sweep(), long_sweep()]));
    for style in h
        .split("style=\"")
        .skip(1)
        .filter_map(|s| s.split('"').next())
    {
        let decls: Vec<(&str, &str)> = style
            .split(';')
            .filter_map(|d| d.split_once(':'))
            .map(|(p, v)| (p.trim(), v.trim()))
            .collect();
        for (i, (prop, value)) in decls.iter().enumerate() {
            assert!(ALLOWED.contains(prop), "{prop} in {style}");
            if value.contains("var(") {
                assert!(
                    decls[..i]
                        .iter()
                        .any(|(p, v)| p == prop && !v.contains("var(")),
                    "{prop}: {value} without a fallback in {style}"
                );
            }
        }
    }
}

#[test]
fn sweep_names_are_escaped_in_html() {
    let mut s = power_sweep();
    s.series[0].name = "a<b>".into();
    let h = html::report(&cell(vec![s]));
    assert!(!h.contains("a<b>") && h.contains("a&lt;b&gt; [W]"), "{h}");
}

#[test]
fn json_keeps_every_point() {
    let data = results_json(&[&cell(vec![long_sweep()])]);
    assert_eq!(
        data["sweeps"][0]["points"].as_array().map(Vec::len),
        Some(50)
    );
}

/// Writes the charts of a few sweeps to target/charts/ for a look, among them those of the
/// demo worksheet and of a family run through the language:
/// `cargo test -p headroom --bins dump_charts -- --ignored`.
#[test]
#[ignore]
fn dump_charts() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../target/charts");
    std::fs::create_dir_all(&dir).expect("target/charts");
    let run = |source: &str| {
        let mut sheet = worksheet_lang::Worksheet::new();
        let interrupt = worksheet_lang::Interrupt::new();
        CellReport::clone(&sheet.execute(None, source, &interrupt).report)
    };
    let demo = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../notebooks/daq-logic-rail.hrw"),
    )
    .expect("the demo worksheet");
    let family = "given vin = 12 V ± 5 %\ngiven i = 0.2 A\nloss = (vin - 5 V) * i\n\
check loss <= 1.5 W\nsweep i over 50 mA .. 300 mA steps 60, vin over 10 V .. 14 V steps 3: loss";
    let reports = [
        ("power", cell(vec![power_sweep()])),
        ("family", cell(vec![family_sweep()])),
        ("long", cell(vec![long_sweep()])),
        ("demo", run(&demo)),
        ("language-family", run(family)),
        ("odd", cell(odd_sweeps())),
        ("long-family", cell(vec![long_family()])),
    ];
    for (name, report) in reports {
        // The result block and its charts on a page, as a notebook shows them.
        let mut page = format!(
            "<html><body style=\"font-family: sans-serif; font-size: 13px\">{}",
            html::report(&report)
        );
        for b in charts(&report) {
            page.push_str(&format!("<div>{}</div>", svg_of(&b)));
        }
        page.push_str("</body></html>");
        std::fs::write(dir.join(format!("{name}.html")), page).expect("write html");
        for (k, b) in charts(&report).iter().enumerate() {
            let Some(png) = b.get("image/png").and_then(Value::as_str) else {
                panic!("{name}: {:?}", b.get("text/plain"));
            };
            let png = base64::engine::general_purpose::STANDARD
                .decode(png)
                .expect("base64");
            std::fs::write(dir.join(format!("{name}-{k}.png")), png).expect("write png");
            std::fs::write(dir.join(format!("{name}-{k}.svg")), svg_of(b)).expect("write svg");
        }
    }
}

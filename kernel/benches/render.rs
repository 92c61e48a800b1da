//! Criterion micro-benchmarks of rendering a cell's results: the display bundle (plain text,
//! HTML, results JSON) of the reference cell, and the charts of a sweep.
//! `cargo bench -p headroom --bench render`.
//!
//! The render module belongs to the `headroom` binary (the package has no library target), so
//! this bench compiles the same source file into itself. Cargo builds bench targets with
//! `cfg(test)`, so the module's unit-test files come along without their `#[test]` functions:
//! hence the allowances for what only they and the binary use.

#[allow(dead_code, unused_imports)]
#[path = "../src/render/mod.rs"]
mod render;

use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use worksheet_lang::results::CellReport;
use worksheet_lang::{Interrupt, Worksheet};

const REFERENCE: &str = include_str!("../../tests/bench/cells/reference.hrw");

fn report(source: &str) -> CellReport {
    let execution = Worksheet::new().execute(Some("bench"), source, &Interrupt::new());
    assert!(
        !execution.report.has_errors(),
        "bench worksheet has errors: {:?}",
        execution.report.diagnostics
    );
    worksheet_lang::CellReport::clone(&execution.report)
}

fn benches(c: &mut Criterion) {
    let reference = report(REFERENCE);
    c.bench_function("render::bundle, reference cell", |b| {
        b.iter(|| render::bundle(black_box(&reference)))
    });

    let swept = report(&format!(
        "{REFERENCE}sweep iload over 50 mA .. 300 mA steps 26: tj, u1.loss\n"
    ));
    c.bench_function("render::bundle, reference cell with a sweep", |b| {
        b.iter(|| render::bundle(black_box(&swept)))
    });
    let mut charts = c.benchmark_group("render::charts");
    // Drawing an SVG and a PNG takes milliseconds.
    charts.sample_size(20);
    charts.bench_function("one sweep, two series", |b| {
        b.iter(|| render::charts(black_box(&swept)))
    });
    charts.finish();
}

criterion_group!(render_benches, benches);
criterion_main!(render_benches);

//! Criterion micro-benchmarks of the language's hot paths: parsing, evaluating the reference
//! cell, the worst case over 16 uncertain inputs, and a sweep of the ten-definition chain beside
//! the hand-written loop of the same formulas. `cargo bench -p worksheet-lang --bench micro`.

mod shared;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
use std::hint::black_box;
use worksheet_lang::{parse, Interrupt, Worksheet};

const REFERENCE: &str = include_str!("../../tests/bench/cells/reference.hrw");
const CHAIN: &str = include_str!("../../tests/bench/cells/chain.hrw");
const SWEEP_POINTS: usize = 1_000;

/// 16 independent uncertain inputs (eight supplies ± 2 %, eight loads ± 1 %) summed into one
/// power, and a check on it: one box pass per input, then the corners.
fn sixteen_inputs() -> String {
    let mut s = String::new();
    for k in 1..=8 {
        s.push_str(&format!("given v{k} = {} V ± 2 %\n", 3 + k));
        s.push_str(&format!("given r{k} = {} Ω ± 1 %\n", 100 * k));
    }
    let terms: Vec<String> = (1..=8).map(|k| format!("v{k} * v{k} / r{k}")).collect();
    s.push_str(&format!("p = {}\n", terms.join(" + ")));
    s.push_str("check p <= 10 W\n");
    s
}

fn run(source: &str) -> worksheet_lang::Execution {
    let mut sheet = Worksheet::new();
    let execution = sheet.execute(Some("bench"), black_box(source), &Interrupt::new());
    assert!(
        !execution.report.has_errors(),
        "bench worksheet has errors: {:?}",
        execution.report.diagnostics
    );
    execution
}

fn benches(c: &mut Criterion) {
    c.bench_function("parse reference cell", |b| {
        b.iter(|| parse(black_box(REFERENCE)))
    });
    c.bench_function("evaluate reference cell", |b| b.iter(|| run(REFERENCE)));

    let many = sixteen_inputs();
    c.bench_function("worst case, 16 uncertain inputs", |b| b.iter(|| run(&many)));

    let mut group = c.benchmark_group("sweep of the ten-definition chain");
    group.throughput(Throughput::Elements(SWEEP_POINTS as u64));
    // A sweep that re-analyses the worksheet per point takes tens of milliseconds here.
    group.sample_size(10);
    let swept = format!("{CHAIN}sweep vin over 7 V .. 16 V steps {SWEEP_POINTS}: y10\n");
    group.bench_function("worksheet", |b| b.iter(|| run(&swept)));
    group.bench_function("hand-written Rust loop", |b| {
        b.iter_batched_ref(
            || vec![0.0; SWEEP_POINTS],
            |out| shared::chain::sweep(black_box(7.0), black_box(16.0), out),
            BatchSize::SmallInput,
        )
    });
    group.finish();
}

criterion_group!(micro, benches);
criterion_main!(micro);

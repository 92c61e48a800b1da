//! Criterion micro-benchmarks of the language's hot paths: parsing, evaluating the reference
//! cell, the worst case over 16 uncertain inputs, rerunning one cell of a notebook-sized
//! worksheet, and a sweep of the ten-definition chain beside the hand-written loop of the
//! same formulas. `cargo bench -p worksheet-lang --bench micro`.

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

/// A notebook-sized worksheet: one cell with the supply, then `n` cells each sizing its own
/// regulator, heatsink chain and LED resistor from it (the reference cell, renamed).
fn notebook(n: usize) -> Vec<(String, String)> {
    let mut cells = vec![(
        "supply".to_string(),
        "given vin = 10.8 V .. 13.2 V\ngiven ta = 50 °C".to_string(),
    )];
    for k in 1..=n {
        let text = format!(
            "given iload{k} = {} mA ± 20 %\n\
             u{k} = reg.linear(vin, vout: 5 V, iout: iload{k}, iq: 4 mA, dropout: 2 V)\n\
             θ{k} = 6 K/W + 0.4 K/W + (22 K/W || 60 K/W)\n\
             tj{k} [°C] = heat.junction(u{k}.loss, ambient: ta, theta: θ{k}, tj_max: 125 °C)\n\
             check tj{k} <= 125 °C\n\
             R{k} = res.led(supply: 5 V, vf: 2.1 V, current: 8 mA, series: E24)",
            100 + 10 * k
        );
        cells.push((format!("c{k}"), text));
    }
    cells
}

fn loaded(cells: &[(String, String)]) -> Worksheet {
    let mut sheet = Worksheet::new();
    for (key, text) in cells {
        let ex = sheet.execute(Some(key), text, &Interrupt::new());
        assert!(
            !ex.report.has_errors(),
            "{key}: {:?}",
            ex.report.diagnostics
        );
    }
    sheet
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

    // A run recomputes only the cells its change can reach: rerunning a cell nothing reads
    // costs one cell however large the notebook; rerunning the supply recomputes them all.
    let cells = notebook(20);
    let mut group = c.benchmark_group("rerun in a 21-cell notebook");
    group.sample_size(20);
    let mut sheet = loaded(&cells);
    let (leaf, leaf_text) = &cells[20];
    group.bench_function("a cell nothing reads", |b| {
        b.iter(|| sheet.execute(Some(leaf), black_box(leaf_text), &Interrupt::new()))
    });
    let (root, root_text) = &cells[0];
    group.bench_function("the supply every cell reads", |b| {
        b.iter(|| sheet.execute(Some(root), black_box(root_text), &Interrupt::new()))
    });
    group.finish();

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

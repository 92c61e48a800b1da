//! In-process timings for `tests/bench/run`, which drives this binary and puts its figures in
//! the results table beside the Python reference:
//!
//! - `figures execute FILE REPS`: `Worksheet::execute_prepared` of the worksheet in FILE on a
//!   fresh worksheet, REPS times, in a tight loop, timed as the kernel times it (from the
//!   parsed cell to its report): the sweeps' figures, and the reference cell's in-process
//!   time beside the kernel's own evaluation timer;
//! - `figures beside CELLS FILE REPS`: the same, but the worksheet in FILE is one cell of a
//!   large worksheet, which already holds CELLS one-line cells (`1 + 1`, each sent without a
//!   cell id, as a console sends them); each run replaces the cell, recognised by the names
//!   it defines. What a run costs for the cells it does not change;
//! - `figures paused MICROS FILE REPS`: as `execute`, but the thread sleeps MICROS µs before
//!   each run, as the kernel waits between requests. The first evaluation after a wait finds
//!   less of its code and data in the caches and branch predictors;
//! - `figures loop POINTS REPS`: the hand-written Rust loop of the sweep chain over POINTS points.
//!
//! Each prints one JSON line: `{"median_ns": …, "min_ns": …, "reps": …}`. Run by `cargo bench`
//! without arguments it does nothing: the criterion benches are in `micro.rs`.

mod shared;

/// The kernel's allocator, so the in-process figures run on what the kernel runs on.
#[path = "../../kernel/src/alloc.rs"]
mod alloc;
#[global_allocator]
static ALLOC: alloc::Mimalloc = alloc::Mimalloc;

use std::hint::black_box;
use std::process::ExitCode;
use std::time::Instant;
use worksheet_lang::{diagnostic, Interrupt, Prepared, Worksheet};

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let count = |text: &str, what: &str| {
        text.parse::<usize>()
            .map_err(|_| format!("{what} must be a whole number, not `{text}`"))
    };
    let result = match args.as_slice() {
        [] => return ExitCode::SUCCESS,
        [what, file, reps] if what == "execute" => {
            count(reps, "REPS").and_then(|r| execute(file, r.max(1), 0, 0))
        }
        [what, cells, file, reps] if what == "beside" => count(cells, "CELLS")
            .and_then(|c| count(reps, "REPS").and_then(|r| execute(file, r.max(1), c, 0))),
        [what, micros, file, reps] if what == "paused" => count(micros, "MICROS")
            .and_then(|m| count(reps, "REPS").and_then(|r| execute(file, r.max(1), 0, m))),
        [what, points, reps] if what == "loop" => match count(points, "POINTS") {
            Ok(n) if n >= 2 => count(reps, "REPS").map(|r| rust_loop(n, r.max(1))),
            _ => Err(format!("POINTS must be a whole number ≥ 2, not `{points}`")),
        },
        _ => Err(
            "usage: figures execute FILE REPS | figures beside CELLS FILE REPS | \
             figures paused MICROS FILE REPS | figures loop POINTS REPS"
                .to_string(),
        ),
    };
    match result {
        Ok(times) => {
            println!("{}", summary(times));
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("figures: {e}");
            ExitCode::from(2)
        }
    }
}

/// `beside`: how many one-line cells the worksheet holds besides FILE's (0: a fresh
/// worksheet for each run, with FILE's cell under a fixed id). `pause`: µs of sleep before
/// each run (0: none).
fn execute(file: &str, reps: usize, beside: usize, pause: usize) -> Result<Vec<u128>, String> {
    let source = std::fs::read_to_string(file).map_err(|e| format!("cannot read {file}: {e}"))?;
    let mut times = Vec::with_capacity(reps);
    let mut kept = Worksheet::new();
    for _ in 0..beside {
        kept.execute(None, "1 + 1", &Interrupt::new());
    }
    for _ in 0..reps {
        let mut fresh = Worksheet::new();
        let (sheet, cell) = match beside {
            0 => (&mut fresh, Some("bench")),
            _ => (&mut kept, None),
        };
        // Timed as the kernel times evaluation: from the parsed cell to its report.
        let prepared = Prepared::new(black_box(&source));
        if pause > 0 {
            std::thread::sleep(std::time::Duration::from_micros(pause as u64));
        }
        let start = Instant::now();
        let execution = sheet.execute_prepared(cell, prepared, &Interrupt::new());
        times.push(start.elapsed().as_nanos());
        let report = &execution.report;
        if report.has_errors() {
            let text: Vec<String> = report
                .diagnostics
                .iter()
                .map(|d| diagnostic::render(&report.source, d))
                .collect();
            return Err(format!("{file} has errors:\n{}", text.join("\n")));
        }
        black_box(execution);
    }
    Ok(times)
}

fn rust_loop(points: usize, reps: usize) -> Vec<u128> {
    let mut out = vec![0.0; points];
    (0..reps)
        .map(|_| {
            let start = Instant::now();
            shared::chain::sweep(black_box(7.0), black_box(16.0), &mut out);
            black_box(&out);
            start.elapsed().as_nanos()
        })
        .collect()
}

fn summary(mut times: Vec<u128>) -> String {
    times.sort_unstable();
    let n = times.len();
    let median = if n % 2 == 1 {
        times[n / 2] as f64
    } else {
        (times[n / 2 - 1] + times[n / 2]) as f64 / 2.0
    };
    format!(
        "{{\"median_ns\": {median}, \"min_ns\": {}, \"reps\": {n}}}",
        times[0]
    )
}

//! Hostile worksheets: random bytes, token soups, deep nesting, huge inputs, and the caps of
//! the language reference (section 8: nesting depth 256, call depth 32, lists of 10 000
//! items, sweeps of 10⁷ points), each of which must end in a clear error, never in a panic,
//! a hang, a stack overflow or exhausted memory.
//!
//! The property tests run the very bodies of the `cargo fuzz` targets (fuzz/src/bodies.rs),
//! bounded, so the normal test run covers what the fuzzers explore at length.

#[path = "../../fuzz/src/bodies.rs"]
mod bodies;

use proptest::prelude::*;
use std::sync::mpsc;
use std::time::{Duration, Instant};
use worksheet_lang::results::Shown;
use worksheet_lang::{CellReport, DiagKind, Execution, Interrupt, Worksheet};

/// A generous ceiling for work that takes milliseconds on a healthy build (debug, 2 cores).
const GENEROUS: Duration = Duration::from_secs(30);

/// Runs one cell on a thread of its own with a deadline, so that a hang fails the test
/// instead of stalling the run. The thread is left behind if it never returns.
fn run_within(source: &str, within: Duration) -> Result<(Execution, Duration), String> {
    let (tx, rx) = mpsc::channel();
    let src = source.to_string();
    std::thread::Builder::new()
        // The default 2 MiB test stack: a recursive descent over a deep input overflows it.
        .stack_size(2 << 20)
        .spawn(move || {
            let started = Instant::now();
            let ex = Worksheet::new().execute(None, &src, &Interrupt::new());
            let _ = tx.send((ex, started.elapsed()));
        })
        .map_err(|e| e.to_string())?;
    rx.recv_timeout(within).map_err(|_| {
        format!(
            "no result within {within:?} for a cell of {} bytes starting {:?}",
            source.len(),
            source.chars().take(60).collect::<String>()
        )
    })
}

fn run(source: &str) -> (Execution, Duration) {
    run_within(source, GENEROUS).unwrap_or_else(|e| panic!("{e}"))
}

fn error_kinds(r: &CellReport) -> Vec<DiagKind> {
    r.diagnostics
        .iter()
        .filter(|d| d.is_error())
        .map(|d| d.kind)
        .collect()
}

fn first_error(r: &CellReport) -> String {
    r.diagnostics
        .iter()
        .find(|d| d.is_error())
        .map(|d| d.message.clone())
        .unwrap_or_default()
}

/// Everything a report would put on screen, in bytes.
fn shown_bytes(r: &CellReport) -> usize {
    let text = |s: &Shown| match s {
        Shown::Text(t) | Shown::Other(t) => t.len(),
        Shown::Number { .. } => 0,
    };
    r.values
        .iter()
        .chain(&r.shown)
        .map(|v| v.text().len() + text(&v.shown) + v.range_text().map_or(0, |r| r.len()))
        .sum()
}

// ---------------------------------------------------------------------------------------
// Property tests over the fuzz targets' bodies

/// Fragments of the language, valid and not, for token soups.
const FRAGMENTS: &[&str] = &[
    "given",
    "check",
    "sweep",
    "over",
    "steps",
    "by",
    "as",
    "x",
    "y",
    "iload",
    "θ",
    "R1",
    "u1",
    "f",
    "g",
    "=",
    "+",
    "-",
    "*",
    "/",
    "^",
    "||",
    "±",
    "+/-",
    "..",
    ",",
    ":",
    "<",
    "<=",
    "≥",
    ">",
    "(",
    ")",
    "[",
    "]",
    ".",
    "·",
    "×",
    "−",
    "12",
    "0.47",
    "4.7e-3",
    "1_000",
    "1e308",
    "1e-308",
    "0",
    "-0",
    "4k7",
    "2R2",
    "0R47",
    "100n",
    "2µ2",
    "10K",
    "V",
    "mA",
    "kΩ",
    "K/W",
    "W/(m·K)",
    "°C",
    "℃",
    "degF",
    "%",
    "ppm",
    "mm²",
    "m^2",
    "\"note\"",
    "\"",
    "# c",
    "\n",
    "\n  ",
    " ",
    "\t",
    "reg.linear(",
    "heat.junction(",
    "res.pick(",
    "power.",
    "E24",
    "tol(",
    "sqrt(",
    "ln(",
    "exp(",
    "min(",
    "max(",
    "kelvin(",
    "vout:",
    "iout:",
    "iq:",
    "dropout:",
    "\u{feff}",
    "\u{200b}",
    "\u{a0}",
    "µ",
    "Ω",
    "\u{0}",
];

fn soup() -> impl Strategy<Value = String> {
    proptest::collection::vec(
        (
            proptest::sample::select(FRAGMENTS),
            prop_oneof![Just(""), Just(" "), Just("\n")],
        ),
        0..60,
    )
    .prop_map(|parts| parts.into_iter().map(|(a, b)| format!("{a}{b}")).collect())
}

/// Plausible worksheets: definitions over earlier names, tolerances, checks, sweeps and
/// user functions, so that evaluation and worst-case analysis are reached, not only the
/// parser.
fn worksheet() -> impl Strategy<Value = String> {
    let number = prop_oneof![
        (1u32..500).prop_map(|n| format!("{n}")),
        (1u32..500).prop_map(|n| format!("0.{n}")),
        Just("1e-12".to_string()),
        Just("1e12".to_string()),
        Just("0".to_string()),
    ];
    let unit = proptest::sample::select(vec![
        "V", "mA", "A", "Ω", "kΩ", "W", "K/W", "°C", "K", "%", "",
    ]);
    let tol = proptest::sample::select(vec!["", " ± 5 %", " ± 1 %", " ± 20 mV", " ± 2 K"]);
    let op = proptest::sample::select(vec![" + ", " - ", " * ", " / ", " || "]);
    let given = (number.clone(), unit.clone(), tol).prop_map(|(n, u, t)| format!("{n} {u}{t}"));
    let line = (0usize..6, given, op, 0usize..6, 0usize..6, number, unit).prop_map(
        |(kind, lit, op, a, b, n, u)| match kind {
            0 | 1 => format!("given g{a} = {lit}"),
            2 => format!("d{a} = g{a}{op}g{b}"),
            3 => format!("check d{a} <= {n} {u}"),
            4 => format!("sweep g{a} over 1 {u} .. {n} {u} steps {}: d{b}", b + 2),
            _ => format!("h{a}(p) = p{op}g{b}\nd{b} = h{a}({lit})"),
        },
    );
    proptest::collection::vec(line, 1..14).prop_map(|ls| ls.join("\n"))
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn random_bytes_never_panic(data in proptest::collection::vec(any::<u8>(), 0..600)) {
        bodies::parse(&data);
        bodies::execute(&data);
        bodies::units(&data);
    }

    #[test]
    fn token_soups_never_panic(src in soup()) {
        bodies::parse(src.as_bytes());
        bodies::execute(src.as_bytes());
        bodies::units(src.as_bytes());
    }

    #[test]
    fn unit_texts_never_panic(src in "[A-Za-zµΩ°²³⁻¹·*/^()0-9.-]{0,24}", x in any::<f64>()) {
        let mut data = x.to_le_bytes().to_vec();
        data.extend_from_slice(src.as_bytes());
        bodies::units(&data);
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, ..ProptestConfig::default() })]

    #[test]
    fn generated_worksheets_hold_their_invariants(cells in proptest::collection::vec(worksheet(), 1..4)) {
        let joined = cells.join(&bodies::CELL_SEPARATOR.to_string());
        bodies::parse(joined.as_bytes());
        bodies::execute(joined.as_bytes());
    }
}

// ---------------------------------------------------------------------------------------
// Deep nesting

/// Set in the child process that runs the nesting grid (see below).
const NESTING_CHILD: &str = "HOSTILE_NESTING_CHILD";

/// Every kind of nesting at depths around the cap of 256 and far beyond. A stack overflow
/// aborts the whole process, so the grid runs in a child process of its own and its death is
/// reported here as a failure, with the case it reached.
#[test]
fn deep_nesting_is_one_clear_error_and_never_overflows_the_stack() {
    if std::env::var_os(NESTING_CHILD).is_some() {
        return nesting_grid();
    }
    let exe = std::env::current_exe().expect("the test binary");
    let out = std::process::Command::new(exe)
        .args([
            "deep_nesting_is_one_clear_error_and_never_overflows_the_stack",
            "--exact",
            "--nocapture",
            "--test-threads=1",
        ])
        .env(NESTING_CHILD, "1")
        .output()
        .expect("the child runs");
    let stderr = String::from_utf8_lossy(&out.stderr);
    let reached = stderr
        .lines()
        .rev()
        .find(|l| l.starts_with("nesting:"))
        .unwrap_or("");
    println!(
        "{}",
        String::from_utf8_lossy(&out.stdout)
            .lines()
            .filter(|l| l.contains("nesting grid"))
            .collect::<Vec<_>>()
            .join("\n")
    );
    assert!(
        out.status.success(),
        "the nesting grid died ({}) at {reached}\n{stderr}",
        out.status
    );
}

fn nesting_grid() {
    let kinds = [
        ("(", ")"),
        ("[", "]"),
        ("-", ""),
        ("sqrt(", ")"),
        ("2^", ""),
        ("min(1 V, ", ")"),
        ("max(", ", 1 V)"),
        ("abs(-", ")"),
    ];
    let started = Instant::now();
    let mut cases = 0;
    for (open, close) in kinds {
        for depth in [50, 100, 150, 200, 255, 256, 257, 1000, 20_000] {
            // Before each case, so that a crash names the case it died in.
            eprintln!("nesting: `{open}` × {depth}");
            let src = format!("x = {}1 V{}", open.repeat(depth), close.repeat(depth));
            bodies::parse(src.as_bytes());
            let (ex, _) = run(&src);
            bodies::assert_report(&ex.report);
            if depth > 300 {
                assert!(
                    error_kinds(&ex.report).contains(&DiagKind::TooDeep),
                    "`{open}` × {depth}: {:?}",
                    error_kinds(&ex.report)
                );
            }
            cases += 1;
        }
    }
    println!(
        "nesting grid: {cases} cases on a 2 MiB stack in {:?}",
        started.elapsed()
    );
}

// ---------------------------------------------------------------------------------------
// Huge inputs

#[test]
fn huge_inputs_are_parsed_in_bounded_time_and_stack() {
    let mega = 1 << 20;
    let cases: Vec<(&str, String)> = vec![
        (
            "1 MiB of opening parentheses",
            format!("x = {}", "(".repeat(mega)),
        ),
        ("1 MiB of brackets", "[".repeat(mega)),
        (
            "1 MiB of minus signs",
            format!("x = {}1 V", "-".repeat(mega)),
        ),
        ("a 1 MiB comment", format!("# {}", "c".repeat(mega))),
        ("a 1 MiB name", format!("{} = 1 V", "n".repeat(mega))),
        (
            "a 1 MiB note",
            format!("given a = 1 V \"{}\"", "n".repeat(mega)),
        ),
        (
            "an unterminated 1 MiB string",
            format!("given a = 1 V \"{}", "s".repeat(mega)),
        ),
        ("1 MiB of operators", "+*".repeat(mega / 2)),
        ("100 000 empty lines", "\n".repeat(100_000)),
        (
            "20 000 definitions",
            (0..20_000).map(|i| format!("v{i} = {i} V\n")).collect(),
        ),
        ("a 1 MiB number", format!("x = {} V", "9".repeat(mega))),
    ];
    for (what, src) in cases {
        let parse_started = Instant::now();
        bodies::parse(src.as_bytes());
        let parsed = parse_started.elapsed();
        let (ex, ran) = run(&src);
        bodies::assert_report(&ex.report);
        println!(
            "{what}: parse {parsed:?}, execute {ran:?}, {} diagnostics, first: {:?}",
            ex.report.diagnostics.len(),
            first_error(&ex.report)
                .chars()
                .take(100)
                .collect::<String>()
        );
    }
}

// ---------------------------------------------------------------------------------------
// Resource caps

#[test]
fn a_sweep_over_the_point_cap_is_a_clear_error() {
    // Ten million points are allowed (the language reference, section 8); one more is not.
    for src in [
        "given x = 1 V\nsweep x over 0 V .. 1 V steps 10000001: x * 2",
        // 1 V in steps of 1 nV is 10⁹ + 1 points.
        "given x = 1 V\nsweep x over 0 V .. 1 V by 1 nV: x * 2",
        "given x = 1 V\nsweep x over 0 V .. 1 V steps 1e300: x * 2",
    ] {
        let (ex, took) = run(src);
        let kinds = error_kinds(&ex.report);
        println!("{src:?}: {took:?}, {:?}", first_error(&ex.report));
        assert!(kinds.contains(&DiagKind::Limit), "{kinds:?}");
        assert!(
            first_error(&ex.report).contains("10000000"),
            "the message names the cap"
        );
        assert!(
            took < Duration::from_secs(10),
            "refused up front, not after running: {took:?}"
        );
    }
}

#[test]
fn a_list_over_the_item_cap_is_a_clear_error() {
    let list = |n: usize| {
        let items: Vec<String> = (0..n).map(|i| format!("{i} mA")).collect();
        format!("l = [{}]", items.join(", "))
    };
    let (ok, _) = run(&list(10_000));
    assert!(
        !ok.report.has_errors(),
        "10 000 items are allowed: {}",
        first_error(&ok.report)
    );
    let (ex, _) = run(&list(10_001));
    assert!(error_kinds(&ex.report).contains(&DiagKind::Limit));
    assert!(
        first_error(&ex.report).contains("10000"),
        "{}",
        first_error(&ex.report)
    );
}

#[test]
fn direct_and_mutual_recursion_end_at_the_call_depth() {
    for src in [
        "f(x) = f(x) + 1 V\ny = f(1 V)",
        "f(x) = g(x) * 2\ng(x) = f(x) - 1 V\ny = f(1 V)",
        "f(x) = f(f(x))\ny = f(1 V)",
    ] {
        let (ex, took) = run(src);
        let msg = first_error(&ex.report);
        println!("{src:?}: {took:?}, {msg:?}");
        assert!(error_kinds(&ex.report).contains(&DiagKind::Limit), "{msg}");
        assert!(msg.contains("32"), "the message names the cap: {msg}");
    }
}

/// A chain of functions each calling the one below twice stays inside the call depth of
/// 32, yet makes 2^depth calls: the depth cap alone does not bound the work.
fn fan_out(depth: usize) -> String {
    let mut s = String::from("f0(x) = x\n");
    for i in 1..=depth {
        s += &format!("f{i}(x) = f{j}(x) + f{j}(x)\n", j = i - 1);
    }
    s + &format!("y = f{depth}(1 V)\n")
}

#[test]
fn recursion_that_fans_out_is_capped() {
    // The cost doubles with each level: measure it small, then ask for 2^30 calls.
    let (small, t12) = run(&fan_out(12));
    assert!(!small.report.has_errors(), "{}", first_error(&small.report));
    let (_, t14) = run(&fan_out(14));
    println!(
        "fan-out: 2^12 calls {t12:?}, 2^14 calls {t14:?}; 2^30 calls would take about {:?}",
        t14 * (1 << 16)
    );
    match run_within(&fan_out(30), Duration::from_secs(20)) {
        Ok((ex, took)) => {
            println!("2^30 calls: {took:?}, {:?}", first_error(&ex.report));
            assert!(
                error_kinds(&ex.report).contains(&DiagKind::Limit),
                "a bounded evaluation must end in a LimitExceeded error"
            );
        }
        Err(e) => panic!("the evaluation is not bounded: {e}"),
    }
}

#[test]
fn nested_lists_cannot_multiply_the_output() {
    // Each list holds 100 items, well under the cap of 10 000; nested three deep they stand
    // for 10⁶ numbers, from a cell of under 1 KiB. Four deep (10⁸) would exhaust memory when
    // shown, so the cap must count every item a value holds (or bound what is shown).
    let inner: Vec<String> = (0..100).map(|i| format!("{i} V")).collect();
    let a = format!("a = [{}]", inner.join(", "));
    let b = format!("b = [{}]", vec!["a"; 100].join(", "));
    let c = format!("c = [{}]", vec!["b"; 100].join(", "));
    let src = format!("{a}\n{b}\n{c}");
    let (ex, took) = run(&src);
    let bytes = shown_bytes(&ex.report);
    println!(
        "a cell of {} bytes: {took:?}, {bytes} bytes shown, errors {:?}",
        src.len(),
        error_kinds(&ex.report)
    );
    let capped = error_kinds(&ex.report).contains(&DiagKind::Limit);
    assert!(
        capped || bytes <= 1 << 20,
        "{bytes} bytes of output from {} bytes of source, and no LimitExceeded error",
        src.len()
    );
}

#[test]
fn an_interrupt_stops_a_long_sweep_promptly_and_changes_nothing() {
    let mut ws = Worksheet::new();
    // The swept value goes through a built-in call, so the sweep takes the general path
    // (point by point): long enough in any build for the interrupt to find it running.
    let setup = "given r = 10 Ω ± 1 %\ngiven x = 0.5 V\ny = x * x / r\n\
                 u = reg.linear(vin: x + 10 V, vout: 5 V, iout: y / 1 V)";
    assert!(!ws
        .execute(Some("a"), setup, &Interrupt::new())
        .report
        .has_errors());
    let before = ws.reports().to_vec();
    let interrupt = Interrupt::new();
    let raiser = interrupt.clone();
    let raised_at = std::thread::spawn(move || {
        std::thread::sleep(Duration::from_millis(300));
        raiser.raise();
        Instant::now()
    });
    let started = Instant::now();
    let ex = ws.execute(
        Some("b"),
        "sweep x over 0 V .. 1 V steps 10000000: u.loss",
        &interrupt,
    );
    let ended = Instant::now();
    let raised_at = raised_at.join().expect("the raiser thread");
    let latency = ended.saturating_duration_since(raised_at);
    println!(
        "interrupt latency in the library: {latency:?} (run {:?})",
        ended - started
    );
    assert!(
        ex.interrupted,
        "the sweep ran to its end in {:?}",
        ended - started
    );
    assert!(error_kinds(&ex.report).contains(&DiagKind::Interrupted));
    assert_eq!(
        ws.reports(),
        before.as_slice(),
        "the worksheet is as it was"
    );
    assert!(latency < Duration::from_secs(5), "{latency:?}");
}

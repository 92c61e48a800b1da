//! What each fuzz target does with one input, and the properties it holds the library to.
//!
//! These functions are shared: the `cargo fuzz` targets in `fuzz_targets/` call them, and
//! `worksheet-lang/tests/hostile.rs` includes this file by path and runs them under proptest
//! in the normal test run. Each one panics when a property fails, which both drivers report.
//!
//! Properties (from the language reference, sections 6 and 7): no input panics, hangs or
//! overflows the stack; every diagnostic's span lies inside the source, on character
//! boundaries, so its caret excerpt can be drawn; no NaN or infinity ever appears in the
//! results; a run that fails or is interrupted leaves the worksheet as it was; numbers are
//! formatted in a form that reads back.

use std::sync::mpsc;
use std::time::Duration;
use worksheet_lang::results::Shown;
use worksheet_lang::{
    diagnostic, lexer, parser, units, CellReport, Diagnostic, Interrupt, Worksheet,
};

/// After this long an evaluation is interrupted, so that a legitimately long input (a sweep
/// of ten million points) does not look like a hang; an evaluation that ignores the
/// interrupt still shows up as one (libFuzzer's `-timeout`, the tests' watchdogs).
pub const EVAL_BUDGET: Duration = Duration::from_secs(2);

/// At most this many cells are taken from one input.
pub const MAX_CELLS: usize = 4;

/// Cells in one input are separated by this character (it never occurs in a worksheet).
pub const CELL_SEPARATOR: char = '\u{0}';

fn text(data: &[u8]) -> String {
    String::from_utf8_lossy(data).into_owned()
}

/// A span that indexes `source` and starts and ends on character boundaries.
pub fn assert_span(source: &str, span: &std::ops::Range<usize>, what: &str) {
    assert!(
        span.start <= span.end && span.end <= source.len(),
        "{what}: span {span:?} outside a source of {} bytes",
        source.len()
    );
    assert!(
        source.is_char_boundary(span.start) && source.is_char_boundary(span.end),
        "{what}: span {span:?} cuts a character"
    );
}

fn assert_diagnostic(source: &str, d: &Diagnostic) {
    assert_span(source, &d.span, &d.message);
    assert!(!d.message.is_empty(), "a diagnostic without a message");
    let shown = diagnostic::render(source, d);
    assert!(
        shown.contains(&d.message),
        "the rendering drops the message"
    );
}

/// Lexer, parser and the completeness test on arbitrary text.
pub fn parse(data: &[u8]) {
    let source = text(data);
    let lexed = lexer::lex(&source);
    assert!(
        !lexed.tokens.is_empty(),
        "the token stream always ends with Eof"
    );
    for t in &lexed.tokens {
        assert_span(&source, &t.span, "token");
    }
    for d in &lexed.diagnostics {
        assert_diagnostic(&source, d);
    }
    let program = parser::parse(&source);
    for d in &program.diagnostics {
        assert_diagnostic(&source, d);
    }
    for s in &program.stmts {
        assert_span(&source, &s.span, "statement");
    }
    let _ = parser::is_complete(&source);
}

/// Raises `interrupt` after `budget` unless dropped first.
pub struct Watchdog {
    done: Option<mpsc::Sender<()>>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Watchdog {
    pub fn new(interrupt: &Interrupt, budget: Duration) -> Self {
        let (tx, rx) = mpsc::channel::<()>();
        let interrupt = interrupt.clone();
        let thread = std::thread::spawn(move || {
            if rx.recv_timeout(budget) == Err(mpsc::RecvTimeoutError::Timeout) {
                interrupt.raise();
            }
        });
        Watchdog {
            done: Some(tx),
            thread: Some(thread),
        }
    }
}

impl Drop for Watchdog {
    fn drop(&mut self) {
        drop(self.done.take());
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

fn finite(x: f64, what: &str, row: &str) {
    assert!(x.is_finite(), "{what} of {row} is {x}");
}

/// Every number in a report is finite and every bound encloses its nominal.
pub fn assert_report(r: &CellReport) {
    for d in &r.diagnostics {
        assert_diagnostic(&r.source, d);
    }
    for row in r.values.iter().chain(&r.shown) {
        if let Shown::Number { value, bounds } = &row.shown {
            assert!(
                !row.text().is_empty(),
                "{}: a number without display text",
                row.name
            );
            finite(value.si, "the value", &row.name);
            if let Some(b) = bounds {
                finite(b.min, "the minimum", &row.name);
                finite(b.max, "the maximum", &row.name);
                if let Some(s) = &b.spread {
                    finite(s.rss, "the RSS spread", &row.name);
                }
                assert!(
                    b.min <= b.max,
                    "{}: min {} > max {}",
                    row.name,
                    b.min,
                    b.max
                );
                // Rounding is not directed: allow the library's stated 1e-15 relative slack,
                // with room for a few operations.
                let slack = 1e-12 * value.si.abs().max(b.min.abs()).max(b.max.abs());
                assert!(
                    b.min - slack <= value.si && value.si <= b.max + slack,
                    "{}: nominal {} outside {}..{}",
                    row.name,
                    value.si,
                    b.min,
                    b.max
                );
            }
        }
    }
    for c in &r.checks {
        finite(c.margin, "the margin", &c.text);
        finite(c.worst, "the worst side", &c.text);
        finite(c.limit, "the limit", &c.text);
    }
    for s in &r.sweeps {
        for &p in &s.points {
            finite(p, "a swept point", &s.over);
        }
        for series in &s.series {
            assert_eq!(series.nominal.len(), s.points.len(), "{}", series.name);
            let all = series
                .nominal
                .iter()
                .chain(series.min.iter().flatten())
                .chain(series.max.iter().flatten());
            for &y in all {
                finite(y, "a sweep value", &series.name);
            }
        }
    }
}

/// The cells of one input: up to `MAX_CELLS` pieces between separators.
pub fn cells(data: &[u8]) -> Vec<String> {
    text(data)
        .split(CELL_SEPARATOR)
        .take(MAX_CELLS)
        .map(str::to_string)
        .collect()
}

/// Runs the cells of one input in one worksheet, then asks for completion and inspection at
/// a few cursor positions.
pub fn execute(data: &[u8]) {
    let mut ws = Worksheet::new();
    let interrupt = Interrupt::new();
    let _watchdog = Watchdog::new(&interrupt, EVAL_BUDGET);
    let cells = cells(data);
    for (i, source) in cells.iter().enumerate() {
        // Half the cells carry a front end's id, half are known by the names they define.
        let id = format!("cell-{}", i % 2);
        let key = (i % 2 == 0).then_some(id.as_str());
        let before = ws.reports().to_vec();
        let ex = ws.execute(key, source, &interrupt);
        assert_eq!(
            ex.report.source, *source,
            "the report keeps the source as run"
        );
        assert_report(&ex.report);
        for u in &ex.updated {
            assert_report(&u.report);
        }
        if ex.interrupted || ex.report.has_errors() {
            assert_eq!(
                ws.reports(),
                before.as_slice(),
                "a failed or interrupted run changed the worksheet"
            );
            assert!(ex.updated.is_empty(), "a failed run reported updates");
        }
        if interrupt.is_raised() {
            break;
        }
    }
    let probe = cells.last().cloned().unwrap_or_default();
    let len = probe.len();
    for cursor in [0, len / 3, len / 2, len, len + 7] {
        let c = ws.complete(&probe, cursor);
        assert!(
            c.start <= c.end && c.end <= probe.len(),
            "completion range {}..{} outside {len} bytes",
            c.start,
            c.end
        );
        assert!(probe.is_char_boundary(c.start) && probe.is_char_boundary(c.end));
        let _ = ws.inspect(&probe, cursor, &Interrupt::new());
    }
}

/// The unit parser and the number formatting on arbitrary text and numbers.
///
/// The first 8 bytes (when there are 8) are also read as an `f64` to format.
pub fn units(data: &[u8]) {
    let source = text(data);
    for piece in std::iter::once(source.as_str()).chain(source.split_whitespace()) {
        match units::parse_unit(piece) {
            Ok(u) => {
                assert!(
                    u.factor.is_finite() && u.factor > 0.0,
                    "`{piece}`: factor {}",
                    u.factor
                );
                for x in [1.0, -2.5, 1e-3] {
                    let si = u.to_si(x, false);
                    finite(si, "the SI value", piece);
                    let back = u.from_si(si, false);
                    assert!(
                        (back - x).abs() <= 1e-9 * x.abs(),
                        "`{piece}`: {x} → {si} SI → {back}"
                    );
                }
                // The canonical text is itself a unit of the same dimension and size.
                if let Ok(again) = units::parse_unit(&u.text) {
                    assert_eq!(again.dim, u.dim, "`{piece}` shown as `{}`", u.text);
                    let r = again.factor / u.factor;
                    assert!((r - 1.0).abs() < 1e-12, "`{piece}` vs `{}`", u.text);
                }
                let _ = units::format_in(1.5, false, &u, 3);
            }
            Err(e) => assert!(
                !e.message.is_empty(),
                "`{piece}`: an error without a message"
            ),
        }
        let _ = units::nearest_symbol(piece);
    }
    if let Some(bytes) = data.get(..8) {
        let mut b = [0u8; 8];
        b.copy_from_slice(bytes);
        let x = f64::from_le_bytes(b);
        if x.is_finite() {
            // Seventeen significant digits identify every f64 (IEEE 754-2008, 5.12.2), and
            // the formatted text is one the language reads back.
            let s = units::format_number(x, 17);
            let back: f64 = s
                .parse()
                .unwrap_or_else(|e| panic!("{x:e} formatted as `{s}`: {e}"));
            assert_eq!(back, x, "{x:e} formatted as `{s}`");
            for sig in 1..=6 {
                let s = units::format_number(x, sig);
                assert!(s.parse::<f64>().is_ok(), "{x:e} at {sig} digits: `{s}`");
            }
            for dim in [
                units::Dim::NONE,
                units::Dim::VOLTAGE,
                units::Dim::TEMPERATURE,
            ] {
                assert!(!units::format_si(x, dim, false, 3).is_empty());
            }
        }
    }
}

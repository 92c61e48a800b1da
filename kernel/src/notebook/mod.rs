//! Notebooks on the command line: `headroom run NOTEBOOK.ipynb`, `headroom seal`,
//! `headroom verify`.
//!
//! - `ipynb` reads and writes nbformat 4 losslessly and atomically;
//! - `outputs` turns one cell run into its outputs, the same list the kernel publishes;
//! - `execute` runs every code cell in order with one worksheet;
//! - `overrides` applies `--set` by rewriting the `given` line;
//! - `compare` holds stored results against recomputed ones (relative 1e-9);
//! - `digest` defines the canonical sources and results a seal hashes.
//!
//! How a notebook runs: code cells in order, with one worksheet keyed by cell id, as a front end
//! running all cells against a fresh kernel. A blank cell is skipped, as JupyterLab and nbclient
//! skip it. A cell that errs does not stop the run, so one run shows every problem. When a later
//! cell changes an earlier cell's results (a name defined again), the earlier block is updated
//! in place, as front ends apply `update_display_data`.
//!
//! The cell sources are the truth: `--set` rewrites the `given` line, so `verify` and `seal`
//! rerun the sources as stored. The overrides recorded in the metadata are the record of what
//! was set from outside, and `verify` reports them.
//!
//! Only a notebook where everything holds can be sealed: outputs that reproduce, no error and
//! no failing check. `verify` holds a notebook to the same standard.
//!
//! Exit status of `run` and `verify`: 0 when everything holds, 1 when a check fails or a
//! result does not hold, 2 on an error (a cell that errs, an unreadable or foreign notebook).

mod compare;
mod digest;
mod execute;
pub(crate) mod ipynb;
mod overrides;

use crate::render;
use crate::run::RunArgs;
use anyhow::{bail, Context};
use clap::Args;
use compare::{CellResults, Diff, DiffKind};
use execute::CellRun;
use ipynb::Notebook;
use serde_json::{json, Value};
use std::fmt::Write as _;
use std::io::{IsTerminal as _, Write as _};
use std::path::{Path, PathBuf};
use worksheet_lang::{diagnostic, units};

const EXIT_OK: u8 = 0;
const EXIT_FAILED: u8 = 1;
const EXIT_ERROR: u8 = 2;

#[derive(Args, Debug)]
pub struct SealArgs {
    /// The notebook to seal (written in place).
    pub notebook: PathBuf,
    /// Who reviewed it.
    #[arg(long)]
    pub reviewer: String,
    /// A note to keep with the review.
    #[arg(long)]
    pub note: Option<String>,
}

#[derive(Args, Debug)]
pub struct VerifyArgs {
    /// The notebooks to verify.
    #[arg(required = true)]
    pub notebooks: Vec<PathBuf>,
}

// ---------------------------------------------------------------------------------------
// run

/// `headroom run NOTEBOOK.ipynb`: runs every code cell, writes the outputs into OUT and
/// prints what changed against the stored outputs.
pub fn run(args: &RunArgs) -> anyhow::Result<u8> {
    let input = &args.file;
    let out_path = output_path(args)?;
    let mut nb = Notebook::load(input)?;
    let original = nb.clone();

    let mut sets = Vec::new();
    for s in &args.set {
        match overrides::parse_set(s) {
            Ok(v) => sets.push(v),
            Err(msg) => {
                eprintln!("headroom: {msg}");
                return Ok(EXIT_ERROR);
            }
        }
    }
    let rewrites = match overrides::apply(&mut nb, &sets) {
        Ok(r) => r,
        Err(msg) => {
            eprintln!("headroom: {msg}");
            return Ok(EXIT_ERROR);
        }
    };

    let runs = execute::run_cells(&nb);
    execute::store(&mut nb, &runs);
    nb.ensure_kernel_metadata();
    ipynb::write_atomic(&out_path, nb.to_text()?.as_bytes())?;

    let reports: Vec<_> = runs.iter().filter_map(|r| r.report.as_deref()).collect();
    let mut s = String::new();
    let ran = runs.iter().filter(|r| r.execution_count.is_some()).count();
    let _ = writeln!(s, "Wrote {} ({ran} code cells run)", out_path.display());
    if !rewrites.is_empty() {
        let _ = writeln!(s, "\nSet from outside");
        for r in &rewrites {
            let cells: Vec<String> = r
                .cells
                .iter()
                .map(|&i| execute::label(i, &key_of(&runs, i)))
                .collect();
            let _ = writeln!(
                s,
                "  {} = {}   (was {}; line rewritten in {})",
                r.name,
                r.text,
                r.old,
                cells.join(", ")
            );
        }
    }
    s.push_str(&change_summary(&original, &runs));
    s.push_str(&warnings_and_errors(&runs));
    if let Some(line) = seal_after_run(&nb) {
        let _ = writeln!(s, "\n{line}");
    }
    for c in render::cautions(&reports) {
        let _ = writeln!(s, "\n{c}");
    }
    let failed: usize = reports.iter().map(|r| r.failed_checks()).sum();
    let total: usize = reports.iter().map(|r| r.checks.len()).sum();
    let errors = reports.iter().filter(|r| r.has_errors()).count();
    let _ = writeln!(s);
    if errors > 0 {
        let _ = writeln!(s, "{errors} cell(s) with errors");
    }
    if failed > 0 {
        let _ = writeln!(s, "Checks failed: {failed} of {total}");
    } else if errors == 0 {
        let _ = writeln!(s, "All {total} checks pass");
    }

    if args.json {
        // stdout carries the data alone; the summary goes to stderr.
        let data = render::results_json(&reports);
        print_out(&serde_json::to_string_pretty(&data)?)?;
        eprint!("{s}");
    } else {
        print_out(s.trim_end())?;
    }
    Ok(if errors > 0 {
        EXIT_ERROR
    } else if failed > 0 {
        EXIT_FAILED
    } else {
        EXIT_OK
    })
}

fn key_of(runs: &[CellRun], index: usize) -> String {
    runs.iter()
        .find(|r| r.index == index)
        .map_or_else(|| format!("#{}", index + 1), |r| r.key.clone())
}

/// OUT: `-o`, the input itself with `--in-place`, else `NAME.run.ipynb` beside the input.
fn output_path(args: &RunArgs) -> anyhow::Result<PathBuf> {
    let input = &args.file;
    match (&args.output, args.in_place) {
        (Some(_), true) => bail!("give either -o/--output or --in-place, not both"),
        (None, true) => Ok(input.clone()),
        (Some(out), false) => {
            if same_file(out, input) {
                bail!(
                    "`{}` is the input notebook; headroom writes over its input only with \
                     --in-place",
                    out.display()
                );
            }
            Ok(out.clone())
        }
        (None, false) => {
            let stem = input
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "notebook".into());
            Ok(input.with_file_name(format!("{stem}.run.ipynb")))
        }
    }
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// Values that changed against the stored outputs (old → new), checks that flipped or whose
/// margin changed, and any other difference in the results data.
fn change_summary(original: &Notebook, runs: &[CellRun]) -> String {
    let mut s = String::new();
    let mut stored_any = false;
    let mut changes: Vec<(String, String, String)> = Vec::new();
    let mut flips: Vec<String> = Vec::new();
    let mut margins: Vec<String> = Vec::new();
    let mut other: Vec<String> = Vec::new();
    for r in runs {
        let Some(cell) = original.cells().get(r.index) else {
            continue;
        };
        let stored = CellResults::stored(cell);
        stored_any |= stored.ran;
        if !stored.ran {
            continue;
        }
        for d in compare::diff_cell(&stored, &CellResults::recomputed(r)) {
            match (&d.kind, &d.texts) {
                (DiffKind::Value, Some((old, new))) => {
                    let line = match &d.numbers {
                        // Beyond the display precision the texts agree; show the numbers.
                        Some((a, b, unit)) if old == new => {
                            let n = |x: f64| match unit.as_str() {
                                "1" | "" => units::format_number(x, 6),
                                u => format!("{} {u}", units::format_number(x, 6)),
                            };
                            format!("{old} → {new} ({} → {})", n(*a), n(*b))
                        }
                        _ => format!("{old} → {new}"),
                    };
                    changes.push((d.subject.clone(), line, String::new()));
                }
                (DiffKind::Flipped { now_passes }, _) => {
                    let verdict = if *now_passes {
                        "✓ now passes"
                    } else {
                        "✗ now fails "
                    };
                    flips.push(format!(
                        "  {verdict}  {}{}   ({})",
                        d.subject,
                        margin_change(r, &d),
                        r.label()
                    ));
                }
                (DiffKind::Check, _) if d.numbers.is_some() => {
                    margins.push(format!(
                        "  {}{}   ({})",
                        d.subject,
                        margin_change(r, &d),
                        r.label()
                    ));
                }
                (DiffKind::Sweep, _) => {
                    other.push(format!(
                        "  {}: results changed   ({})",
                        d.subject,
                        r.label()
                    ));
                }
                (DiffKind::Warning, _) if d.stored == compare::ABSENT => {
                    other.push(format!("  new warning: {}   ({})", d.recomputed, r.label()));
                }
                (DiffKind::Warning, _) => {
                    other.push(format!("  warning gone: {}   ({})", d.stored, r.label()));
                }
                _ => other.push(format!(
                    "  {}: {}: {} → {}",
                    r.label(),
                    d.subject,
                    d.stored,
                    d.recomputed
                )),
            }
        }
    }
    if !stored_any {
        let _ = writeln!(s, "\nNo stored outputs to compare with (first run)");
        return s;
    }
    if changes.is_empty() && flips.is_empty() && margins.is_empty() && other.is_empty() {
        let _ = writeln!(s, "\nEvery result as stored");
        return s;
    }
    if !changes.is_empty() {
        let _ = writeln!(s, "\nChanged against the stored outputs");
        let w = changes
            .iter()
            .map(|c| c.0.chars().count())
            .max()
            .unwrap_or(0);
        for (name, line, _) in &changes {
            let pad = " ".repeat(w - name.chars().count());
            let _ = writeln!(s, "  {name}{pad}  {line}");
        }
    }
    for (title, lines) in [
        ("Checks that flipped", &flips),
        ("Check margins that changed", &margins),
        ("Other changes", &other),
    ] {
        if !lines.is_empty() {
            let _ = writeln!(s, "\n{title}");
            for l in lines {
                let _ = writeln!(s, "{l}");
            }
        }
    }
    s
}

/// "   margin +142 h → -51.7 h", in the unit the check's dimension is shown in.
fn margin_change(r: &CellRun, d: &Diff) -> String {
    let Some((old, new, _)) = d.numbers else {
        return String::new();
    };
    let row = r
        .report
        .as_ref()
        .and_then(|rep| rep.checks.iter().find(|c| c.text == d.subject));
    match row {
        Some(c) => format!(
            "   margin {} → {}",
            units::format_difference(old, c.dim, 3),
            units::format_difference(new, c.dim, 3)
        ),
        None => String::new(),
    }
}

fn warnings_and_errors(runs: &[CellRun]) -> String {
    let mut s = String::new();
    let mut warnings = Vec::new();
    let mut errors = Vec::new();
    for r in runs {
        let Some(report) = &r.report else { continue };
        for w in &report.warnings {
            warnings.push(format!("  ! {}: {}: {}", r.label(), w.source, w.text));
        }
        for d in &report.diagnostics {
            let text = diagnostic::render(&report.source, d);
            let indented = text
                .lines()
                .map(|l| format!("    {l}"))
                .collect::<Vec<_>>()
                .join("\n");
            let line = format!("  {}:\n{indented}", r.label());
            if d.is_error() {
                errors.push(line);
            } else {
                warnings.push(line);
            }
        }
    }
    if !warnings.is_empty() {
        let _ = writeln!(s, "\nWarnings");
        for w in &warnings {
            let _ = writeln!(s, "{w}");
        }
    }
    if !errors.is_empty() {
        let _ = writeln!(s, "\nErrors");
        for e in &errors {
            let _ = writeln!(s, "{e}");
        }
    }
    s
}

/// A line for a run whose notebook carries a seal that no longer matches it.
fn seal_after_run(nb: &Notebook) -> Option<String> {
    let seal = nb.headroom()?.get("seal")?;
    let sources = seal.get("sources_sha256").and_then(Value::as_str);
    let results = seal.get("results_sha256").and_then(Value::as_str);
    let holds = sources == Some(digest::sources_sha256(nb).as_str())
        && results.is_some_and(|r| digest::results_sha256(nb).is_ok_and(|d| d == r));
    (!holds).then(|| {
        format!(
            "The seal {} no longer matches this notebook (its sources or results changed); \
             `headroom verify` will say so. Review it and seal it again.",
            seal_by(seal)
        )
    })
}

/// "by A. Reviewer on 2025-03-01T10:00:00Z".
fn seal_by(seal: &Value) -> String {
    let reviewer = seal.get("reviewer").and_then(Value::as_str).unwrap_or("?");
    let at = seal.get("sealed_at").and_then(Value::as_str).unwrap_or("?");
    format!("by {reviewer} on {at}")
}

fn print_out(text: &str) -> anyhow::Result<()> {
    let mut stdout = std::io::stdout().lock();
    match writeln!(stdout, "{text}").and_then(|()| stdout.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            Err(e).context("cannot write to stdout")
        }
        _ => Ok(()),
    }
}

// ---------------------------------------------------------------------------------------
// What a rerun finds

/// Everything a rerun of a notebook finds wrong with its stored outputs.
struct Findings {
    runs: Vec<CellRun>,
    /// (cell label, difference) for results that do not reproduce.
    diffs: Vec<(String, Diff)>,
    /// Cells that err on the rerun.
    errors: Vec<String>,
    /// Failing checks (cell label, check text).
    failing: Vec<(String, String)>,
}

fn rerun(nb: &Notebook) -> Findings {
    let runs = execute::run_cells(nb);
    let mut diffs = Vec::new();
    let mut errors = Vec::new();
    let mut failing = Vec::new();
    for r in &runs {
        let stored = nb
            .cells()
            .get(r.index)
            .map(CellResults::stored)
            .unwrap_or_default();
        for d in compare::diff_cell(&stored, &CellResults::recomputed(r)) {
            diffs.push((r.label(), d));
        }
        if let Some(report) = &r.report {
            if let Some(d) = report.diagnostics.iter().find(|d| d.is_error()) {
                errors.push(format!(
                    "{} has an error: {}: {}",
                    r.label(),
                    d.kind.code(),
                    d.message
                ));
            }
            for c in report.checks.iter().filter(|c| !c.passed) {
                failing.push((r.label(), c.text.clone()));
            }
        }
    }
    Findings {
        runs,
        diffs,
        errors,
        failing,
    }
}

fn diff_line(cell: &str, d: &Diff) -> String {
    match &d.kind {
        DiffKind::Flipped { now_passes } => format!(
            "{cell}: check `{}` flipped: it {} as stored ({}), {} now ({})",
            d.subject,
            if *now_passes { "fails" } else { "passes" },
            d.stored,
            if *now_passes { "passes" } else { "fails" },
            d.recomputed
        ),
        DiffKind::NotRun => format!(
            "{cell} has no stored outputs (it was not run); it shows {} now",
            d.recomputed
        ),
        DiffKind::Value => format!(
            "{cell}: `{}` does not reproduce: stored {}, recomputed {}",
            d.subject, d.stored, d.recomputed
        ),
        DiffKind::Check => format!(
            "{cell}: check `{}` does not reproduce: stored {}, recomputed {}",
            d.subject, d.stored, d.recomputed
        ),
        DiffKind::Warning | DiffKind::Sweep | DiffKind::Error => format!(
            "{cell}: {} does not reproduce: stored {}, recomputed {}",
            d.subject, d.stored, d.recomputed
        ),
    }
}

// ---------------------------------------------------------------------------------------
// seal

/// `headroom seal NOTEBOOK --reviewer NAME`: records the review in the notebook metadata.
/// Exit 1 when the notebook cannot be sealed (stale or failing outputs).
pub fn seal(args: &SealArgs) -> anyhow::Result<u8> {
    let path = &args.notebook;
    let reviewer = args.reviewer.trim();
    if reviewer.is_empty() {
        bail!("--reviewer needs a name");
    }
    let mut nb = Notebook::load(path)?;
    let found = rerun(&nb);
    let mut problems: Vec<String> = found.errors.clone();
    problems.extend(found.diffs.iter().map(|(c, d)| diff_line(c, d)));
    problems.extend(
        found
            .failing
            .iter()
            .map(|(c, t)| format!("{c}: check `{t}` fails")),
    );
    if found.runs.iter().all(|r| r.execution_count.is_none()) {
        problems.push("the notebook has no code to seal".into());
    }
    if !problems.is_empty() {
        let mut s = format!(
            "headroom: refusing to seal `{}`: its stored outputs do not hold",
            path.display()
        );
        for p in &problems {
            let _ = write!(s, "\n  {p}");
        }
        let _ = write!(
            s,
            "\nRun it again (`headroom run {} --in-place`), fix what fails, review, then seal.",
            path.display()
        );
        eprintln!("{s}");
        return Ok(EXIT_FAILED);
    }

    let keys = execute::cell_keys(&nb);
    let cells: Vec<Value> = nb
        .cells()
        .iter()
        .zip(digest::cell_sha256s(&nb))
        .enumerate()
        .map(|(i, (cell, sha))| {
            let id = ipynb::cell_id(cell)
                .map(str::to_string)
                .or_else(|| keys.get(i).cloned().flatten())
                .unwrap_or_else(|| format!("#{}", i + 1));
            json!({"id": id, "sha256": sha})
        })
        .collect();
    let sealed_at = chrono::DateTime::<chrono::Utc>::from(std::time::SystemTime::now())
        .to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let mut seal = serde_json::Map::new();
    seal.insert("reviewer".into(), reviewer.into());
    if let Some(note) = args
        .note
        .as_deref()
        .map(str::trim)
        .filter(|n| !n.is_empty())
    {
        seal.insert("note".into(), note.into());
    }
    seal.insert("sealed_at".into(), sealed_at.into());
    seal.insert("engine".into(), env!("CARGO_PKG_VERSION").into());
    seal.insert("scheme".into(), digest::SCHEME.into());
    seal.insert("sources_sha256".into(), digest::sources_sha256(&nb).into());
    seal.insert("results_sha256".into(), digest::results_sha256(&nb)?.into());
    seal.insert("cells".into(), Value::Array(cells));
    let previous = nb.headroom().and_then(|h| h.get("seal")).map(seal_by);
    let text = seal_summary(path, &Value::Object(seal.clone()));
    ipynb::insert(nb.headroom_mut(), "seal", Value::Object(seal));
    ipynb::write_atomic(path, nb.to_text()?.as_bytes())?;
    let mut s = text;
    if let Some(p) = previous {
        let _ = write!(s, "\n  (replaces the seal {p})");
    }
    print_out(&s)?;
    Ok(EXIT_OK)
}

fn seal_summary(path: &Path, seal: &Value) -> String {
    let f = |k: &str| seal.get(k).and_then(Value::as_str).unwrap_or("");
    format!(
        "Sealed {}\n  reviewer  {}\n  at        {}\n  engine    headroom {}\n  sources   sha256 {}\n  results   sha256 {}\n\
         A seal proves the notebook is unchanged since this review; it does not prove who reviewed it.",
        path.display(),
        f("reviewer"),
        f("sealed_at"),
        f("engine"),
        f("sources_sha256"),
        f("results_sha256")
    )
}

// ---------------------------------------------------------------------------------------
// verify

/// `headroom verify NOTEBOOK…`: reruns each notebook and checks its stored results and seal.
pub fn verify(args: &VerifyArgs) -> anyhow::Result<u8> {
    let n = args.notebooks.len();
    let bar = (n > 1 && std::io::stderr().is_terminal()).then(|| {
        let bar = indicatif::ProgressBar::with_draw_target(
            Some(n as u64),
            indicatif::ProgressDrawTarget::stderr(),
        );
        if let Ok(style) =
            indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} verifying {msg}")
        {
            bar.set_style(style);
        }
        bar
    });
    let mut held = 0usize;
    let mut unreadable = 0usize;
    for path in &args.notebooks {
        if let Some(b) = &bar {
            b.set_message(path.display().to_string());
        }
        let text = match verify_one(path) {
            Ok((true, text)) => {
                held += 1;
                text
            }
            Ok((false, text)) => text,
            Err(e) => {
                unreadable += 1;
                format!("{}: cannot verify: {e:#}", path.display())
            }
        };
        match &bar {
            Some(b) => b.suspend(|| print_out(&text)),
            None => print_out(&text),
        }?;
        if let Some(b) = &bar {
            b.inc(1);
        }
    }
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    if n > 1 {
        print_out(&format!("{held} of {n} notebooks hold"))?;
    }
    Ok(if unreadable > 0 {
        EXIT_ERROR
    } else if held < n {
        EXIT_FAILED
    } else {
        EXIT_OK
    })
}

/// (holds, report) for one notebook.
fn verify_one(path: &Path) -> anyhow::Result<(bool, String)> {
    let nb = Notebook::load(path)?;
    let found = rerun(&nb);
    let mut problems: Vec<String> = Vec::new();
    let mut notes: Vec<String> = Vec::new();

    let seal = nb.headroom().and_then(|h| h.get("seal"));
    let mut sealed = String::from("not sealed");
    if let Some(seal) = seal {
        sealed = format!("sealed {}", seal_by(seal));
        problems.extend(check_seal(&nb, seal, &mut notes)?);
    }
    problems.extend(found.errors.iter().cloned());
    // Flipped checks first: they are what a reader must see.
    let (flips, rest): (Vec<_>, Vec<_>) = found
        .diffs
        .iter()
        .partition(|(_, d)| matches!(d.kind, DiffKind::Flipped { .. }));
    problems.extend(flips.iter().chain(&rest).map(|(c, d)| diff_line(c, d)));
    for (c, t) in &found.failing {
        if !flips.iter().any(|(fc, d)| fc == c && &d.subject == t) {
            problems.push(format!("{c}: check `{t}` fails"));
        }
    }
    if let Some(Value::Object(o)) = nb.headroom().and_then(|h| h.get("overrides")) {
        let set: Vec<String> = o
            .iter()
            .map(|(k, v)| format!("{k} = {}", v.as_str().unwrap_or("?")))
            .collect();
        if !set.is_empty() {
            notes.push(format!("set from outside when run: {}", set.join(", ")));
        }
    }

    let values: usize = found
        .runs
        .iter()
        .filter_map(|r| r.report.as_ref())
        .map(|r| r.values.len() + r.shown.len())
        .sum();
    let checks: usize = found
        .runs
        .iter()
        .filter_map(|r| r.report.as_ref())
        .map(|r| r.checks.len())
        .sum();
    let holds = problems.is_empty();
    let mut s = if holds {
        format!(
            "{}: holds ({values} values and {checks} checks reproduce; {sealed})",
            path.display()
        )
    } else {
        format!("{}: DOES NOT HOLD ({sealed})", path.display())
    };
    for p in &problems {
        let _ = write!(s, "\n  ✗ {p}");
    }
    for n in &notes {
        let _ = write!(s, "\n  · {n}");
    }
    Ok((holds, s))
}

/// What no longer matches a seal.
fn check_seal(nb: &Notebook, seal: &Value, notes: &mut Vec<String>) -> anyhow::Result<Vec<String>> {
    let mut problems = Vec::new();
    let f = |k: &str| seal.get(k).and_then(Value::as_str);
    if f("scheme") != Some(digest::SCHEME) {
        problems.push(format!(
            "the seal uses the digest scheme `{}`, which this headroom ({}) does not know",
            f("scheme").unwrap_or("(none)"),
            digest::SCHEME
        ));
        return Ok(problems);
    }
    if f("sources_sha256") != Some(digest::sources_sha256(nb).as_str()) {
        problems.push(format!(
            "sources changed since the seal {}: {}",
            seal_by(seal),
            changed_cells(nb, seal)
        ));
    }
    if f("results_sha256") != Some(digest::results_sha256(nb)?.as_str()) {
        problems.push(
            "the stored results are not those sealed: the results digest does not match \
             (results were edited or rerun since the review)"
                .into(),
        );
    }
    if let Some(engine) = f("engine") {
        if engine != env!("CARGO_PKG_VERSION") {
            notes.push(format!(
                "sealed with headroom {engine}, verified with {}",
                env!("CARGO_PKG_VERSION")
            ));
        }
    }
    Ok(problems)
}

/// "cell 3 (`loads`) edited, cell 7 added" from the per-cell digests of the seal.
fn changed_cells(nb: &Notebook, seal: &Value) -> String {
    let Some(sealed) = seal.get("cells").and_then(Value::as_array) else {
        return "the seal lists no cells".into();
    };
    let keys = execute::cell_keys(nb);
    let now = digest::cell_sha256s(nb);
    let id_of = |i: usize, cell: &Value| {
        ipynb::cell_id(cell)
            .map(str::to_string)
            .or_else(|| keys.get(i).cloned().flatten())
            .unwrap_or_else(|| format!("#{}", i + 1))
    };
    let sealed_id = |v: &Value| {
        v.get("id")
            .and_then(Value::as_str)
            .unwrap_or("")
            .to_string()
    };
    let mut out = Vec::new();
    let mut current_ids = Vec::new();
    for (i, cell) in nb.cells().iter().enumerate() {
        let id = id_of(i, cell);
        let label = execute::label(i, &id);
        match sealed.iter().find(|s| sealed_id(s) == id) {
            Some(s)
                if s.get("sha256").and_then(Value::as_str) == now.get(i).map(String::as_str) => {}
            Some(_) => out.push(format!("{label} edited")),
            None => out.push(format!("{label} added")),
        }
        current_ids.push(id);
    }
    for s in sealed {
        let id = sealed_id(s);
        if !current_ids.contains(&id) {
            out.push(format!("cell `{id}` removed"));
        }
    }
    if out.is_empty() {
        "the cells were reordered".into()
    } else {
        out.join(", ")
    }
}

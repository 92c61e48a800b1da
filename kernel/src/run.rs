//! `headroom run`: runs a worksheet from the shell with the kernel's engine and rendering.
//!
//! Exit status: 0 when everything holds, 1 when a check fails, 2 on an error in the worksheet
//! or its `--set` overrides (errors of the command itself, such as an unreadable file, are
//! returned and also end with 2).

use crate::render;
use anyhow::{bail, Context};
use clap::Args;
use std::io::Write as _;
use std::path::{Path, PathBuf};
use worksheet_lang::{diagnostic, Interrupt, Worksheet};

#[derive(Args, Debug)]
pub struct RunArgs {
    /// The worksheet (.hrw) or notebook (.ipynb) to run.
    pub file: PathBuf,
    /// Override a `given`: NAME=VALUE in the language's literal syntax (`iload=250mA`).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Where to write the executed notebook.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
    /// Write the executed notebook over the input.
    #[arg(long = "in-place")]
    pub in_place: bool,
    /// Print the results data as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

const EXIT_OK: u8 = 0;
const EXIT_CHECK_FAILED: u8 = 1;
const EXIT_ERROR: u8 = 2;

pub fn run(args: &RunArgs) -> anyhow::Result<u8> {
    let path = &args.file;
    match path.extension().and_then(|e| e.to_str()) {
        Some("hrw") => run_worksheet(args),
        Some("ipynb") => crate::notebook::run(args),
        Some(ext) => bail!(
            "`{}`: headroom runs worksheets (.hrw) and notebooks (.ipynb), not .{ext} files",
            path.display()
        ),
        None => bail!(
            "`{}`: headroom runs worksheets (.hrw) and notebooks (.ipynb); \
             this file has no extension",
            path.display()
        ),
    }
}

fn run_worksheet(args: &RunArgs) -> anyhow::Result<u8> {
    let path = &args.file;
    if args.output.is_some() || args.in_place {
        bail!(
            "-o/--output and --in-place apply to notebooks (.ipynb); a worksheet run only prints"
        );
    }
    let source = read_source(path)?;

    let mut sheet = Worksheet::new();
    for set in &args.set {
        let Some((name, value)) = set.split_once('=') else {
            eprintln!("headroom: --set `{set}`: expected NAME=VALUE, e.g. --set iload=250mA");
            return Ok(EXIT_ERROR);
        };
        let (name, value) = (name.trim(), value.trim());
        if name.is_empty() || value.is_empty() {
            eprintln!("headroom: --set `{set}`: expected NAME=VALUE, e.g. --set iload=250mA");
            return Ok(EXIT_ERROR);
        }
        if let Err(d) = sheet.set_override(name, value) {
            eprintln!(
                "headroom: --set {name}={value}\n{}",
                diagnostic::render(value, &d)
            );
            return Ok(EXIT_ERROR);
        }
    }

    let execution = sheet.execute(Some("main"), &source, &Interrupt::new());
    let report = &execution.report;

    for d in &report.diagnostics {
        eprintln!(
            "{}: {}",
            path.display(),
            diagnostic::render(&report.source, d)
        );
    }

    let out = if args.json {
        let data = render::results_json(&[report]);
        // stdout is the data alone; the cautions still reach the person running it.
        for c in render::cautions(&[report]) {
            eprintln!("{c}");
        }
        serde_json::to_string_pretty(&data)?
    } else {
        let text = render::text(report);
        match (text.is_empty(), render::shown_listing(report)) {
            (false, Some(s)) => format!("{text}\n\nShown\n{}", indent(&s)),
            (true, Some(s)) => format!("Shown\n{}", indent(&s)),
            (false, None) => text,
            (true, None) => String::new(),
        }
    };
    if !out.is_empty() {
        print_stdout(&out)?;
    }

    let failed = report.failed_checks();
    if report.has_errors() {
        Ok(EXIT_ERROR)
    } else if failed > 0 {
        let total = report.checks.len();
        eprintln!("headroom: checks failed: {failed} of {total}");
        Ok(EXIT_CHECK_FAILED)
    } else {
        Ok(EXIT_OK)
    }
}

/// Writes the results; a reader that stopped early (`| head`) is not an error.
fn print_stdout(text: &str) -> anyhow::Result<()> {
    let mut stdout = std::io::stdout().lock();
    match writeln!(stdout, "{text}").and_then(|()| stdout.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            Err(e).context("cannot write the results to stdout")
        }
        _ => Ok(()),
    }
}

fn indent(s: &str) -> String {
    s.lines()
        .map(|l| format!("  {l}"))
        .collect::<Vec<_>>()
        .join("\n")
}

fn read_source(path: &Path) -> anyhow::Result<String> {
    let bytes = std::fs::read(path)
        .with_context(|| format!("cannot read worksheet `{}`", path.display()))?;
    let text = String::from_utf8(bytes).map_err(|e| {
        anyhow::anyhow!(
            "worksheet `{}` is not UTF-8 text (invalid byte at offset {}); save it as UTF-8",
            path.display(),
            e.utf8_error().valid_up_to()
        )
    })?;
    // Some editors start UTF-8 files with a byte-order mark; it is not part of the worksheet.
    Ok(match text.strip_prefix('\u{feff}') {
        Some(rest) => rest.to_string(),
        None => text,
    })
}

//! `headroom run` on worksheets written to a scratch directory, through the real binary.
//!
//! Tests named `evaluated_*` need the evaluator: their expected values are worked out by hand
//! from the worksheet (Ohm's and Joule's laws, °C = K − 273.15).

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn headroom(args: &[&str]) -> Run {
    let out: Output = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(args)
        .env_remove("RUST_LOG")
        .output()
        .expect("the headroom binary starts");
    Run {
        code: out.status.code().expect("exited, not killed"),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

fn write(dir: &Path, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, contents).expect("write scratch file");
    path
}

fn run_file(path: &Path, extra: &[&str]) -> Run {
    let p = path.to_str().expect("UTF-8 temp path");
    let mut args = vec!["run", p];
    args.extend_from_slice(extra);
    headroom(&args)
}

fn json_of(r: &Run) -> Value {
    serde_json::from_str(&r.stdout).unwrap_or_else(|e| panic!("{e}: {}", r.stdout))
}

fn value<'a>(data: &'a Value, name: &str) -> &'a Value {
    data["values"]
        .as_array()
        .and_then(|vs| vs.iter().find(|v| v["name"] == name))
        .unwrap_or_else(|| panic!("no value {name} in {data}"))
}

fn close(a: &Value, b: f64) -> bool {
    a.as_f64()
        .is_some_and(|a| (a - b).abs() <= 1e-9 * b.abs().max(1.0))
}

const POWER: &str = "given v = 12 V\ngiven i = 2 A\np = v * i\n";

// ---- the command itself ----

#[test]
fn missing_file_names_the_path() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("absent.hrw");
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("absent.hrw"), "{}", r.stderr);
    assert!(r.stderr.contains("cannot read"), "{}", r.stderr);
}

#[test]
fn non_utf8_file_is_refused_clearly() {
    let dir = tempfile::tempdir().expect("tempdir");
    // "v = 12 V" with a Latin-1 degree sign (0xB0) after it: not UTF-8.
    let path = write(dir.path(), "latin1.hrw", b"v = 12 V\nt = 20 \xb0C\n");
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("latin1.hrw"), "{}", r.stderr);
    assert!(r.stderr.contains("not UTF-8"), "{}", r.stderr);
    // "v = 12 V\n" is 9 bytes and "t = 20 " 7 more, so the 0xB0 is at offset 16.
    assert!(r.stderr.contains("offset 16"), "{}", r.stderr);
}

#[test]
fn a_file_that_is_no_notebook_is_refused_by_name() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "sheet.ipynb", "{}");
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("sheet.ipynb") && r.stderr.contains("not a notebook"),
        "{}",
        r.stderr
    );
    assert!(!dir.path().join("sheet.run.ipynb").exists());
}

#[test]
fn other_extensions_are_refused() {
    let dir = tempfile::tempdir().expect("tempdir");
    for name in ["sheet.txt", "sheet"] {
        let path = write(dir.path(), name, POWER);
        let r = run_file(&path, &[]);
        assert_eq!(r.code, 2, "{name}");
        assert!(r.stderr.contains(".hrw"), "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}: {}", r.stdout);
    }
}

#[test]
fn malformed_set_is_an_error() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "power.hrw", POWER);
    for bad in ["v", "=12V", "v=", " = "] {
        let r = run_file(&path, &["--set", bad]);
        assert_eq!(r.code, 2, "--set {bad:?}");
        assert!(r.stderr.contains("NAME=VALUE"), "{bad:?}: {}", r.stderr);
    }
}

#[test]
fn notebook_output_flags_do_not_apply_to_worksheets() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "power.hrw", POWER);
    let r = run_file(&path, &["--in-place"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("--in-place"), "{}", r.stderr);
}

#[test]
fn comment_only_worksheet_prints_nothing_and_passes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "empty.hrw", "# nothing yet\n\n");
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(r.stdout, "");
}

#[test]
fn comment_only_worksheet_as_json() {
    let dir = tempfile::tempdir().expect("tempdir");
    // A byte-order mark in front, as some editors write it.
    let path = write(dir.path(), "empty.hrw", "\u{feff}# nothing yet\n");
    let r = run_file(&path, &["--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let data = json_of(&r);
    assert_eq!(data["version"], 1);
    for k in ["values", "checks", "warnings", "sweeps"] {
        assert_eq!(data[k], Value::Array(vec![]), "{k}");
    }
}

// ---- with the evaluator ----

#[test]
fn evaluated_power_is_shown_with_its_unit() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "power.hrw", POWER);
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    // P = V·I = 12 V × 2 A = 24 W, three significant digits.
    assert!(r.stdout.contains("24.0 W"), "{}", r.stdout);
    assert!(r.stdout.contains("Inputs") && r.stdout.contains("Values"));
    assert!(!r.stdout.contains("Caution"), "{}", r.stdout);
}

#[test]
fn evaluated_failing_check_exits_1_with_its_margin() {
    let dir = tempfile::tempdir().expect("tempdir");
    let src = format!("{POWER}check p <= 10 W \"adapter budget\"\n");
    let path = write(dir.path(), "power.hrw", src);
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 1, "{}\n{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("FAIL"), "{}", r.stdout);
    // Margin = 10 W − 24 W = −14 W.
    assert!(r.stdout.contains("-14.0 W"), "{}", r.stdout);
    assert!(r.stderr.contains("checks failed: 1 of 1"), "{}", r.stderr);
}

#[test]
fn evaluated_set_overrides_a_given() {
    let dir = tempfile::tempdir().expect("tempdir");
    let src = format!("{POWER}check p <= 10 W\n");
    let path = write(dir.path(), "power.hrw", src);
    // P = 4 V × 2 A = 8 W, under the 10 W limit by 2 W.
    let r = run_file(&path, &["--set", "v=4V"]);
    assert_eq!(r.code, 0, "{}\n{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("8.00 W"), "{}", r.stdout);
    assert!(r.stdout.contains("+2.00 W"), "{}", r.stdout);
    assert!(r.stdout.contains("pass"), "{}", r.stdout);
}

#[test]
fn evaluated_json_numbers_are_si() {
    let dir = tempfile::tempdir().expect("tempdir");
    let src = "given v = 12 V ± 10 %\ngiven i = 2 A\np = v * i\ncheck p <= 30 W\n";
    let path = write(dir.path(), "power.hrw", src);
    let r = run_file(&path, &["--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let data = json_of(&r);
    let i = value(&data, "i");
    assert!(close(&i["si"], 2.0) && i["unit"] == "A" && i["given"] == true);
    assert!(i.get("min").is_none(), "a certain value has no bounds: {i}");
    // 12 V ± 10 % is 10.8 V … 13.2 V, so p is 21.6 W … 26.4 W around 24 W.
    let p = value(&data, "p");
    assert!(close(&p["si"], 24.0), "{p}");
    assert_eq!(p["unit"], "W");
    assert_eq!(p["absolute"], false);
    assert!(close(&p["min"], 21.6) && close(&p["max"], 26.4), "{p}");
    assert_eq!(p["text"], "24.0 W");
    let c = &data["checks"][0];
    assert_eq!(c["passed"], true);
    // Deciding corner: 26.4 W against 30 W, margin 3.6 W.
    assert!(close(&c["worst"], 26.4) && close(&c["limit"], 30.0), "{c}");
    assert!(close(&c["margin"], 3.6), "{c}");
    assert_eq!(c["unit"], "W");
}

#[test]
fn evaluated_hot_results_carry_the_caution() {
    let dir = tempfile::tempdir().expect("tempdir");
    // 50 °C + 1.5 W × 20 K/W = 80 °C = 353.15 K.
    let src = "given ta = 50 °C\np = 1.5 W\ntj = ta + p * 20 K/W\n";
    let path = write(dir.path(), "heat.hrw", src);
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("80.0 °C"), "{}", r.stdout);
    assert!(r
        .stdout
        .contains("surfaces above about 60 °C burn on touch"));

    let j = run_file(&path, &["--json"]);
    let data = json_of(&j);
    let tj = value(&data, "tj");
    assert!(close(&tj["si"], 353.15), "{tj}");
    assert_eq!(tj["unit"], "K");
    assert_eq!(tj["absolute"], true);
    // stdout stays pure data; the caution goes to stderr.
    assert!(j.stderr.contains("burn on touch"), "{}", j.stderr);
}

#[test]
fn evaluated_cool_results_have_no_caution() {
    let dir = tempfile::tempdir().expect("tempdir");
    // 25 °C + 0.5 W × 20 K/W = 35 °C.
    let src = "given ta = 25 °C\ntj = ta + 0.5 W * 20 K/W\n";
    let path = write(dir.path(), "cool.hrw", src);
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("35.0 °C"), "{}", r.stdout);
    assert!(!r.stdout.contains("Caution"), "{}", r.stdout);
}

#[test]
fn evaluated_error_exits_2_with_the_excerpt() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "bad.hrw", "v = 12 V\nx = 12 V + 3 A\n");
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 2, "{}\n{}", r.stdout, r.stderr);
    assert!(r.stderr.contains("bad.hrw"), "{}", r.stderr);
    assert!(r.stderr.contains("DimensionMismatch"), "{}", r.stderr);
    assert!(r.stderr.contains("line 2"), "{}", r.stderr);
    assert!(r.stderr.contains("2 | x = 12 V + 3 A"), "{}", r.stderr);
    assert!(r.stderr.contains('^'), "{}", r.stderr);
}

#[test]
fn evaluated_bare_expression_is_shown() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "shown.hrw", "given v = 12 V\nv / 2\n");
    let r = run_file(&path, &[]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    // 12 V / 2 = 6 V.
    assert!(r.stdout.contains("Shown\n  v / 2  6.00 V"), "{}", r.stdout);
}

/// Every example worksheet in notebooks/ runs without an error (a failing check would be a
/// finding of the scenario, but none of the examples has one).
#[test]
fn every_example_worksheet_runs_clean() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../notebooks");
    let mut seen = 0;
    for entry in std::fs::read_dir(&dir).expect("notebooks/") {
        let path = entry.expect("entry").path();
        if path.extension().and_then(|e| e.to_str()) != Some("hrw") {
            continue;
        }
        seen += 1;
        let r = run_file(&path, &[]);
        assert_eq!(r.code, 0, "{}: {}", path.display(), r.stderr);
        assert!(
            !r.stderr.contains("error"),
            "{}: {}",
            path.display(),
            r.stderr
        );
        assert!(r.stdout.contains("Checks"), "{}", path.display());
    }
    assert!(seen >= 2, "the example worksheets are there");
}

//! `headroom run`, `seal` and `verify` on notebooks, through the real binary, in scratch
//! directories. Expected values are worked out by hand from each notebook (Ohm's and Joule's
//! laws; the power a linear regulator drops is (vin − vout) · iload).

use serde_json::{json, Value};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use std::process::Command;

const RESULTS: &str = "application/vnd.headroom.results+json";

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

impl Run {
    fn all(&self) -> String {
        format!("{}\n{}", self.stdout, self.stderr)
    }
}

fn headroom(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_headroom"))
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

fn p(path: &Path) -> &str {
    path.to_str().expect("UTF-8 temp path")
}

fn sha256(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn read_json(path: &Path) -> Value {
    let text = std::fs::read_to_string(path).expect("read notebook");
    serde_json::from_str(&text).expect("notebook JSON")
}

fn write_json(path: &Path, v: &Value) {
    std::fs::write(path, serde_json::to_string_pretty(v).expect("json")).expect("write");
}

fn notebook(cells: Value) -> Value {
    json!({
        "cells": cells,
        "metadata": {
            "kernelspec": {"display_name": "Headroom", "language": "headroom", "name": "headroom"},
            "language_info": {"file_extension": ".hrw", "mimetype": "text/x-headroom",
                "name": "headroom"}
        },
        "nbformat": 4,
        "nbformat_minor": 5
    })
}

fn code(id: &str, source: Value) -> Value {
    json!({"cell_type": "code", "execution_count": null, "id": id, "metadata": {},
        "outputs": [], "source": source})
}

fn markdown(id: &str, source: &str) -> Value {
    json!({"cell_type": "markdown", "id": id, "metadata": {}, "source": source})
}

/// A 5 V linear rail from 12 V: the regulator drops (12 V − 5 V) · 100 mA = 0.7 W, under
/// its 1 W limit; at 200 mA it drops 1.4 W and the check fails.
fn rail() -> Value {
    notebook(json!([
        markdown("intro", "# A 5 V rail\nThe loss of a linear regulator."),
        code(
            "inputs",
            json!([
                "given vin = 12 V              \"adapter\"\n",
                "given iload = 100 mA   \"logic board\"   # measured on the bench\n"
            ])
        ),
        code(
            "loss",
            json!("loss = (vin - 5 V) * iload   \"in the regulator\"\ncheck loss <= 1 W   \"package limit\"\n")
        ),
    ]))
}

fn scratch(nb: &Value, name: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join(name);
    write_json(&path, nb);
    (dir, path)
}

/// The results data of a code cell's result block.
fn block(nb: &Value, cell: usize) -> &Value {
    nb["cells"][cell]["outputs"]
        .as_array()
        .and_then(|o| o.iter().find(|o| o["output_type"] == "display_data"))
        .map(|o| &o["data"][RESULTS])
        .unwrap_or_else(|| panic!("no result block in cell {cell}: {}", nb["cells"][cell]))
}

fn si(data: &Value, name: &str) -> f64 {
    data["values"]
        .as_array()
        .and_then(|vs| vs.iter().find(|v| v["name"] == name))
        .and_then(|v| v["si"].as_f64())
        .unwrap_or_else(|| panic!("no value {name} in {data}"))
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * b.abs().max(1.0)
}

/// Runs the notebook in place and returns its path (outputs stored).
fn ran(nb: &Value, name: &str) -> (tempfile::TempDir, PathBuf) {
    let (dir, path) = scratch(nb, name);
    let r = headroom(&["run", p(&path), "--in-place"]);
    assert_eq!(r.code, 0, "{}", r.all());
    (dir, path)
}

fn sealed(nb: &Value) -> (tempfile::TempDir, PathBuf) {
    let (dir, path) = ran(nb, "rail.ipynb");
    let r = headroom(&["seal", p(&path), "--reviewer", "R. Checker"]);
    assert_eq!(r.code, 0, "{}", r.all());
    (dir, path)
}

// ---- run ----

#[test]
fn run_never_writes_the_input_without_in_place() {
    let (dir, path) = scratch(&rail(), "rail.ipynb");
    let before = sha256(&std::fs::read(&path).expect("read"));
    let r = headroom(&["run", p(&path)]);
    assert_eq!(r.code, 0, "{}", r.all());
    assert_eq!(sha256(&std::fs::read(&path).expect("read")), before);
    let out = dir.path().join("rail.run.ipynb");
    assert!(out.exists(), "{}", r.all());
    assert!(r.stdout.contains("rail.run.ipynb"), "{}", r.stdout);

    // -o naming the input itself is refused, and the input stays as it was.
    let r = headroom(&["run", p(&path), "-o", p(&path)]);
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(r.stderr.contains("--in-place"), "{}", r.stderr);
    assert_eq!(sha256(&std::fs::read(&path).expect("read")), before);

    // --in-place does write it.
    let r = headroom(&["run", p(&path), "--in-place"]);
    assert_eq!(r.code, 0, "{}", r.all());
    assert_ne!(sha256(&std::fs::read(&path).expect("read")), before);
}

#[test]
fn run_stores_the_outputs_the_kernel_would_send() {
    let mut nb = rail();
    let cells = nb["cells"].as_array_mut().expect("cells");
    cells.push(code("blank", json!("  \n")));
    cells.push(code("shown", json!("loss as mW\n")));
    let (dir, path) = scratch(&nb, "rail.ipynb");
    let r = headroom(&["run", p(&path)]);
    assert_eq!(r.code, 0, "{}", r.all());
    let out = read_json(&dir.path().join("rail.run.ipynb"));
    // (12 V − 5 V) · 0.1 A = 0.7 W.
    assert!(close(si(block(&out, 2), "loss"), 0.7), "{}", block(&out, 2));
    assert_eq!(block(&out, 2)["checks"][0]["passed"], true);
    // Execution counts number the cells run; a blank cell is not run.
    let counts: Vec<&Value> = (1..5)
        .map(|i| &out["cells"][i]["execution_count"])
        .collect();
    assert_eq!(counts, [&json!(1), &json!(2), &json!(null), &json!(3)]);
    assert_eq!(out["cells"][3]["outputs"], json!([]));
    // A bare expression: its value is the execute_result, 700 mW, after nothing else.
    let outputs = out["cells"][4]["outputs"].as_array().expect("outputs");
    assert_eq!(outputs.len(), 1, "{outputs:?}");
    assert_eq!(outputs[0]["output_type"], "execute_result");
    assert_eq!(outputs[0]["execution_count"], 3);
    let text: String = outputs[0]["data"]["text/plain"]
        .as_array()
        .expect("lines")
        .iter()
        .filter_map(Value::as_str)
        .collect();
    assert!(text.starts_with("700 mW"), "{text}");
    // Display data in a file has no transient (nbformat has no such field).
    assert!(out["cells"][1]["outputs"][0].get("transient").is_none());
}

#[test]
fn unknown_metadata_attachments_and_markdown_survive() {
    let mut nb = rail();
    nb["metadata"]["lab_notes"] = json!({"bench": 3, "order": ["z", "a"]});
    nb["metadata"]["kernelspec"]["env"] = json!({"X": "1"});
    let cells = nb["cells"].as_array_mut().expect("cells");
    cells[0]["attachments"] = json!({"board.png": {"image/png": "iVBORw0KGgoAAAANSUhEUg=="}});
    cells[0]["metadata"] = json!({"tags": ["keep"], "editable": false});
    cells[1]["metadata"] = json!({"collapsed": true, "custom": {"z": 1, "a": [1.5, null]}});
    cells.push(
        json!({"cell_type": "raw", "id": "raw1", "metadata": {"format": "text/x-rst"},
        "source": ["raw text\n", "kept"]}),
    );
    let (dir, path) = scratch(&nb, "rail.ipynb");
    let r = headroom(&["run", p(&path)]);
    assert_eq!(r.code, 0, "{}", r.all());
    let out = read_json(&dir.path().join("rail.run.ipynb"));
    assert_eq!(out["metadata"]["lab_notes"], nb["metadata"]["lab_notes"]);
    assert_eq!(out["metadata"]["kernelspec"], nb["metadata"]["kernelspec"]);
    assert_eq!(out["nbformat_minor"], 5);
    for i in [0, 3] {
        assert_eq!(out["cells"][i], nb["cells"][i], "cell {i}");
    }
    for i in [1, 2] {
        let (a, b) = (&out["cells"][i], &nb["cells"][i]);
        for key in ["id", "metadata", "source", "cell_type"] {
            assert_eq!(a[key], b[key], "cell {i} {key}");
        }
    }
    // Key order of the unknown metadata is kept too (the file is diffable).
    let text = std::fs::read_to_string(dir.path().join("rail.run.ipynb")).expect("read");
    let (z, a) = (
        text.find("\"z\": 1").expect("z"),
        text.find("\"a\": [").expect("a"),
    );
    assert!(z < a, "the order of `custom` changed");
}

#[test]
fn a_set_that_flips_a_check_fails_says_so_and_rewrites_the_given() {
    let (dir, path) = ran(&rail(), "rail.ipynb");
    let out = dir.path().join("heavy.ipynb");
    let r = headroom(&["run", p(&path), "--set", "iload=200mA", "-o", p(&out)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(r.stdout.contains("now fails"), "{}", r.stdout);
    assert!(r.stdout.contains("loss <= 1 W"), "{}", r.stdout);
    // Old → new from the stored outputs: 700 mW before, (12 − 5) V · 0.2 A = 1.40 W now.
    assert!(r.stdout.contains("700 mW → 1.40 W"), "{}", r.stdout);
    assert!(r.stdout.contains("Checks failed: 1 of 1"), "{}", r.stdout);
    let nb = read_json(&out);
    assert_eq!(
        nb["cells"][1]["source"][1],
        "given iload = 200mA   \"logic board\"   # measured on the bench\n"
    );
    assert_eq!(
        nb["metadata"]["headroom"]["overrides"],
        json!({"iload": "200mA"})
    );
    assert!(close(si(block(&nb, 2), "loss"), 1.4));
    assert_eq!(block(&nb, 2)["checks"][0]["passed"], false);
    // The source now carries the value: verify needs no flags to reproduce the run, and
    // reports the failing check.
    let r = headroom(&["verify", p(&out)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(
        r.stdout.contains("check `loss <= 1 W` fails"),
        "{}",
        r.stdout
    );
    assert!(!r.stdout.contains("does not reproduce"), "{}", r.stdout);
}

#[test]
fn a_set_of_a_derived_value_or_the_wrong_kind_is_refused_and_nothing_written() {
    let (dir, path) = scratch(&rail(), "rail.ipynb");
    let r = headroom(&["run", p(&path), "--set", "loss=1 W"]);
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(r.stderr.contains("derived value"), "{}", r.stderr);
    let r = headroom(&["run", p(&path), "--set", "iload=3 V"]);
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(
        r.stderr.contains("a current") && r.stderr.contains("a voltage"),
        "{}",
        r.stderr
    );
    assert!(!dir.path().join("rail.run.ipynb").exists());
}

#[test]
fn a_cell_that_errs_exits_2_and_stores_the_error() {
    let nb = notebook(json!([code("bad", json!("given v = 12 V\nx = v + 3 A\n"))]));
    let (dir, path) = scratch(&nb, "bad.ipynb");
    let r = headroom(&["run", p(&path)]);
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(r.stdout.contains("DimensionMismatch"), "{}", r.stdout);
    let out = read_json(&dir.path().join("bad.run.ipynb"));
    let outputs = out["cells"][0]["outputs"].as_array().expect("outputs");
    assert_eq!(outputs.len(), 1);
    assert_eq!(outputs[0]["output_type"], "error");
    assert_eq!(outputs[0]["ename"], "DimensionMismatch");
}

#[test]
fn a_notebook_of_another_kernel_is_refused() {
    let mut nb = rail();
    nb["metadata"]["kernelspec"] =
        json!({"display_name": "Python 3", "language": "python", "name": "python3"});
    let (dir, path) = scratch(&nb, "py.ipynb");
    let r = headroom(&["run", p(&path)]);
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(
        r.stderr.contains("Python 3") && r.stderr.contains("not for Headroom"),
        "{}",
        r.stderr
    );
    assert!(!dir.path().join("py.run.ipynb").exists());
}

#[test]
fn json_prints_the_results_data() {
    let (_dir, path) = scratch(&rail(), "rail.ipynb");
    let r = headroom(&["run", p(&path), "--json"]);
    assert_eq!(r.code, 0, "{}", r.all());
    let data: Value = serde_json::from_str(&r.stdout).expect("JSON on stdout");
    assert!(close(si(&data, "loss"), 0.7));
    assert!(close(si(&data, "iload"), 0.1));
}

#[cfg(unix)]
#[test]
fn atomic_write_leaves_no_partial_file_in_a_read_only_directory() {
    use std::os::unix::fs::PermissionsExt as _;
    let mode = |m: u32| std::fs::Permissions::from_mode(m);
    let (dir, path) = scratch(&rail(), "rail.ipynb");
    let ro = dir.path().join("archive");
    std::fs::create_dir(&ro).expect("mkdir");
    std::fs::set_permissions(&ro, mode(0o555)).expect("chmod");
    // Root is not stopped by permission bits. A directory path that runs through a regular
    // file cannot be written by anyone, so as root the test writes there instead.
    let probe = ro.join("probe");
    let enforced = std::fs::write(&probe, b"x").is_err();
    let _ = std::fs::remove_file(&probe);
    let target = if enforced {
        ro.join("rail.ipynb")
    } else {
        dir.path().join("rail.ipynb").join("out.ipynb")
    };
    let r = headroom(&["run", p(&path), "-o", p(&target)]);
    std::fs::set_permissions(&ro, mode(0o755)).expect("chmod back");
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(r.stderr.contains("cannot write"), "{}", r.stderr);
    assert!(r.stderr.contains("nothing was written"), "{}", r.stderr);
    assert!(!target.exists());
    let listing = |d: &Path| -> Vec<String> {
        let mut names: Vec<String> = std::fs::read_dir(d)
            .expect("list")
            .filter_map(Result::ok)
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    };
    assert!(listing(&ro).is_empty(), "left behind: {:?}", listing(&ro));
    assert_eq!(listing(dir.path()), ["archive", "rail.ipynb"]);
}

#[test]
fn a_failed_rename_removes_the_temporary_file() {
    // The target is a non-empty directory: the temporary file is written, the rename fails.
    let (dir, path) = scratch(&rail(), "rail.ipynb");
    let target = dir.path().join("taken.ipynb");
    std::fs::create_dir(&target).expect("mkdir");
    std::fs::write(target.join("inside"), b"x").expect("write");
    let r = headroom(&["run", p(&path), "-o", p(&target)]);
    assert_eq!(r.code, 2, "{}", r.all());
    assert!(r.stderr.contains("nothing was written"), "{}", r.stderr);
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .expect("list")
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["rail.ipynb", "taken.ipynb"]);
}

// ---- seal ----

#[test]
fn seal_records_the_review_with_digests_anyone_can_recompute() {
    let (_dir, path) = sealed(&rail());
    let nb = read_json(&path);
    let seal = &nb["metadata"]["headroom"]["seal"];
    assert_eq!(seal["reviewer"], "R. Checker");
    assert_eq!(seal["engine"], env!("CARGO_PKG_VERSION"));
    let at = seal["sealed_at"].as_str().expect("time");
    // RFC 3339 in UTC: 2025-03-01T10:00:00Z.
    assert_eq!(at.len(), 20, "{at}");
    assert!(at.ends_with('Z') && at.as_bytes()[10] == b'T', "{at}");
    // The canonical source text, built here by hand from the definition: per cell its type,
    // its byte length and its source, each followed by a newline.
    let mut canonical = String::new();
    for cell in nb["cells"].as_array().expect("cells") {
        let src: String = match &cell["source"] {
            Value::String(s) => s.clone(),
            Value::Array(l) => l.iter().filter_map(Value::as_str).collect(),
            _ => String::new(),
        };
        canonical.push_str(&format!(
            "{}\n{}\n{src}\n",
            cell["cell_type"].as_str().expect("t"),
            src.len()
        ));
    }
    assert_eq!(seal["sources_sha256"], sha256(canonical.as_bytes()));
    assert_eq!(seal["cells"].as_array().map(Vec::len), Some(3));
}

#[test]
fn seal_refuses_a_notebook_whose_outputs_are_stale() {
    let (_dir, path) = scratch(&rail(), "rail.ipynb");
    let before = sha256(&std::fs::read(&path).expect("read"));
    let r = headroom(&["seal", p(&path), "--reviewer", "R. Checker"]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(r.stderr.contains("refusing to seal"), "{}", r.stderr);
    assert!(r.stderr.contains("not run"), "{}", r.stderr);
    assert_eq!(sha256(&std::fs::read(&path).expect("read")), before);
}

#[test]
fn seal_refuses_a_notebook_with_an_error() {
    let nb = notebook(json!([code("bad", json!("x = 12 V + 3 A\n"))]));
    let (_dir, path) = scratch(&nb, "bad.ipynb");
    assert_eq!(headroom(&["run", p(&path), "--in-place"]).code, 2);
    let r = headroom(&["seal", p(&path), "--reviewer", "R. Checker"]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(r.stderr.contains("has an error"), "{}", r.stderr);
}

// ---- verify ----

#[test]
fn verify_passes_on_a_sealed_notebook() {
    let (_dir, path) = sealed(&rail());
    let r = headroom(&["verify", p(&path)]);
    assert_eq!(r.code, 0, "{}", r.all());
    assert!(r.stdout.contains("holds"), "{}", r.stdout);
    assert!(r.stdout.contains("sealed by R. Checker"), "{}", r.stdout);
}

#[test]
fn verify_fails_on_an_edited_code_cell() {
    let (_dir, path) = sealed(&rail());
    let mut nb = read_json(&path);
    nb["cells"][2]["source"] = json!("loss = (vin - 5 V) * iload   \"in the regulator\"\ncheck loss <= 2 W   \"package limit\"\n");
    write_json(&path, &nb);
    let r = headroom(&["verify", p(&path)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(r.stdout.contains("DOES NOT HOLD"), "{}", r.stdout);
    assert!(
        r.stdout
            .contains("sources changed since the seal by R. Checker"),
        "{}",
        r.stdout
    );
    assert!(r.stdout.contains("cell 3 (`loss`) edited"), "{}", r.stdout);
}

#[test]
fn verify_fails_on_an_edited_markdown_cell_of_a_sealed_notebook() {
    let (_dir, path) = sealed(&rail());
    let mut nb = read_json(&path);
    nb["cells"][0]["source"] = json!("# A 5 V rail\nReviewed and fine.");
    write_json(&path, &nb);
    let r = headroom(&["verify", p(&path)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(r.stdout.contains("cell 1 (`intro`) edited"), "{}", r.stdout);
}

#[test]
fn verify_fails_on_an_edited_stored_result_and_shows_both() {
    let (_dir, path) = ran(&rail(), "rail.ipynb");
    let mut nb = read_json(&path);
    let outputs = nb["cells"][2]["outputs"].as_array_mut().expect("outputs");
    let data = &mut outputs[0]["data"][RESULTS];
    data["values"][0]["si"] = json!(0.5);
    write_json(&path, &nb);
    let r = headroom(&["verify", p(&path)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(
        r.stdout.contains("`loss` does not reproduce"),
        "{}",
        r.stdout
    );
    // Stored 0.5 W as edited; recomputed (12 − 5) V · 0.1 A = 0.7 W.
    assert!(r.stdout.contains("si 0.5 W"), "{}", r.stdout);
    assert!(r.stdout.contains("si 0.7"), "{}", r.stdout);
}

#[test]
fn verify_fails_on_a_seal_digest_that_does_not_match() {
    let (_dir, path) = sealed(&rail());
    let mut nb = read_json(&path);
    nb["metadata"]["headroom"]["seal"]["results_sha256"] = json!(sha256(b"other results"));
    write_json(&path, &nb);
    let r = headroom(&["verify", p(&path)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(
        r.stdout.contains("the results digest does not match"),
        "{}",
        r.stdout
    );
    // The results themselves still reproduce; only the seal is wrong.
    assert!(!r.stdout.contains("does not reproduce"), "{}", r.stdout);
}

#[test]
fn verify_reports_a_check_that_flipped() {
    let (_dir, path) = ran(&rail(), "rail.ipynb");
    let mut nb = read_json(&path);
    // The stored check says it fails; the rerun says it passes.
    nb["cells"][2]["outputs"][0]["data"][RESULTS]["checks"][0]["passed"] = json!(false);
    write_json(&path, &nb);
    let r = headroom(&["verify", p(&path)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(
        r.stdout.contains("check `loss <= 1 W` flipped"),
        "{}",
        r.stdout
    );
}

#[test]
fn verify_passes_on_the_stored_example_notebooks() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../notebooks");
    let mut paths: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("notebooks/")
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|e| e == "ipynb"))
        .collect();
    paths.sort();
    assert!(paths.len() >= 3, "{paths:?}");
    let args: Vec<&str> = std::iter::once("verify")
        .chain(paths.iter().map(|p| p.to_str().expect("UTF-8 path")))
        .collect();
    let r = headroom(&args);
    assert_eq!(r.code, 0, "{}", r.all());
    assert!(
        r.stdout
            .contains(&format!("{n} of {n} notebooks hold", n = paths.len())),
        "{}",
        r.stdout
    );
}

#[test]
fn verify_of_several_notebooks_fails_when_one_fails_and_names_it() {
    let (_d1, good) = sealed(&rail());
    let (_d2, bad) = scratch(&rail(), "never-run.ipynb");
    let r = headroom(&["verify", p(&good), p(&bad)]);
    assert_eq!(r.code, 1, "{}", r.all());
    assert!(r.stdout.contains("1 of 2 notebooks hold"), "{}", r.stdout);
    assert!(
        r.stdout.contains("never-run.ipynb: DOES NOT HOLD"),
        "{}",
        r.stdout
    );
}

//! The notebook file (nbformat 4) as a lossless JSON tree.
//!
//! A notebook is kept as the `serde_json::Value` it was read as (with `preserve_order`), not as
//! typed structs: every cell, attachment, cell id and metadata field that headroom does not
//! own survives a run unchanged, whatever nbformat minor version or front end wrote it.
//! Headroom owns only the `outputs` and `execution_count` of code cells, the source line of a
//! `given` set with `--set`, and `metadata.headroom`.

use anyhow::{bail, Context};
use serde::Serialize;
use serde_json::{json, Map, Value};
use std::io::Write as _;
use std::path::Path;

/// The kernel name and language every Headroom notebook carries.
pub(crate) const KERNEL_NAME: &str = "headroom";

#[derive(Debug, Clone)]
pub(crate) struct Notebook {
    root: Map<String, Value>,
}

impl Notebook {
    /// Reads and checks a notebook: nbformat 4, well-formed cells, a Headroom kernel.
    pub fn load(path: &Path) -> anyhow::Result<Notebook> {
        let bytes =
            std::fs::read(path).with_context(|| format!("cannot read `{}`", path.display()))?;
        let text = String::from_utf8(bytes).map_err(|e| {
            anyhow::anyhow!(
                "`{}` is not UTF-8 text (invalid byte at offset {}); a notebook is UTF-8 JSON",
                path.display(),
                e.utf8_error().valid_up_to()
            )
        })?;
        let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
        Notebook::parse(text).with_context(|| format!("`{}`", path.display()))
    }

    pub fn parse(text: &str) -> anyhow::Result<Notebook> {
        let value: Value = serde_json::from_str(text).map_err(|e| {
            anyhow::anyhow!(
                "not a notebook: the JSON does not parse at line {}, column {}: {e}",
                e.line(),
                e.column()
            )
        })?;
        let Value::Object(root) = value else {
            bail!("not a notebook: the file holds JSON, but not an object with `cells`");
        };
        match root.get("nbformat").and_then(Value::as_u64) {
            Some(4) => {}
            Some(n) => bail!(
                "this is an nbformat {n} notebook; headroom reads nbformat 4 \
                 (open and save it in a current Jupyter to convert it)"
            ),
            None => bail!("not a notebook: it has no `nbformat` version"),
        }
        let Some(cells) = root.get("cells").and_then(Value::as_array) else {
            bail!("not a notebook: it has no `cells` list");
        };
        for (i, cell) in cells.iter().enumerate() {
            let n = i + 1;
            if cell_type(cell).is_none() {
                bail!("cell {n} has no `cell_type`");
            }
            match cell.get("source") {
                Some(Value::String(_)) => {}
                Some(Value::Array(lines)) if lines.iter().all(Value::is_string) => {}
                _ => bail!("cell {n}: `source` must be a string or a list of strings"),
            }
        }
        let nb = Notebook { root };
        nb.check_kernel()?;
        Ok(nb)
    }

    /// Refuses a notebook of another kernel. The kernelspec decides (it is what Jupyter
    /// starts); without one, `language_info`; a notebook that names neither is taken as ours.
    fn check_kernel(&self) -> anyhow::Result<()> {
        let meta = self.root.get("metadata");
        let field = |obj: &str, key: &str| {
            meta.and_then(|m| m.get(obj))
                .and_then(|o| o.get(key))
                .and_then(Value::as_str)
        };
        let ours = |s: Option<&str>| s == Some(KERNEL_NAME);
        let has = |obj: &str| meta.and_then(|m| m.get(obj)).is_some();
        let accepted = if has("kernelspec") {
            ours(field("kernelspec", "name")) || ours(field("kernelspec", "language"))
        } else if has("language_info") {
            ours(field("language_info", "name"))
        } else {
            true
        };
        if accepted {
            return Ok(());
        }
        let kernel = field("kernelspec", "display_name")
            .or(field("kernelspec", "name"))
            .unwrap_or("another");
        let language = field("kernelspec", "language")
            .or(field("language_info", "name"))
            .unwrap_or("unknown");
        bail!(
            "this notebook is written for the `{kernel}` kernel (language {language}), not for \
             Headroom; headroom runs only Headroom notebooks. To convert it, choose the Headroom \
             kernel for it in Jupyter and save it."
        )
    }

    pub fn cells(&self) -> &[Value] {
        self.root
            .get("cells")
            .and_then(Value::as_array)
            .map_or(&[], Vec::as_slice)
    }

    pub fn cell_mut(&mut self, index: usize) -> Option<&mut Value> {
        self.root
            .get_mut("cells")
            .and_then(Value::as_array_mut)
            .and_then(|c| c.get_mut(index))
    }

    /// `metadata.headroom`, if present.
    pub fn headroom(&self) -> Option<&Map<String, Value>> {
        self.root
            .get("metadata")
            .and_then(|m| m.get("headroom"))
            .and_then(Value::as_object)
    }

    /// `metadata.headroom`, created (as an object) when absent.
    pub fn headroom_mut(&mut self) -> &mut Map<String, Value> {
        let meta = object_entry(&mut self.root, "metadata");
        object_entry(meta, "headroom")
    }

    /// Writes the Headroom kernelspec and language info into a notebook that names no kernel,
    /// so Jupyter opens what `headroom run` wrote with the right kernel.
    pub fn ensure_kernel_metadata(&mut self) {
        let meta = object_entry(&mut self.root, "metadata");
        if !meta.contains_key("kernelspec") && !meta.contains_key("language_info") {
            insert(
                meta,
                "kernelspec",
                json!({"display_name": "Headroom", "language": KERNEL_NAME, "name": KERNEL_NAME}),
            );
            insert(
                meta,
                "language_info",
                json!({"file_extension": ".hrw", "mimetype": "text/x-headroom", "name": KERNEL_NAME}),
            );
        }
    }

    /// The file text as Jupyter writes it: one-space indent, non-ASCII kept, final newline.
    pub fn to_text(&self) -> anyhow::Result<String> {
        let mut buf = Vec::new();
        let fmt = serde_json::ser::PrettyFormatter::with_indent(b" ");
        let mut ser = serde_json::Serializer::with_formatter(&mut buf, fmt);
        self.root
            .serialize(&mut ser)
            .context("cannot serialize the notebook")?;
        buf.push(b'\n');
        String::from_utf8(buf).context("the serialized notebook is not UTF-8")
    }
}

/// The object at `key`, created (or replacing a non-object, which no valid notebook has
/// there) with [`insert`].
fn object_entry<'a>(map: &'a mut Map<String, Value>, key: &str) -> &'a mut Map<String, Value> {
    if !map.get(key).is_some_and(Value::is_object) {
        insert(map, key, Value::Object(Map::new()));
    }
    match map.get_mut(key) {
        Some(Value::Object(m)) => m,
        _ => unreachable!("just made an object"),
    }
}

/// Sets `key`: in place when it exists; a new key goes where Jupyter would put it when the
/// keys are in sorted order (as Jupyter writes them), else at the end. Saving the notebook
/// again in Jupyter then moves nothing.
pub(crate) fn insert(map: &mut Map<String, Value>, key: &str, value: Value) {
    if let Some(slot) = map.get_mut(key) {
        *slot = value;
        return;
    }
    let sorted = map.keys().zip(map.keys().skip(1)).all(|(a, b)| a <= b);
    map.insert(key.to_string(), value);
    if sorted {
        let mut entries: Vec<(String, Value)> = std::mem::take(map).into_iter().collect();
        entries.sort_by(|a, b| a.0.cmp(&b.0));
        map.extend(entries);
    }
}

pub(crate) fn cell_type(cell: &Value) -> Option<&str> {
    cell.get("cell_type").and_then(Value::as_str)
}

pub(crate) fn cell_id(cell: &Value) -> Option<&str> {
    cell.get("id")
        .and_then(Value::as_str)
        .filter(|s| !s.is_empty())
}

/// The text of a multi-line string field as nbformat stores it: a string, or a list of
/// strings that each keep their own line ending and are joined with nothing between them.
pub(crate) fn multiline(value: Option<&Value>) -> String {
    match value {
        Some(Value::String(s)) => s.clone(),
        Some(Value::Array(parts)) => parts.iter().filter_map(Value::as_str).collect(),
        _ => String::new(),
    }
}

pub(crate) fn source_of(cell: &Value) -> String {
    multiline(cell.get("source"))
}

/// Replaces a cell's source, keeping the form it was stored in (string or list of lines).
pub(crate) fn set_source(cell: &mut Value, text: &str) {
    let as_lines = matches!(cell.get("source"), Some(Value::Array(_)));
    if let Some(obj) = cell.as_object_mut() {
        let v = if as_lines {
            lines_value(text)
        } else {
            Value::String(text.to_string())
        };
        insert(obj, "source", v);
    }
}

/// A text as the list of its lines, each keeping its `\n` (nbformat's on-disk form).
pub(crate) fn lines_value(text: &str) -> Value {
    Value::Array(
        text.split_inclusive('\n')
            .map(|l| Value::String(l.to_string()))
            .collect(),
    )
}

/// Writes `bytes` to `path` atomically: a temporary file in the same directory, flushed to
/// disk, then renamed over the target. A failure at any step leaves the target as it was and
/// removes the temporary file.
pub(crate) fn write_atomic(path: &Path, bytes: &[u8]) -> anyhow::Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "notebook".into());
    // Renaming over a device, a pipe or a directory would replace it: only a regular file
    // (or nothing) may stand where the notebook goes.
    if let Ok(m) = std::fs::symlink_metadata(path) {
        let target = if m.file_type().is_symlink() {
            std::fs::metadata(path).ok()
        } else {
            Some(m)
        };
        if target.is_some_and(|t| !t.is_file()) {
            anyhow::bail!(
                "cannot write `{}`: it exists and is not a regular file; nothing was written",
                path.display()
            );
        }
    }
    let prefix = format!(".{name}.");
    let mut builder = tempfile::Builder::new();
    builder.prefix(&prefix).suffix(".tmp");
    // A rewritten notebook keeps its permissions; a new one gets the usual rw-r--r--
    // (the temporary file would otherwise leave it readable by its owner only).
    let permissions = match std::fs::metadata(path) {
        Ok(m) => Some(m.permissions()),
        Err(_) => default_permissions(),
    };
    if let Some(p) = permissions {
        builder.permissions(p);
    }
    let mut tmp = builder.tempfile_in(dir).with_context(|| {
        format!(
            "cannot write `{}`: cannot create a file in `{}`; nothing was written",
            path.display(),
            dir.display()
        )
    })?;
    tmp.write_all(bytes)
        .and_then(|()| tmp.as_file().sync_all())
        .with_context(|| {
            format!(
                "cannot write `{}`; nothing was written (the partial copy was removed)",
                path.display()
            )
        })?;
    tmp.persist(path).map_err(|e| {
        anyhow::anyhow!(
            "cannot write `{}`: {}; nothing was written (the partial copy was removed)",
            path.display(),
            e.error
        )
    })?;
    // The rename is durable once the directory entry is on disk too.
    #[cfg(unix)]
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
    Ok(())
}

#[cfg(unix)]
fn default_permissions() -> Option<std::fs::Permissions> {
    use std::os::unix::fs::PermissionsExt as _;
    Some(std::fs::Permissions::from_mode(0o644))
}

#[cfg(not(unix))]
fn default_permissions() -> Option<std::fs::Permissions> {
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn nb(meta: Value) -> anyhow::Result<Notebook> {
        let doc = json!({"cells": [], "metadata": meta, "nbformat": 4, "nbformat_minor": 5});
        Notebook::parse(&doc.to_string())
    }

    #[test]
    fn a_python_notebook_is_refused_by_name() {
        let err = nb(
            json!({"kernelspec": {"name": "python3", "display_name": "Python 3",
            "language": "python"}}),
        )
        .expect_err("refused");
        let msg = format!("{err:#}");
        assert!(msg.contains("Python 3") && msg.contains("python"), "{msg}");
        assert!(nb(json!({"language_info": {"name": "python"}})).is_err());
    }

    #[test]
    fn headroom_and_unnamed_kernels_are_accepted() {
        assert!(nb(json!({"kernelspec": {"name": "headroom"}})).is_ok());
        assert!(nb(json!({"kernelspec": {"name": "hr-dev", "language": "headroom"}})).is_ok());
        assert!(nb(json!({})).is_ok());
    }

    #[test]
    fn sources_join_lists_and_keep_their_form_when_rewritten() {
        let mut cell = json!({"cell_type": "code", "source": ["a = 1 V\n", "b = 2 V"]});
        assert_eq!(source_of(&cell), "a = 1 V\nb = 2 V");
        set_source(&mut cell, "a = 3 V\nb = 2 V");
        assert_eq!(cell["source"], json!(["a = 3 V\n", "b = 2 V"]));
        let mut flat = json!({"cell_type": "code", "source": "x = 1 A\n"});
        set_source(&mut flat, "x = 2 A\n");
        assert_eq!(flat["source"], json!("x = 2 A\n"));
    }

    #[test]
    fn a_new_key_goes_in_sorted_place_only_among_sorted_keys() {
        let mut sorted = json!({"a": 1, "kernelspec": {}, "z": 2});
        insert(
            sorted.as_object_mut().expect("object"),
            "headroom",
            json!({}),
        );
        let keys: Vec<&String> = sorted.as_object().expect("object").keys().collect();
        assert_eq!(keys, ["a", "headroom", "kernelspec", "z"]);
        let mut unsorted = json!({"z": 2, "a": 1});
        insert(unsorted.as_object_mut().expect("object"), "m", json!(0));
        insert(unsorted.as_object_mut().expect("object"), "z", json!(3));
        let keys: Vec<&String> = unsorted.as_object().expect("object").keys().collect();
        assert_eq!(keys, ["z", "a", "m"]);
        assert_eq!(unsorted["z"], 3);
    }

    #[test]
    fn an_older_nbformat_is_refused_with_a_way_out() {
        let err = Notebook::parse(r#"{"nbformat": 3, "worksheets": []}"#).expect_err("refused");
        assert!(format!("{err}").contains("nbformat 3"), "{err}");
    }
}

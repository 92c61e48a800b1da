//! The digests a seal records, defined so that anyone can recompute them without headroom.
//!
//! **Sources.** The canonical text of a notebook's sources is, for every cell in order (code,
//! Markdown and raw alike), `TYPE "\n" LENGTH "\n" SOURCE "\n"`, where TYPE is the cell's
//! `cell_type`, SOURCE its source text (the string, or the list of strings joined with
//! nothing between them, as nbformat defines it; no other normalisation), and LENGTH the number
//! of UTF-8 bytes of SOURCE in decimal. The length makes the joining unambiguous: text moved
//! from one cell into the next changes the digest. `sources_sha256` is the SHA-256 of the
//! UTF-8 bytes of that text, in lowercase hex. Each cell's own entry (the same three lines) is
//! also hashed, so a check can name the cells that changed.
//!
//! **Results.** The stored results of a notebook form a JSON array with one element per code
//! cell in order; each element is the array of the results-data objects
//! (`application/vnd.headroom.results+json`) of that cell's `display_data` and
//! `execute_result` outputs, in output order. `results_sha256` is the SHA-256 of that array
//! serialized by the JSON Canonicalization Scheme (RFC 8785).

use super::ipynb::{self, Notebook};
use crate::render::RESULTS_MIME;
use serde_json::Value;
use sha2::{Digest, Sha256};

/// Names the canonical forms above; a later change of them gets a new name.
pub(crate) const SCHEME: &str = "headroom-seal-1";

pub(crate) fn hex_sha256(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// One cell's entry of the canonical source text.
pub(crate) fn cell_entry(cell: &Value) -> String {
    let source = ipynb::source_of(cell);
    format!(
        "{}\n{}\n{source}\n",
        ipynb::cell_type(cell).unwrap_or(""),
        source.len()
    )
}

pub(crate) fn sources_sha256(nb: &Notebook) -> String {
    let text: String = nb.cells().iter().map(cell_entry).collect();
    hex_sha256(text.as_bytes())
}

/// The digest of each cell's entry, in cell order.
pub(crate) fn cell_sha256s(nb: &Notebook) -> Vec<String> {
    nb.cells()
        .iter()
        .map(|c| hex_sha256(cell_entry(c).as_bytes()))
        .collect()
}

/// The stored results as the array the results digest is taken over.
pub(crate) fn stored_results(nb: &Notebook) -> Value {
    let cells = nb
        .cells()
        .iter()
        .filter(|c| ipynb::cell_type(c) == Some("code"))
        .map(|c| {
            let outputs = c.get("outputs").and_then(Value::as_array);
            Value::Array(
                outputs
                    .into_iter()
                    .flatten()
                    .filter(|o| {
                        matches!(
                            o.get("output_type").and_then(Value::as_str),
                            Some("display_data" | "execute_result")
                        )
                    })
                    .filter_map(|o| o.get("data").and_then(|d| d.get(RESULTS_MIME)).cloned())
                    .collect(),
            )
        })
        .collect();
    Value::Array(cells)
}

pub(crate) fn results_sha256(nb: &Notebook) -> anyhow::Result<String> {
    let canonical = serde_jcs::to_vec(&stored_results(nb))
        .map_err(|e| anyhow::anyhow!("cannot canonicalize the results data: {e}"))?;
    Ok(hex_sha256(&canonical))
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn nb(cells: Value) -> Notebook {
        let doc = json!({"cells": cells, "metadata": {}, "nbformat": 4, "nbformat_minor": 5});
        Notebook::parse(&doc.to_string()).expect("notebook")
    }

    #[test]
    fn sha256_of_abc_is_the_published_vector() {
        // FIPS 180-2, appendix B.1: SHA-256("abc").
        assert_eq!(
            hex_sha256(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn a_list_of_lines_and_the_same_string_hash_alike() {
        let lines = nb(json!([{"cell_type": "code", "source": ["a = 1 V\n", "b = 2 V"]}]));
        let flat = nb(json!([{"cell_type": "code", "source": "a = 1 V\nb = 2 V"}]));
        assert_eq!(sources_sha256(&lines), sources_sha256(&flat));
        // The canonical text written out by hand: type, byte length, source.
        assert_eq!(
            sources_sha256(&flat),
            hex_sha256(b"code\n15\na = 1 V\nb = 2 V\n")
        );
    }

    #[test]
    fn text_moved_between_cells_changes_the_digest() {
        let a = nb(json!([{"cell_type": "markdown", "source": "ab"},
            {"cell_type": "markdown", "source": "c"}]));
        let b = nb(json!([{"cell_type": "markdown", "source": "a"},
            {"cell_type": "markdown", "source": "bc"}]));
        assert_ne!(sources_sha256(&a), sources_sha256(&b));
    }

    #[test]
    fn results_are_canonicalized_by_rfc_8785() {
        let data = json!({"version": 1, "values": [{"si": 1e-7, "name": "x"}]});
        let n = nb(json!([{"cell_type": "code", "source": "x", "outputs": [
            {"output_type": "display_data", "data": {(RESULTS_MIME): data}, "metadata": {}}]}]));
        // RFC 8785: members sorted by key, no whitespace, numbers as ECMAScript prints them.
        let expected = r#"[[{"values":[{"name":"x","si":1e-7}],"version":1}]]"#;
        assert_eq!(
            results_sha256(&n).expect("digest"),
            hex_sha256(expected.as_bytes())
        );
    }
}

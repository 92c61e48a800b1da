//! The living-worksheet notes on result blocks.

use super::*;
use worksheet_lang::results::Change;

#[test]
fn an_updated_block_says_what_changed_it() {
    let r = CellReport {
        cell: "b".into(),
        updated_by: vec![Change {
            name: "iload".into(),
            old: "180 mA".into(),
            new: "250 mA".into(),
        }],
        ..CellReport::default()
    };
    assert!(
        text(&r).starts_with("↻ updated: iload 180 mA → 250 mA\n"),
        "{}",
        text(&r)
    );
    let html = bundle(&r)["text/html"]
        .as_str()
        .unwrap_or_default()
        .to_string();
    assert!(html.contains("iload 180 mA → 250 mA"), "{html}");
}

#[test]
fn the_run_cell_lists_the_cells_it_updated() {
    let one = CellReport {
        updated_cells: vec!["p".into()],
        ..CellReport::default()
    };
    assert_eq!(text(&one), "↻ this run updated another cell: p\n");
    let two = CellReport {
        updated_cells: vec!["p".into(), "check p <= 1 W".into()],
        ..CellReport::default()
    };
    assert_eq!(
        text(&two),
        "↻ this run updated 2 other cells: p · check p <= 1 W\n"
    );
    let html = bundle(&two)["text/html"]
        .as_str()
        .unwrap_or_default()
        .to_string();
    assert!(html.contains("check p &lt;= 1 W"), "{html}");
}

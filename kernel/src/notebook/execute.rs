//! Runs every code cell of a notebook in order with one worksheet, as a front end running
//! all cells against a fresh kernel would, and collects what each cell shows.

use super::ipynb::{self, Notebook};
use crate::outputs::{cell_outputs, CellOutput};
use worksheet_lang::results::CellReport;
use worksheet_lang::{Interrupt, Worksheet};

/// One code cell after the run.
#[derive(Debug, Clone)]
pub(crate) struct CellRun {
    /// Index of the cell among all cells of the notebook.
    pub index: usize,
    /// The key the worksheet knows the cell by: its nbformat id, or `#N` for a cell without
    /// one (ids never contain `#`, so the two cannot collide).
    pub key: String,
    /// `None` for a blank cell, which is not run (as JupyterLab and nbclient skip it).
    pub execution_count: Option<u64>,
    /// The cell's report as it stands after the whole run (a later cell may have updated it).
    pub report: Option<std::sync::Arc<CellReport>>,
    pub outputs: Vec<CellOutput>,
}

impl CellRun {
    /// "cell 4 (`battery`)" — the position counts all cells, Markdown included, from 1.
    pub fn label(&self) -> String {
        label(self.index, &self.key)
    }
}

pub(crate) fn label(index: usize, key: &str) -> String {
    if key.starts_with('#') {
        format!("cell {}", index + 1)
    } else {
        format!("cell {} (`{key}`)", index + 1)
    }
}

/// The worksheet key of every cell, by index (`None` for a cell that is not code).
pub(crate) fn cell_keys(nb: &Notebook) -> Vec<Option<String>> {
    let mut seen: Vec<String> = Vec::new();
    nb.cells()
        .iter()
        .enumerate()
        .map(|(i, cell)| {
            if ipynb::cell_type(cell) != Some("code") {
                return None;
            }
            let key = match ipynb::cell_id(cell) {
                // A duplicated id (an invalid notebook) must not make two cells one.
                Some(id) if !seen.iter().any(|s| s == id) => id.to_string(),
                _ => format!("#{}", i + 1),
            };
            seen.push(key.clone());
            Some(key)
        })
        .collect()
}

/// Runs the code cells in order. A cell with an error does not stop the run (its
/// dependents then report it), so one run shows every problem.
pub(crate) fn run_cells(nb: &Notebook) -> Vec<CellRun> {
    let mut sheet = Worksheet::new();
    let interrupt = Interrupt::new();
    let mut count = 0u64;
    let mut runs: Vec<CellRun> = Vec::new();
    for (index, key) in cell_keys(nb).into_iter().enumerate() {
        let Some(key) = key else { continue };
        let source = nb
            .cells()
            .get(index)
            .map(ipynb::source_of)
            .unwrap_or_default();
        if source.trim().is_empty() {
            runs.push(CellRun {
                index,
                key,
                execution_count: None,
                report: None,
                outputs: Vec::new(),
            });
            continue;
        }
        count += 1;
        let ex = sheet.execute(Some(&key), &source, &interrupt);
        let shown = cell_outputs(&ex);
        // A display update replaces the bundle of the earlier block with that display id,
        // as Jupyter front ends apply `update_display_data`.
        for u in &shown.updates {
            for r in runs.iter_mut() {
                for o in r.outputs.iter_mut() {
                    if let CellOutput::Display { display_id, data } = o {
                        if *display_id == u.display_id {
                            *data = u.data.clone();
                        }
                    }
                }
            }
        }
        for u in &ex.updated {
            if let Some(r) = runs.iter_mut().find(|r| r.key == u.report.cell) {
                r.report = Some(std::sync::Arc::new(u.report.clone()));
            }
        }
        runs.push(CellRun {
            index,
            key,
            execution_count: Some(count),
            report: Some(ex.report),
            outputs: shown.outputs,
        });
    }
    runs
}

/// Writes the outputs and execution counts of a run into the notebook's code cells.
pub(crate) fn store(nb: &mut Notebook, runs: &[CellRun]) {
    for r in runs {
        let Some(cell) = nb.cell_mut(r.index).and_then(|c| c.as_object_mut()) else {
            continue;
        };
        let outputs = r
            .outputs
            .iter()
            .map(|o| o.to_nbformat(r.execution_count))
            .collect();
        ipynb::insert(cell, "outputs", serde_json::Value::Array(outputs));
        ipynb::insert(cell, "execution_count", r.execution_count.into());
    }
}

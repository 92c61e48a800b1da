//! The session's input history, kept in memory, answering `history_request`.
//!
//! The semantics follow IPython's history manager, which front ends are written against:
//! entries are `(session, line, input)` or `(session, line, (input, output))`; `range`
//! counts lines from `start` up to but excluding `stop`; `search` matches the whole input
//! against a glob (`*`, `?`, `[…]`) and keeps the newest `n`; `unique` keeps only the
//! newest of equal inputs.

use glob::{MatchOptions, Pattern};
use serde::Deserialize;
use serde_json::{json, Value};

/// The number this kernel gives its one session. Requests for session 0 (IPython's "the
/// current session") and for this number are answered; earlier sessions (negative numbers)
/// are not kept, so they come back empty.
pub(crate) const SESSION: i64 = 1;

#[derive(Debug, Clone)]
struct Entry {
    line: u64,
    input: String,
    output: Option<String>,
}

#[derive(Debug, Default)]
pub(crate) struct History {
    entries: Vec<Entry>,
}

/// `history_request` content, every field optional as clients send only what they use.
#[derive(Debug, Deserialize, Default)]
#[serde(default)]
pub(crate) struct Query {
    pub output: bool,
    pub hist_access_type: String,
    pub session: Option<i64>,
    pub start: Option<i64>,
    pub stop: Option<i64>,
    pub n: Option<i64>,
    pub pattern: Option<String>,
    pub unique: bool,
}

impl History {
    pub fn record(&mut self, line: u64, input: &str) {
        self.entries.push(Entry {
            line,
            input: input.to_string(),
            output: None,
        });
    }

    /// Attaches the plain-text result to the entry of `line`.
    pub fn set_output(&mut self, line: u64, output: String) {
        if let Some(e) = self.entries.iter_mut().rev().find(|e| e.line == line) {
            e.output = Some(output);
        }
    }

    /// The `history` list of a reply.
    pub fn answer(&self, q: &Query) -> Vec<Value> {
        let picked: Vec<&Entry> = match q.hist_access_type.as_str() {
            "tail" => tail(self.entries.iter().collect(), q.n),
            "range" => {
                let session = q.session.unwrap_or(0);
                if session != 0 && session != SESSION {
                    Vec::new()
                } else {
                    let start = q.start.unwrap_or(0);
                    let stop = q.stop.filter(|&s| s > 0);
                    self.entries
                        .iter()
                        .filter(|e| {
                            let l = e.line as i64;
                            l >= start && stop.is_none_or(|s| l < s)
                        })
                        .collect()
                }
            }
            "search" => {
                let pattern = q.pattern.as_deref().unwrap_or("*");
                let Ok(glob) = Pattern::new(pattern) else {
                    return Vec::new();
                };
                let opts = MatchOptions {
                    case_sensitive: true,
                    require_literal_separator: false,
                    require_literal_leading_dot: false,
                };
                let mut hits: Vec<&Entry> = self
                    .entries
                    .iter()
                    .filter(|e| glob.matches_with(&e.input, opts))
                    .collect();
                if q.unique {
                    // Keep the newest occurrence of each input, in history order.
                    let mut seen = std::collections::HashSet::new();
                    hits.reverse();
                    hits.retain(|e| seen.insert(e.input.as_str()));
                    hits.reverse();
                }
                tail(hits, q.n)
            }
            _ => Vec::new(),
        };
        picked
            .into_iter()
            .map(|e| {
                if q.output {
                    json!([SESSION, e.line, [e.input, e.output]])
                } else {
                    json!([SESSION, e.line, e.input])
                }
            })
            .collect()
    }
}

/// The last `n` items; all of them when `n` is absent or not positive.
fn tail(items: Vec<&Entry>, n: Option<i64>) -> Vec<&Entry> {
    match n.and_then(|n| usize::try_from(n).ok()).filter(|&n| n > 0) {
        Some(n) if n < items.len() => items[items.len() - n..].to_vec(),
        _ => items,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn history(inputs: &[&str]) -> History {
        let mut h = History::default();
        for (i, s) in inputs.iter().enumerate() {
            h.record(i as u64 + 1, s);
        }
        h
    }

    fn query(kind: &str) -> Query {
        Query {
            hist_access_type: kind.into(),
            ..Query::default()
        }
    }

    fn inputs(v: &[Value]) -> Vec<&str> {
        v.iter().map(|e| e[2].as_str().unwrap_or("?")).collect()
    }

    #[test]
    fn tail_gives_the_last_n_in_order() {
        let h = history(&["a", "b", "c"]);
        let r = h.answer(&Query {
            n: Some(2),
            ..query("tail")
        });
        assert_eq!(inputs(&r), ["b", "c"]);
        assert_eq!(r[0][1], 2);
        assert_eq!(r[0][0], SESSION);
    }

    #[test]
    fn range_excludes_stop_and_other_sessions() {
        let h = history(&["a", "b", "c", "d"]);
        let r = h.answer(&Query {
            session: Some(SESSION),
            start: Some(2),
            stop: Some(4),
            ..query("range")
        });
        assert_eq!(inputs(&r), ["b", "c"]);
        let r = h.answer(&Query {
            session: Some(-1),
            start: Some(1),
            ..query("range")
        });
        assert!(r.is_empty());
    }

    #[test]
    fn search_is_a_whole_input_glob_with_unique_and_n() {
        let h = history(&["x = 1 V", "y = 2 A", "x = 1 V", "x2 = 3 V"]);
        let all = h.answer(&Query {
            pattern: Some("x*V".into()),
            ..query("search")
        });
        assert_eq!(inputs(&all), ["x = 1 V", "x = 1 V", "x2 = 3 V"]);
        // "x" alone does not match: the glob covers the whole input.
        let none = h.answer(&Query {
            pattern: Some("x".into()),
            ..query("search")
        });
        assert!(none.is_empty());
        let unique = h.answer(&Query {
            pattern: Some("x = ?*".into()),
            unique: true,
            ..query("search")
        });
        assert_eq!(inputs(&unique), ["x = 1 V"]);
        assert_eq!(unique[0][1], 3, "the newest occurrence is kept");
        let last = h.answer(&Query {
            pattern: Some("*".into()),
            n: Some(1),
            ..query("search")
        });
        assert_eq!(inputs(&last), ["x2 = 3 V"]);
    }

    #[test]
    fn output_pairs_input_with_its_result() {
        let mut h = history(&["2 V * 3"]);
        h.set_output(1, "6 V".into());
        let r = h.answer(&Query {
            output: true,
            ..query("tail")
        });
        assert_eq!(r[0][2], json!(["2 V * 3", "6 V"]));
    }
}

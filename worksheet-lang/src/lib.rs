//! # worksheet-lang
//!
//! The Headroom worksheet language as a pure library: source text in, plain Rust data out.
//! It parses cells into a tree with diagnostics, checks units and dimensions, carries
//! tolerances to guaranteed worst-case bounds, keeps the worksheet as a dependency graph,
//! and holds the built-in power-design library.
//!
//! It knows nothing of Jupyter, sockets, JSON, files or terminals, and never prints.

pub mod ast;
pub mod builtins;
pub mod diagnostic;
pub mod num;
pub mod parser;
pub mod units;
pub mod value;

pub use ast::Span;
pub use diagnostic::{DiagKind, Diagnostic, Severity};
pub use parser::{is_complete, parse, Completeness};
pub mod fold;
pub mod lexer;
pub mod results;
pub mod worksheet;

pub use results::CellReport;
pub use worksheet::{Execution, Interrupt, Prepared, Worksheet};
pub mod analysis;
pub mod compile;
pub mod eval;
pub mod query;
pub mod sweep;

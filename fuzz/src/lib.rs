//! The bodies of the fuzz targets. `worksheet-lang/tests/hostile.rs` includes `bodies.rs`
//! by path and runs the same functions under proptest in the normal test run.

pub mod bodies;

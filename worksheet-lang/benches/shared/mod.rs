//! Code shared by the bench targets of this directory.

pub mod chain;

//! The look-alike fold applied before lexing (STUB).

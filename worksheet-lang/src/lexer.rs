//! The lexer (STUB).

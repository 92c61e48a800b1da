//! Rendering of results data into text, HTML and JSON; shared by the kernel and the CLI (STUB).

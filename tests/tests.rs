//! Integration tests: the command line and the library's public API.
mod extract;

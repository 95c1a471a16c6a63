//! Integration tests: the command line and the library's public API.

mod pack;
mod spec;
mod synth;
mod util;

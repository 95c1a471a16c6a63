//! Integration tests: the command line and the library's public API.

mod extract;
mod extract_ranges;
mod lm;
mod measure;
mod pack;
mod prune;
mod quality;
mod regression;
mod spec;
mod synth;
mod util;

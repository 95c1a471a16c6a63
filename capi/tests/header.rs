//! The checked-in header `include/baler.h` must be what cbindgen generates from the code.
//! `BALER_BLESS=1 cargo test -p baler-capi --test header` rewrites it.

use std::path::Path;

#[test]
fn header_is_up_to_date() {
    let crate_dir = Path::new(env!("CARGO_MANIFEST_DIR"));
    let config = cbindgen::Config::from_file(crate_dir.join("cbindgen.toml")).unwrap();
    let mut generated = Vec::new();
    cbindgen::Builder::new()
        .with_crate(crate_dir)
        .with_config(config)
        .generate()
        .expect("cbindgen reads capi/src/lib.rs")
        .write(&mut generated);
    let generated = String::from_utf8(generated).unwrap();
    let header = crate_dir.join("../include/baler.h");
    if std::env::var_os("BALER_BLESS").is_some() {
        std::fs::write(&header, &generated).unwrap();
        return;
    }
    let checked_in = std::fs::read_to_string(&header).unwrap_or_default();
    assert!(
        checked_in == generated,
        "include/baler.h is stale: run `BALER_BLESS=1 cargo test -p baler-capi --test header` \
         and commit the result"
    );
}

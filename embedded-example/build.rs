//! Generates the delay table from the demo design at build time (through
//! host-tool's library, without its CLI), copies the `.bin` blob that the
//! firmware places in flash, and puts `memory.x` on the linker path.

use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(std::env::var("OUT_DIR").expect("OUT_DIR"));
    let manifest = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("manifest dir"));
    let design = manifest.join("../tables/winch_aux.toml");
    let blob = manifest.join("../tables/winch_aux.bin");
    println!("cargo:rerun-if-changed={}", design.display());
    println!("cargo:rerun-if-changed={}", blob.display());
    println!("cargo:rerun-if-changed=memory.x");
    let source =
        host_tool::export::rust_source_for_design_file(&design).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(out.join("winch_aux_table.rs"), source).expect("write table source");
    std::fs::copy(&blob, out.join("winch_aux.bin")).expect("copy table blob");
    std::fs::copy(manifest.join("memory.x"), out.join("memory.x")).expect("copy memory.x");
    println!("cargo:rustc-link-search={}", out.display());
}

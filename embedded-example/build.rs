//! Generates the delay table from the demo design at build time (through
//! host-tool's library, without its CLI), with the layout that is fastest
//! on the target core, writes its `.bin` blob for the flash copy, and puts
//! `memory.x` on the linker path.
//!
//! Layout per core: ARMv7E-M has a divide instruction, so the compact
//! `ratio` layout (one division); ARMv6-M has none (a division is a library
//! call of ~100 instructions), so `recip-ratio`, which trades two bytes of
//! flash per current code for one multiplication.

use std::path::PathBuf;

use host_tool::design::LayoutChoice;

fn main() {
    let out = PathBuf::from(std::env::var("OUT_DIR").expect("OUT_DIR"));
    let manifest = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("manifest dir"));
    let target = std::env::var("TARGET").expect("TARGET");
    let design = manifest.join("../tables/winch_aux.toml");
    println!("cargo:rerun-if-changed={}", design.display());
    println!("cargo:rerun-if-changed=memory.x");
    let layout = if target.starts_with("thumbv6m") {
        LayoutChoice::RecipRatio
    } else {
        LayoutChoice::Ratio
    };
    let (source, blob) =
        host_tool::export::firmware_table(&design, Some(layout)).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(out.join("winch_aux_table.rs"), source).expect("write table source");
    std::fs::write(out.join("winch_aux.bin"), blob).expect("write table blob");
    let design_data = host_tool::design::Design::load(&design).unwrap_or_else(|e| panic!("{e}"));
    let closed = host_tool::closed_form_source::closed_form_source(&design_data)
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(out.join("winch_aux_closed_form.rs"), closed).expect("write closed-form source");
    std::fs::copy(manifest.join("memory.x"), out.join("memory.x")).expect("copy memory.x");
    println!("cargo:rustc-link-search={}", out.display());
}

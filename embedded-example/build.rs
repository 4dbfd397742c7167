//! Generates the delay table from the demo design at build time (through
//! host-tool's library, without its CLI), with the layout that is fastest
//! on the target core, writes its `.bin` blob for the flash copy, and puts
//! `memory.x` on the linker path.
//!
//! Layout per core: `host_tool::export::firmware_layout` (ARMv7E-M: the
//! compact `ratio` layout, one division; ARMv6-M, which has no divide
//! instruction: `recip-ratio`, a reciprocal table and one multiplication).
//! The closed-form methods' coefficients come from the same design.

use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(std::env::var("OUT_DIR").expect("OUT_DIR"));
    let manifest = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("manifest dir"));
    let target = std::env::var("TARGET").expect("TARGET");
    let design = manifest.join("../tables/winch_aux.toml");
    println!("cargo:rerun-if-changed={}", design.display());
    println!("cargo:rerun-if-changed=memory.x");
    let layout = host_tool::export::firmware_layout(&target);
    let (source, blob) =
        host_tool::export::firmware_table(&design, Some(layout)).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(out.join("winch_aux_table.rs"), source).expect("write table source");
    std::fs::write(out.join("winch_aux.bin"), blob).expect("write table blob");
    let design_data = host_tool::design::Design::load(&design).unwrap_or_else(|e| panic!("{e}"));
    let closed = host_tool::closed_form_source::closed_form_source(&design_data)
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(out.join("winch_aux_closed_form.rs"), closed).expect("write closed-form source");
    std::fs::write(
        out.join("winch_aux_model.rs"),
        host_tool::export::model_source(&design_data),
    )
    .expect("write model source");
    println!(
        "cargo:rerun-if-changed={}",
        manifest.join("../tables/winch_aux_coss.csv").display()
    );
    std::fs::copy(manifest.join("memory.x"), out.join("memory.x")).expect("copy memory.x");
    println!("cargo:rustc-link-search={}", out.display());
}

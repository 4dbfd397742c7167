//! Generates the delay table from the demo design at build time (through
//! host-tool's library, without its CLI), with the layout that is fastest
//! on the target core, writes its `.bin` blob for the flash copy, and puts
//! `memory.x` on the linker path, and the linker scripts (`link.x`;
//! `defmt.x` with the `log` feature).
//!
//! Layout per core: `host_tool::emit::export::firmware_layout` (`ratio-volt` on
//! the Cortex-M4F, which divides in one instruction; `margin` on the
//! Cortex-M0, which has no divide instruction). Both follow the Coss
//! curve's voltage dependence within a tick.
//! The closed-form methods' coefficients come from the same design.
//!
//! Generation over the demo's Coss curve takes seconds, and every feature
//! set (the scenario build and six panic-free proof builds per core) runs
//! this script again. The outputs are therefore kept in
//! `target/generated-cache/<key>/`, keyed by a CRC-64 of everything they
//! follow from: the design and its Coss curve, the layout, the sources of
//! host-tool and timing-core and this crate's `Cargo.lock`. Any change to
//! one of those is a new key, so a stale table cannot be picked up.

use std::path::{Path, PathBuf};

const OUTPUTS: [&str; 4] = [
    "winch_aux_table.rs",
    "winch_aux.bin",
    "winch_aux_closed_form.rs",
    "winch_aux_model.rs",
];

fn main() {
    let out = PathBuf::from(std::env::var("OUT_DIR").expect("OUT_DIR"));
    let manifest = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("manifest dir"));
    let target = std::env::var("TARGET").expect("TARGET");
    let design = manifest.join("../tables/winch_aux.toml");
    let coss = manifest.join("../tables/winch_aux_coss.csv");
    for p in [&design, &coss, &manifest.join("memory.x")] {
        println!("cargo:rerun-if-changed={}", p.display());
    }
    let layout = host_tool::emit::export::firmware_layout(&target);

    let key = cache_key(&manifest, &[&design, &coss], &format!("{layout:?}"));
    let cache = manifest
        .join("target/generated-cache")
        .join(format!("{key:016x}"));
    if !OUTPUTS.iter().all(|f| cache.join(f).is_file()) {
        generate(&design, layout, &cache);
    }
    for f in OUTPUTS {
        std::fs::copy(cache.join(f), out.join(f)).expect("copy generated file");
    }
    // The half-bridge leg's reference model (cheap: no table is generated;
    // the leg scenario runs the committed tables/lantern_leg.rs, which a
    // host test keeps fresh).
    let leg = manifest.join("../tables/lantern_leg.toml");
    for p in [
        &leg,
        &manifest.join("../tables/lantern_leg_coss.csv"),
        &manifest.join("../tables/lantern_leg.rs"),
    ] {
        println!("cargo:rerun-if-changed={}", p.display());
    }
    let spec = host_tool::input::leg_design::LegSpec::load(&leg).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(
        out.join("lantern_leg_model.rs"),
        host_tool::emit::leg_export::leg_model_source(&spec),
    )
    .expect("write the leg model");
    // The online trim's settings, regions and margins (the model at a few
    // pairs a region: quick).
    let spec =
        host_tool::input::design::DesignSpec::load(&design).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(
        out.join("winch_aux_trim.rs"),
        host_tool::emit::trim_source::trim_source(&spec).unwrap_or_else(|e| panic!("{e}")),
    )
    .expect("write the trim's settings");
    std::fs::copy(manifest.join("memory.x"), out.join("memory.x")).expect("copy memory.x");
    println!("cargo:rustc-link-search={}", out.display());
    // cortex-m-rt's linker script always; defmt's only with logging (it
    // keeps defmt's own panic hook alive on purpose, which the panic-free
    // proof builds must not link). Given here rather than as rustflags, so
    // the scenario and proof builds share one target directory and compile
    // the generator (a build dependency) once.
    println!("cargo:rustc-link-arg=-Tlink.x");
    if std::env::var_os("CARGO_FEATURE_LOG").is_some() {
        println!("cargo:rustc-link-arg=-Tdefmt.x");
    }
}

/// Generate the four outputs into `dir` (written to a temporary directory
/// first and renamed, so a build stopped half-way leaves no partial entry).
fn generate(design: &Path, layout: host_tool::input::design::LayoutChoice, dir: &Path) {
    let (source, blob) = host_tool::emit::export::firmware_table(design, Some(layout))
        .unwrap_or_else(|e| panic!("{e}"));
    let design_data =
        host_tool::model::design::Design::load(design).unwrap_or_else(|e| panic!("{e}"));
    let closed = host_tool::emit::closed_form_source::closed_form_source(&design_data)
        .unwrap_or_else(|e| panic!("{e}"));
    let model = host_tool::emit::export::model_source(&design_data);
    let tmp = dir.with_extension(format!("tmp{}", std::process::id()));
    std::fs::create_dir_all(&tmp).expect("create cache directory");
    let contents: [&[u8]; 4] = [
        source.as_bytes(),
        &blob,
        closed.as_bytes(),
        model.as_bytes(),
    ];
    for (f, c) in OUTPUTS.iter().zip(contents) {
        std::fs::write(tmp.join(f), c).expect("write generated file");
    }
    // Another build may have filled the same key meanwhile: same contents.
    if std::fs::rename(&tmp, dir).is_err() {
        let _ = std::fs::remove_dir_all(&tmp);
    }
}

/// CRC-64 of the inputs, the layout and every file under the generator's
/// and the core's sources (in sorted order, names included).
fn cache_key(manifest: &Path, inputs: &[&Path], layout: &str) -> u64 {
    let crc = crc::Crc::<u64>::new(&crc::CRC_64_ECMA_182);
    let mut digest = crc.digest();
    digest.update(layout.as_bytes());
    let mut files: Vec<PathBuf> = inputs.iter().map(|p| p.to_path_buf()).collect();
    files.push(manifest.join("Cargo.lock"));
    for krate in ["host-tool", "timing-core"] {
        let root = manifest.join("..").join(krate);
        files.push(root.join("Cargo.toml"));
        collect(&root.join("src"), &mut files);
    }
    for f in &files {
        digest.update(f.to_string_lossy().as_bytes());
        digest.update(&std::fs::read(f).unwrap_or_else(|e| panic!("{}: {e}", f.display())));
    }
    digest.finalize()
}

fn collect(dir: &Path, files: &mut Vec<PathBuf>) {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.expect("directory entry").path())
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            collect(&p, files);
        } else {
            files.push(p);
        }
    }
}

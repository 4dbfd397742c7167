//! Benchmarks of the host's heavy jobs: table generation (candidates,
//! screening and the exhaustive verification of the chosen table) and
//! exhaustive verification alone, in code pairs per second, for the demo
//! design and for a design that uses both 12-bit ADCs over nearly their
//! whole scale (16.7 million pairs). `cargo bench -p host-tool`.

// criterion_group! and criterion_main! generate undocumented items.
#![allow(missing_docs)]

use std::hint::black_box;
use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use host_tool::check::verify::verify;
use host_tool::generate::generate;
use host_tool::model::design::Design;

fn design(rel: &str) -> Design {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    Design::load(&root.join(rel)).expect("benchmark design loads")
}

fn pairs(d: &Design) -> u64 {
    u64::from(d.vin_codes.len()) * u64::from(d.io_codes.len())
}

fn generation(c: &mut Criterion) {
    let demo = design("../tables/winch_aux.toml");
    let mut g = c.benchmark_group("generate");
    g.sample_size(10);
    g.throughput(Throughput::Elements(pairs(&demo)));
    g.bench_function("demo (winch_aux)", |b| {
        b.iter(|| generate(black_box(&demo)).expect("demo generates"));
    });
    g.finish();
}

fn verification(c: &mut Criterion) {
    let mut g = c.benchmark_group("verify");
    g.sample_size(10);
    for (label, rel) in [
        ("demo", "../tables/winch_aux.toml"),
        ("full-scale 12x12-bit", "benches/full_scale.toml"),
    ] {
        let d = design(rel);
        let out = generate(&d).expect("benchmark design generates");
        let table = out.table.table().expect("generated table validates");
        let cf = d.closed_form().expect("closed form");
        let fast = cf.fast_f32().expect("fast f32");
        g.throughput(Throughput::Elements(pairs(&d)));
        g.bench_function(format!("{label}: table"), |b| {
            b.iter(|| verify(black_box(&d), &table, None));
        });
        g.bench_function(format!("{label}: closed-form-f32"), |b| {
            b.iter(|| verify(black_box(&d), &fast, None));
        });
        if let Ok(fixed) = cf.fixed_point() {
            g.bench_function(format!("{label}: fixed-point"), |b| {
                b.iter(|| verify(black_box(&d), &fixed, None));
            });
        }
    }
    g.finish();
}

criterion_group!(benches, generation, verification);
criterion_main!(benches);

//! Benchmarks of the analytic path (`rate`: load + landscape + every rate + MFPT).
//! Issue targets: a 10^5-row table <= 50 ms, a formula potential <= 20 ms. Run: cargo bench --bench rate

use criterion::{Criterion, criterion_group, criterion_main};
use escapade::scenario::Model;
use escapade::theory;
use std::hint::black_box;
use std::io::Write;
use std::path::{Path, PathBuf};

fn write_table(dir: &Path, rows: usize) -> PathBuf {
    let path = dir.join(format!("bench_profile_{rows}.csv"));
    let mut f = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
    writeln!(f, "x,U").unwrap();
    for i in 0..rows {
        let x = -2.5 + 5.0 * i as f64 / (rows - 1) as f64;
        let u = 5.0 * (x * x - 1.0).powi(2) + 0.3 * (4.0 * x).sin();
        writeln!(f, "{x:.10},{u:.12}").unwrap();
    }
    let scen = dir.join(format!("bench_table_{rows}.toml"));
    std::fs::write(
        &scen,
        format!(
            "[particle]\nmass = 1.0\nfriction = 2.0\n[potential]\ntable = \"bench_profile_{rows}.csv\"\n[states]\nstart = -1.0\n"
        ),
    )
    .unwrap();
    scen
}

fn bench(c: &mut Criterion) {
    let dir = std::env::temp_dir().join("escapade-bench");
    std::fs::create_dir_all(&dir).unwrap();
    let table = write_table(&dir, 100_000);
    let expr = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/isomerization_kjmol.toml");
    let mut g = c.benchmark_group("rate");
    g.sample_size(20);
    g.bench_function("table_1e5_rows", |b| {
        b.iter(|| {
            let m = Model::load(black_box(&table), &[]).unwrap();
            black_box(theory::analyse(&m.system).unwrap())
        })
    });
    g.bench_function("expr_formula", |b| {
        b.iter(|| {
            let m = Model::load(black_box(&expr), &[]).unwrap();
            black_box(theory::analyse(&m.system).unwrap())
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

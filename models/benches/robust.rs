//! Criterion benchmarks for the robust estimators: median, median + MAD and
//! Qn at 10 000 and 1 000 000 points. Data (seeded normal, 50 ± 2) are built
//! outside the timed closures. `bench/robust_reference.py` times numpy and
//! statsmodels on the same kind of data.
#![allow(missing_docs)]

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_xoshiro::Xoshiro256Plus;
use std::hint::black_box;
use telltale_models::robust::{median_mad_with_scratch, median_with_scratch, qn};

fn data(n: usize) -> Vec<f64> {
    let mut rng = Xoshiro256Plus::seed_from_u64(42);
    let z = Normal::new(50.0, 2.0).expect("valid normal");
    (0..n).map(|_| z.sample(&mut rng)).collect()
}

fn robust(c: &mut Criterion) {
    let mut g = c.benchmark_group("robust");
    for n in [10_000usize, 1_000_000] {
        let x = data(n);
        let mut scratch = Vec::with_capacity(n);
        g.throughput(Throughput::Elements(n as u64));
        g.bench_with_input(BenchmarkId::new("median", n), &x, |b, x| {
            b.iter(|| median_with_scratch(black_box(x), &mut scratch))
        });
        g.bench_with_input(BenchmarkId::new("median_mad", n), &x, |b, x| {
            b.iter(|| median_mad_with_scratch(black_box(x), &mut scratch))
        });
        if n == 1_000_000 {
            g.sample_size(10);
        }
        g.bench_with_input(BenchmarkId::new("qn", n), &x, |b, x| b.iter(|| qn(black_box(x))));
    }
    g.finish();
}

criterion_group!(benches, robust);
criterion_main!(benches);

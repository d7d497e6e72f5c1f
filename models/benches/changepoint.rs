//! Criterion benchmarks of the change-point detectors.
//!
//! Data: the shared SplitMix64 + Box–Muller generator (seed 20240607), unit
//! normal noise around a level that changes every 1000 points; the same
//! series is produced by `bench/changepoint_reference.py`, which times
//! ruptures on it. PELT uses beta = 2 ln n (2 sigma^2 ln n with sigma = 1).
#![allow(missing_docs)]

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use std::hint::black_box;
use telltale_models::changepoint::{Cost, Cusum, ParamGuard, Pelt, Penalty, cusum};

/// SplitMix64 (Steele, Lea & Flood 2014), identical to the Python generator.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / 9_007_199_254_740_992.0)
    }
    fn normal(&mut self) -> f64 {
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

fn series(n: usize) -> Vec<f64> {
    let mut g = SplitMix64(20_240_607);
    (0..n).map(|i| ((i / 1000) * 7 % 5) as f64 * 1.5 + g.normal()).collect()
}

fn bench_pelt(c: &mut Criterion) {
    let mut group = c.benchmark_group("pelt_l2");
    group.sample_size(10);
    for n in [2_000usize, 10_000, 100_000] {
        let y = series(n);
        let p = Pelt::params(Cost::L2)
            .penalty(Penalty::Value(2.0 * (n as f64).ln()))
            .check()
            .expect("valid params");
        let seg = p.segment(&y).expect("segmentation");
        eprintln!(
            "pelt_l2/{n}: {} breakpoints, first {:?}",
            seg.breakpoints.len(),
            &seg.breakpoints[..seg.breakpoints.len().min(6)]
        );
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::from_parameter(n), &y, |b, y| {
            b.iter(|| p.segment(black_box(y)).expect("segmentation"))
        });
    }
    group.finish();
}

fn bench_cusum(c: &mut Criterion) {
    let mut group = c.benchmark_group("cusum");
    let n = 100_000usize;
    let y = series(n);
    let p = Cusum::params(0.0, 1.0).check().expect("valid params");
    group.throughput(Throughput::Elements(n as u64));
    group.bench_with_input(BenchmarkId::from_parameter(n), &y, |b, y| {
        b.iter(|| cusum(black_box(y), &p).expect("finite"))
    });
    group.finish();
}

criterion_group!(benches, bench_pelt, bench_cusum);
criterion_main!(benches);

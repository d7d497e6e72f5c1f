//! Criterion benchmarks for the trend tests (Mann–Kendall, Theil–Sen).
//!
//! The input is the same deterministic series that `bench/trend_reference.py`
//! builds for the Python reference timings: SplitMix64 seed 42, value
//! `y_i = 0.0005·i + u_i` with `u_i` uniform in [0, 1) rounded to 3 decimals
//! (so ties occur), time axis `t_i = i`.
#![allow(missing_docs)]

use criterion::{BenchmarkId, Criterion, criterion_group, criterion_main};
use std::hint::black_box;
use telltale_models::trend::{MannKendall, SerialCorrection, TheilSen};

fn splitmix_series(n: usize, seed: u64) -> Vec<f64> {
    let mut state = seed;
    (0..n)
        .map(|i| {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^= z >> 31;
            let u = (z >> 11) as f64 / (1u64 << 53) as f64;
            0.0005 * i as f64 + (u * 1000.0).round() / 1000.0
        })
        .collect()
}

fn bench_trend(c: &mut Criterion) {
    let classical = MannKendall::params().correction(SerialCorrection::None);
    let default = MannKendall::params();
    let sen = TheilSen::params();
    for n in [1_000usize, 10_000] {
        let y = splitmix_series(n, 42);
        let t: Vec<f64> = (0..n).map(|i| i as f64).collect();
        // same data as the Python side: its printed check value S (pymannkendall.original_test)
        let s_python = if n == 1_000 { 123_698 } else { 43_730_802 };
        assert_eq!(
            classical.test(&y).map(|r| r.s).ok(),
            Some(s_python),
            "bench data differ from bench/trend_reference.py"
        );
        c.bench_with_input(BenchmarkId::new("mann_kendall", n), &y, |b, y| {
            b.iter(|| classical.test(black_box(y)).map(|r| r.p_two_sided))
        });
        c.bench_with_input(BenchmarkId::new("mann_kendall_prewhitened", n), &y, |b, y| {
            b.iter(|| default.test(black_box(y)).map(|r| r.p_two_sided))
        });
        c.bench_with_input(BenchmarkId::new("theil_sen", n), &(&t, &y), |b, (t, y)| {
            b.iter(|| sen.fit(black_box(t), black_box(y)).map(|r| r.slope))
        });
        // what pymannkendall.original_test computes: S, Var(S), p and Sen's slope
        c.bench_with_input(BenchmarkId::new("mann_kendall_plus_sen", n), &(&t, &y), |b, (t, y)| {
            b.iter(|| {
                let r = classical.test(black_box(y)).map(|r| r.p_two_sided);
                let s = sen.fit(black_box(t), black_box(y)).map(|r| r.slope);
                (r, s)
            })
        });
    }
}

criterion_group!(benches, bench_trend);
criterion_main!(benches);

//! Diagnostic: per sensor and channel, the distribution of the calibrated
//! block values `u` of one asset over a span, and its episodes.
//!
//! `cargo run --release -p telltale-pipelines --example scan_debug -- HISTORY STORE ASSET FROM TO`

#![allow(clippy::unwrap_used, clippy::expect_used, reason = "a diagnostic tool")]

use telltale_models::baseline::{SensorSeries, align};
use telltale_models::verdict::{Channel, VerdictParams, block_u, evaluate_asset, sustained};
use telltale_pipelines::HistoryReader;
use telltale_pipelines::jobs::Store;
use telltale_pipelines::time::parse_time;

fn q(v: &mut [f64], p: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    v[((v.len() - 1) as f64 * p).round() as usize]
}

fn main() {
    let a: Vec<String> = std::env::args().collect();
    let (hist, store, asset) = (&a[1], &a[2], &a[3]);
    let from = parse_time(&a[4]).unwrap().timestamp_millis();
    let to = parse_time(&a[5]).unwrap().timestamp_millis();
    let p = VerdictParams::default();
    let st = Store::open(store).unwrap().read_baseline(asset).unwrap();
    let cal = st.calibration.clone().unwrap();
    let reader = HistoryReader::try_new(hist).unwrap().with_time_range(from, to);
    reader
        .for_each_asset(|h| -> Result<(), telltale_pipelines::Error> {
            if &h.asset != asset {
                return Ok(());
            }
            let b = &st.baseline;
            let empty = telltale_pipelines::SensorSeries::default();
            let series: Vec<SensorSeries<'_>> = st
                .sensors
                .iter()
                .zip(&b.sensors)
                .map(|(s, spec)| {
                    let x = h.sensor(&s.id).unwrap_or(&empty);
                    SensorSeries { ts_ms: &x.ts_ms, values: &x.value, good: &x.good, spec: *spec }
                })
                .collect();
            let f = align(&series, b.step_ms, Some(from), Some(to), b.params.reduce()).unwrap();
            let e = evaluate_asset(b, &cal, f.values.view(), f.origin_ms, &p).unwrap();
            println!("regimes {} occupancy {:?}", b.regimes.n_regimes(), b.regimes.occupancy());
            for (s, sen) in st.sensors.iter().enumerate() {
                let c = &cal.sensors[s];
                for ch in [Channel::Level, Channel::Resid, Channel::Texture] {
                    let mut u: Vec<f64> = (0..e.blocks.len())
                        .map(|k| block_u(&e.blocks, &cal, s, ch, k))
                        .filter(|x| x.is_finite())
                        .collect();
                    let cc = match ch {
                        Channel::Level => c.level,
                        Channel::Resid => c.resid,
                        _ => c.texture,
                    };
                    if u.is_empty() {
                        continue;
                    }
                    println!(
                        "{:<20} {:<8?} cal {:>8.3} {:>7.3} phi {:.2} | u q01 {:>7.2} q50 {:>7.2} q99 {:>7.2} n {}",
                        sen.id,
                        ch,
                        cc.map_or(f64::NAN, |x| x.center),
                        cc.map_or(f64::NAN, |x| x.scale),
                        cc.map_or(f64::NAN, |x| x.phi),
                        q(&mut u, 0.01),
                        q(&mut u, 0.5),
                        q(&mut u, 0.99),
                        u.len()
                    );
                }
                println!(
                    "{:<20} spikes/blk {:.3} silent {} frozen {}",
                    sen.id, c.spike_rate, c.max_silent_rows, c.max_frozen_rows
                );
            }
            for ep in &e.episodes {
                let last = e.blocks.len() - 1;
                println!(
                    "{:?} {:?} side {} onset {} det {} end {:?} stat {:.1} thr {:.1} mag {:.2} p {:.2e} sustained {:.2}",
                    ep.channel,
                    ep.sensor.map(|s| st.sensors[s].id.clone()),
                    ep.side,
                    ep.onset_block,
                    ep.detected_block,
                    ep.end_block,
                    ep.statistic,
                    ep.threshold,
                    ep.magnitude,
                    ep.p_value,
                    sustained(&e.blocks, &cal, ep, last)
                );
            }
            Ok(())
        })
        .unwrap();
}

//! Checks of the generator against its own data, each naming the physics or
//! convention it relies on.

#![allow(
    clippy::unwrap_used,
    reason = "test helpers outside #[test] functions panic on bad data by design"
)]

use arrow_array::cast::AsArray;
use arrow_array::types::{Float64Type, TimestampMillisecondType};
use arrow_array::{Array, DictionaryArray, StringArray, types::Int32Type};
use chrono::{DateTime, Utc};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use std::collections::{BTreeMap, BTreeSet};
use telltale_datasets::*;
use telltale_pipelines::record::{Class, Event, Mode};

fn small() -> FleetValidParams {
    FleetParams::small().check().unwrap()
}

fn ms(t: DateTime<Utc>) -> i64 {
    t.timestamp_millis()
}

fn find(plan: &FleetPlan, mode: Mode) -> (usize, Event) {
    let e = plan.events.iter().find(|e| e.mode == Some(mode)).unwrap().clone();
    let i = plan.assets.iter().position(|a| a.id == e.asset).unwrap();
    (i, e)
}

fn in_span(ts: i64, e: &Event) -> bool {
    ts >= ms(e.start) && e.end.is_none_or(|end| ts < ms(end))
}

#[test]
fn stuck_span_is_constant() {
    let p = small();
    let plan = plan_fleet(&p);
    let stuck: Vec<&Event> = plan.events.iter().filter(|e| e.mode == Some(Mode::Stuck)).collect();
    assert_eq!(stuck.len(), 2, "winding and flow");
    for e in stuck {
        let i = plan.assets.iter().position(|a| a.id == e.asset).unwrap();
        let data = generate_planned_asset(&p, &plan, i).unwrap();
        let s = data.sensor(e.sensor.as_deref().unwrap()).unwrap();
        let vals: Vec<f64> = s
            .ts_ms
            .iter()
            .zip(&s.values)
            .filter(|(t, _)| in_span(**t, e))
            .map(|(_, v)| *v)
            .collect();
        let grid = (ms(e.end.unwrap()) - ms(e.start)) / (i64::from(p.sample_interval_s()) * 1000);
        assert_eq!(vals.len() as i64, grid, "every stuck sample is reported");
        assert!(vals.windows(2).all(|w| w[0] == w[1]), "{e:?} not constant");
        // Outside the span the same sensor moves (it is not constant everywhere).
        let before: Vec<f64> = s
            .ts_ms
            .iter()
            .zip(&s.values)
            .filter(|(t, _)| **t < ms(e.start))
            .map(|(_, v)| *v)
            .collect();
        assert!(before.windows(2).any(|w| w[0] != w[1]));
    }
}

#[test]
fn dropout_span_has_no_rows_while_others_report() {
    let p = small();
    let plan = plan_fleet(&p);
    let (i, _) = find(&plan, Mode::Dropout);
    let data = generate_planned_asset(&p, &plan, i).unwrap();
    let drops: Vec<&Event> = data.events.iter().filter(|e| e.mode == Some(Mode::Dropout)).collect();
    assert_eq!(drops.len(), 2);
    for e in drops {
        let sensor = e.sensor.as_deref().unwrap();
        assert_eq!(
            data.sensor(sensor).unwrap().ts_ms.iter().filter(|t| in_span(**t, e)).count(),
            0
        );
        for other in data.sensors.iter().filter(|s| s.sensor != sensor) {
            let grid =
                (ms(e.end.unwrap()) - ms(e.start)) / (i64::from(p.sample_interval_s()) * 1000);
            assert_eq!(other.ts_ms.iter().filter(|t| in_span(**t, e)).count() as i64, grid);
        }
    }
}

#[test]
fn outage_silences_every_sensor_and_is_no_event() {
    // DESIGN.md section 5: every sensor silent is coverage, not a sensor fault.
    let p = small();
    let plan = plan_fleet(&p);
    assert_eq!(plan.outages.len(), 1);
    let o = &plan.outages[0];
    let i = plan.assets.iter().position(|a| a.id == o.asset).unwrap();
    let data = generate_planned_asset(&p, &plan, i).unwrap();
    for s in &data.sensors {
        assert!(!s.ts_ms.iter().any(|&t| t >= ms(o.start) && t < ms(o.end)), "{}", s.sensor);
        assert!(s.ts_ms.iter().any(|&t| t >= ms(o.end)));
    }
    assert!(
        !plan.events.iter().any(|e| e.asset == o.asset && e.class == Class::SensorFault),
        "an outage must not be labelled as a sensor fault"
    );
}

fn ols_slope(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
    sxy / sxx
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

#[test]
fn affinity_laws_hold_on_clean_running_spans() {
    // Pump affinity (similarity) laws for a fixed impeller at variable speed:
    // Q ~ n, H ~ n^2, P ~ n^3 (J. F. Gulich, Centrifugal Pumps, 2nd ed.,
    // Springer 2010, section 3.4; from memory). With constant voltage the
    // current follows power. Tolerances: 3% on the exponents, 5% robust spread
    // of the ratios (common practice, no source), against 1-2% sensor noise.
    let p = FleetParams::small().days(6).sample_interval_s(60).check().unwrap();
    let plan = plan_fleet(&p);
    assert!(!plan.clean_assets.is_empty());
    let mut checked = 0;
    for id in &plan.clean_assets {
        let i = plan.assets.iter().position(|a| &a.id == id).unwrap();
        let d = generate_planned_asset(&p, &plan, i).unwrap();
        let col = |s: &str| d.sensor(s).unwrap().values.clone();
        let (speed, flow, dis, suc, cur) = (
            col("speed"),
            col("flow"),
            col("discharge_pressure"),
            col("suction_pressure"),
            col("motor_current"),
        );
        let run: Vec<usize> = (0..speed.len()).filter(|&k| speed[k] > 0.0).collect();
        // The exponent estimates need many samples over a wide speed range.
        let (lo, hi) =
            run.iter().fold((f64::MAX, 0.0f64), |(a, b), &k| (a.min(speed[k]), b.max(speed[k])));
        if run.len() < 2000 || (hi / lo).ln() < 0.3 {
            continue;
        }
        let ls: Vec<f64> = run.iter().map(|&k| speed[k].ln()).collect();
        let lq: Vec<f64> = run.iter().map(|&k| flow[k].ln()).collect();
        let lh: Vec<f64> = run.iter().map(|&k| (dis[k] - suc[k]).ln()).collect();
        let li: Vec<f64> = run.iter().map(|&k| cur[k].ln()).collect();
        assert!((ols_slope(&ls, &lq) - 1.0).abs() < 0.03, "{id}: flow exponent");
        assert!((ols_slope(&ls, &lh) - 2.0).abs() < 0.06, "{id}: head exponent");
        assert!((ols_slope(&ls, &li) - 3.0).abs() < 0.09, "{id}: current exponent");
        for (name, ratio) in [
            ("flow/speed", run.iter().map(|&k| flow[k] / speed[k]).collect::<Vec<_>>()),
            ("head/speed^2", run.iter().map(|&k| (dis[k] - suc[k]) / speed[k].powi(2)).collect()),
            ("current/speed^3", run.iter().map(|&k| cur[k] / speed[k].powi(3)).collect()),
        ] {
            let m = median(ratio.clone());
            let mad = median(ratio.iter().map(|r| (r / m - 1.0).abs()).collect());
            assert!(1.4826 * mad < 0.05, "{id}: {name} spread {}", 1.4826 * mad);
        }
        checked += 1;
    }
    assert!(checked >= 1);
}

#[test]
fn every_class_and_mode_appears_in_the_demo_events() {
    let plan = plan_fleet(&FleetParams::demo().check().unwrap());
    for c in Class::ALL {
        assert!(plan.events.iter().any(|e| e.class == c), "class {c}");
        for &m in c.modes() {
            assert!(plan.events.iter().any(|e| e.class == c && e.mode == Some(m)), "mode {m}");
        }
    }
    for e in &plan.events {
        if let Some(m) = e.mode {
            assert_eq!(m.class(), e.class);
        }
    }
    // Two degradations end in a failure at their end, each followed by a repair.
    let failures: Vec<&Event> = plan.events.iter().filter(|e| e.class == Class::Failure).collect();
    assert!(failures.len() >= 2);
    for f in failures {
        assert!(f.sensor.is_none() && f.end.is_none());
        assert!(plan.events.iter().any(|e| e.asset == f.asset
            && e.mode == Some(Mode::Degradation)
            && e.end == Some(f.start)));
        assert!(plan.events.iter().any(|e| e.asset == f.asset
            && e.class == Class::Maintenance
            && e.start == f.start
            && e.end.is_some()));
    }
    // Maintenance without any fault on the same asset exists.
    assert!(plan.events.iter().any(|m| m.class == Class::Maintenance
        && !plan.events.iter().any(|e| e.asset == m.asset
            && matches!(e.class, Class::SensorFault | Class::EquipmentFault | Class::Failure))));
    // Common mode: one event per pump of the heatwave site.
    let hw: BTreeSet<&str> = plan
        .events
        .iter()
        .filter(|e| e.mode == Some(Mode::CommonMode) && e.note.contains("heatwave"))
        .map(|e| e.asset.as_str())
        .collect();
    assert_eq!(hw.len(), 10);
    assert!(plan.clean_assets.len() >= 3);
}

#[test]
fn same_seed_same_data_other_seed_other_data() {
    let p = small();
    let a = generate_asset(&p, 3).unwrap();
    let b = generate_asset(&p, 3).unwrap();
    assert_eq!(a, b);
    let q = FleetParams::small().seed(8).check().unwrap();
    let c = generate_asset(&q, 3).unwrap();
    assert_ne!(a.sensors, c.sensors);
}

#[test]
fn fleet_file_equals_per_asset_generation_in_any_order() {
    let p = FleetParams::small().days(3).fit_days(1).check().unwrap();
    let dir = tempfile::tempdir().unwrap();
    let summary = generate_fleet(&p, dir.path()).unwrap();
    let file = std::fs::File::open(&summary.history).unwrap();
    let reader = ParquetRecordBatchReaderBuilder::try_new(file).unwrap().build().unwrap();
    type Key = (String, String);
    let mut got: BTreeMap<Key, (Vec<i64>, Vec<f64>)> = BTreeMap::new();
    let mut order: Vec<Key> = Vec::new();
    let mut rows = 0u64;
    for batch in reader {
        let batch = batch.unwrap();
        let dict = |name: &str| -> Vec<String> {
            let d = batch.column_by_name(name).unwrap();
            let d = d.as_any().downcast_ref::<DictionaryArray<Int32Type>>().unwrap();
            let v = d.values().as_any().downcast_ref::<StringArray>().unwrap();
            d.keys().iter().map(|k| v.value(k.unwrap() as usize).to_string()).collect()
        };
        let (asset, sensor) = (dict("asset"), dict("sensor"));
        let ts =
            batch.column_by_name("ts").unwrap().as_primitive::<TimestampMillisecondType>().clone();
        let val = batch.column_by_name("value").unwrap().as_primitive::<Float64Type>().clone();
        for r in 0..batch.num_rows() {
            let key = (asset[r].clone(), sensor[r].clone());
            if order.last() != Some(&key) {
                order.push(key.clone());
            }
            let e = got.entry(key).or_default();
            e.0.push(ts.value(r));
            e.1.push(if val.is_null(r) { f64::NAN } else { val.value(r) });
            rows += 1;
        }
    }
    assert_eq!(rows, summary.rows);
    // Clustered by asset, then sensor: each (asset, sensor) run appears once, sorted.
    let mut sorted = order.clone();
    sorted.sort();
    assert_eq!(order, sorted);
    // Generating the assets one by one, in reverse order, gives the same rows.
    for i in (0..summary.assets.len()).rev() {
        let d = generate_asset(&p, i).unwrap();
        for s in &d.sensors {
            let (ts, v) = &got[&(d.info.id.clone(), s.sensor.to_string())];
            assert!(ts.windows(2).all(|w| w[0] < w[1]));
            assert_eq!(ts, &s.ts_ms);
            assert_eq!(v, &s.values);
        }
    }
}

#[test]
fn out_of_range_readings_fall_outside_the_registry_range_and_nothing_else_does() {
    // DESIGN.md 4.2: readings outside the range (bounds included) are out_of_range.
    let p = small();
    let plan = plan_fleet(&p);
    let mut seen = 0;
    for i in 0..plan.assets.len() {
        let d = generate_planned_asset(&p, &plan, i).unwrap();
        let infos = sensor_infos(d.info.group);
        for (s, info) in d.sensors.iter().zip(&infos) {
            assert_eq!(s.sensor, info.id);
            let oor: Vec<&Event> = d
                .events
                .iter()
                .filter(|e| {
                    e.mode == Some(Mode::OutOfRange) && e.sensor.as_deref() == Some(s.sensor)
                })
                .collect();
            for (t, v) in s.ts_ms.iter().zip(&s.values) {
                let outside = *v < info.range.0 || *v > info.range.1;
                let labelled = oor.iter().any(|e| in_span(*t, e));
                assert_eq!(outside, labelled, "{} {} at {t}: {v}", d.info.id, s.sensor);
                seen += usize::from(outside);
            }
        }
    }
    assert!(seen > 0);
}

#[test]
fn fit_and_control_spans_are_clean() {
    for params in [FleetParams::demo(), FleetParams::small(), FleetParams::benchmark()] {
        let plan = plan_fleet(&params.check().unwrap());
        let tl = plan.timeline;
        assert_eq!(tl.fit.end, tl.scan.start);
        assert_eq!(tl.control.start, tl.scan.start);
        for e in &plan.events {
            assert!(!tl.fit.overlaps(e.start, e.end), "{e:?}");
            assert!(!tl.control.overlaps(e.start, e.end), "{e:?}");
            assert!(e.start < tl.scan.end);
        }
        for o in &plan.outages {
            assert!(o.start >= tl.control.end);
        }
    }
}

#[test]
fn fit_span_data_is_clean_of_the_injected_signatures() {
    // The fit span carries no injected case: no gaps, no out-of-range, every sample present.
    let p = small();
    let plan = plan_fleet(&p);
    let fit_end = ms(plan.timeline.fit.end);
    let per = i64::from(p.sample_interval_s()) * 1000;
    let want = (fit_end - ms(plan.timeline.fit.start)) / per;
    for i in 0..plan.assets.len() {
        let d = generate_planned_asset(&p, &plan, i).unwrap();
        for s in &d.sensors {
            assert_eq!(s.ts_ms.iter().filter(|&&t| t < fit_end).count() as i64, want);
        }
    }
}

#[test]
fn registry_has_every_sensor_with_role_and_range() {
    let p = small();
    let dir = tempfile::tempdir().unwrap();
    let s = generate_fleet(&p, dir.path()).unwrap();
    let text = std::fs::read_to_string(&s.registry).unwrap();
    let doc: toml::Table = text.parse().unwrap();
    let groups = doc["group"].as_table().unwrap();
    for (gid, g) in groups {
        let sensors = g["sensors"].as_array().unwrap();
        assert_eq!(sensors.len(), 10, "{gid}");
        for sensor in sensors {
            let t = sensor.as_table().unwrap();
            let role = t["role"].as_str().unwrap();
            assert!(role == "context" || role == "condition");
            let r = t["range"].as_array().unwrap();
            let (lo, hi) = (r[0].as_float().unwrap(), r[1].as_float().unwrap());
            assert!(lo < hi);
            assert!(t["unit"].as_str().is_some());
        }
    }
    let assets = doc["asset"].as_array().unwrap();
    assert_eq!(assets.len(), p.asset_count());
    for a in assets {
        let a = a.as_table().unwrap();
        assert!(groups.contains_key(a["group"].as_str().unwrap()));
        assert!(a["site"].as_str().is_some());
        let c = a["criticality"].as_integer().unwrap();
        assert!((1..=5).contains(&c));
    }
    assert_eq!(text, registry_toml(&p));
}

#[test]
fn bearing_degradation_raises_temperature_and_vibration_then_repair_restores() {
    // One physical cause seen in two related sensors (METHODS.md section 2):
    // DE bearing temperature above ambient and vibration both rise before the
    // failure, and return to baseline after the repair.
    let p = FleetParams::small().days(10).fit_days(3).check().unwrap();
    let plan = plan_fleet(&p);
    let i = (0..plan.assets.len()).find(|&i| plan.case(i) == Some(Case::BearingFailure)).unwrap();
    let d = generate_planned_asset(&p, &plan, i).unwrap();
    let deg = d.events.iter().find(|e| e.mode == Some(Mode::Degradation)).unwrap();
    let rep = d.events.iter().find(|e| e.class == Class::Maintenance).unwrap();
    let (t0, tf, tr) = (ms(deg.start), ms(deg.end.unwrap()), ms(rep.end.unwrap()));
    let speed = &d.sensor("speed").unwrap().values;
    let ts = &d.sensor("speed").unwrap().ts_ms;
    let de = &d.sensor("bearing_de_temp").unwrap().values;
    let amb = &d.sensor("ambient_temp").unwrap().values;
    let vib = &d.sensor("vibration").unwrap().values;
    let mean_over = |lo: i64, hi: i64| {
        let ks: Vec<usize> =
            (0..ts.len()).filter(|&k| ts[k] >= lo && ts[k] < hi && speed[k] > 0.0).collect();
        let n = ks.len() as f64;
        (
            ks.iter().map(|&k| de[k] - amb[k]).sum::<f64>() / n,
            ks.iter().map(|&k| vib[k]).sum::<f64>() / n,
        )
    };
    let fit_end = ms(plan.timeline.fit.end);
    let (base_t, base_v) = mean_over(ms(plan.timeline.fit.start), fit_end);
    let late = tf - (tf - t0) / 5;
    let (late_t, late_v) = mean_over(late, tf);
    let (after_t, after_v) = mean_over(tr + 6 * 3_600_000, ms(plan.timeline.scan.end));
    assert!(late_t - base_t > 6.0, "temperature rise {}", late_t - base_t);
    assert!(late_v - base_v > 2.5, "vibration rise {}", late_v - base_v);
    assert!((after_t - base_t).abs() < 3.0, "after repair {}", after_t - base_t);
    assert!((after_v - base_v).abs() < 0.5, "after repair {}", after_v - base_v);
}

#[test]
fn stopped_pump_cools_towards_ambient_with_a_first_order_lag() {
    // Newton's law of cooling (a first-order lag): after a stop the DE bearing's
    // excess over ambient decays as exp(-t / tau), tau = 45 min in the model,
    // so after 45 min about 37% of it is left. Band 25-50% for noise and the
    // ambient's own movement (common practice, no source).
    let p = FleetParams::small().days(9).fit_days(8).sample_interval_s(60).check().unwrap();
    let plan = plan_fleet(&p);
    let mut ratios = Vec::new();
    for d in plan.assets.iter().take(8).map(|a| generate_planned_asset(&p, &plan, a.index).unwrap())
    {
        let fit_end = ms(plan.timeline.fit.end);
        let n_fit = d.sensor("speed").unwrap().ts_ms.iter().filter(|&&t| t < fit_end).count();
        let speed = &d.sensor("speed").unwrap().values[..n_fit];
        let de = &d.sensor("bearing_de_temp").unwrap().values;
        let amb = &d.sensor("ambient_temp").unwrap().values;
        for k in 30..speed.len().saturating_sub(50) {
            let stop = speed[k - 1] > 0.0 && speed[k] == 0.0;
            let stays = (k..k + 45).all(|j| speed[j] == 0.0);
            let was_running = (k - 30..k).all(|j| speed[j] > 0.0);
            if stop && stays && was_running {
                let x0 = de[k - 1] - amb[k - 1];
                let x45 = de[k + 44] - amb[k + 44];
                ratios.push(x45 / x0);
            }
        }
    }
    assert!(!ratios.is_empty(), "no clean stop found");
    for r in ratios {
        assert!((0.25..0.50).contains(&r), "decay ratio {r}");
    }
}

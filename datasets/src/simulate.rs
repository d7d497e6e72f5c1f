//! The physics of one pump, sample by sample.
//!
//! Site level (shared by every pump of a station, one random stream each):
//! - ambient: seasonal trend + daily cycle (peak 15:00 UTC) + multi-day
//!   weather fronts (Ornstein-Uhlenbeck, tau 2.5 d, shared by all sites) + a
//!   local part (tau 1.5 d) + a short-term wander (tau 1 h) + the heatwave, if
//!   the site has one;
//! - demand: a weekday/weekend daily profile times a slow random factor
//!   (boosters), or a night-weighted profile (raw-water pumps fill the works on
//!   the cheap night tariff);
//! - suction pressure: reservoir / intake level, slow random, plus the supply
//!   change, if any;
//! - how many pumps of the group run: demand divided by a pump's capacity, with
//!   hysteresis; the lead pump rotates weekly (Monday 06:00), the others stand by.
//!
//! Pump level, with the speed fraction `s = n / n_rated` set by the drive so the
//! running pumps share the demand, the pump affinity laws
//! (J. F. Gülich, *Centrifugal Pumps*, 2nd ed., Springer 2010, section 3.4):
//!
//! ```text
//! Q = Q_r s,   H = p_d - p_s = H_r s^2,   P ~ s^3  =>  I = I_r s^3   (constant voltage)
//! T' = (T_target - T) / tau,  T_target = T_amb + k * load      (first-order thermal lags)
//! ```
//!
//! A stopped pump reads speed 0, flow 0, current 0, vibration near 0, and its
//! temperatures decay to ambient. Measurement noise is AR(1) (phi 0.6, 0.8 for
//! temperatures), scaled by the noise multiplier; readings saturate at the
//! instrument range and are quantized to the sensor's resolution.

use crate::layout::{self, AssetInfo, PumpGroup, SENSORS, sid};
use crate::plan::{FleetPlan, Grid, Injection, SensorFaultKind, SitePlan, WearKind};
use crate::seed::{self, stream_rng};
use chrono::Datelike;
use rand::Rng;
use rand_distr::StandardNormal;
use std::f64::consts::PI;
use telltale_pipelines::record::Event;

/// One sensor's readings: rows present only (dropouts and outages have no rows).
#[derive(Debug, Clone, PartialEq)]
pub struct SensorSeries {
    /// Sensor id.
    pub sensor: &'static str,
    /// Epoch milliseconds, increasing.
    pub ts_ms: Vec<i64>,
    /// Readings, same length as `ts_ms`.
    pub values: Vec<f64>,
}

/// One asset's generated history and its truth.
#[derive(Debug, Clone, PartialEq)]
pub struct AssetData {
    /// The asset.
    pub info: AssetInfo,
    /// The ten sensors, in id order.
    pub sensors: Vec<SensorSeries>,
    /// The asset's ground-truth events (site-wide ones included).
    pub events: Vec<Event>,
}

impl AssetData {
    /// The series of sensor `id`, if the asset has it.
    pub fn sensor(&self, id: &str) -> Option<&SensorSeries> {
        self.sensors.iter().find(|s| s.sensor == id)
    }

    /// Rows over all sensors.
    pub fn rows(&self) -> usize {
        self.sensors.iter().map(|s| s.ts_ms.len()).sum()
    }
}

fn normal<R: Rng>(rng: &mut R) -> f64 {
    rng.sample::<f64, _>(StandardNormal)
}

/// Stationary Ornstein-Uhlenbeck process sampled every `dt_s`: unit variance times `sd`.
struct Ou {
    a: f64,
    b: f64,
    x: f64,
}

impl Ou {
    fn new<R: Rng>(tau_s: f64, dt_s: f64, sd: f64, rng: &mut R) -> Self {
        let a = (-dt_s / tau_s).exp();
        Self { a, b: sd * (1.0 - a * a).sqrt(), x: sd * normal(rng) }
    }
    fn step<R: Rng>(&mut self, rng: &mut R) -> f64 {
        let v = self.x;
        self.x = self.a * self.x + self.b * normal(rng);
        v
    }
}

/// Raised-cosine bump on `[s, e)`: 0 outside, 1 on the plateau, ramps of 20% each side.
fn bump(k: usize, s: usize, e: usize) -> f64 {
    if k < s || k >= e {
        return 0.0;
    }
    let ramp = ((e - s) as f64 * 0.2).max(1.0);
    let up = (k - s) as f64;
    let down = (e - k) as f64;
    let r = up.min(down);
    if r >= ramp { 1.0 } else { 0.5 * (1.0 - (PI * r / ramp).cos()) }
}

fn gauss(h: f64, mu: f64, w: f64) -> f64 {
    let d = h - mu;
    (-0.5 * d * d / (w * w)).exp()
}

/// Hour of day (UTC, fractional) and whether the day is a weekend, for sample `k`.
fn clock(g: &Grid, start_weekday: u32, k: usize) -> (f64, bool) {
    let t = k as i64 * g.dt_s;
    let day = t.div_euclid(86_400);
    let hour = t.rem_euclid(86_400) as f64 / 3600.0;
    let wd = (i64::from(start_weekday) + day).rem_euclid(7);
    (hour, wd >= 5)
}

/// What a site gives one of its groups.
struct SiteEnv {
    ambient: Vec<f64>,
    demand_m3h: Vec<f64>,
    suction_bar: Vec<f64>,
    running_count: Vec<u16>,
}

fn site_env(p: &FleetPlan, seed: u64, a: &AssetInfo, site: &SitePlan) -> SiteEnv {
    let g = &p.grid;
    let n = g.n;
    let dt = g.dt_s as f64;
    let wd0 = p.timeline.fit.start.weekday().num_days_from_monday();
    let stream = |c: u64| stream_rng(seed, seed::SITE, a.site_index as u64 * 8 + c);
    let hw = |k: usize| site.heatwave.map_or(0.0, |(s, e, amp)| amp * bump(k, s, e));
    let hw_share = |k: usize| site.heatwave.map_or(0.0, |(s, e, _)| bump(k, s, e));

    // Weather fronts are regional (shared by every site of the utility), with
    // a smaller local part; the short-term wander is local.
    let mut regional_rng = stream_rng(seed, seed::SITE, u64::MAX);
    let mut front = Ou::new(2.5 * 86_400.0, dt, 2.2, &mut regional_rng);
    let mut rng = stream(0);
    let mut local = Ou::new(1.5 * 86_400.0, dt, 0.8, &mut rng);
    let mut wander = Ou::new(3600.0, dt, 0.4, &mut rng);
    let ambient: Vec<f64> = (0..n)
        .map(|k| {
            let (h, _) = clock(g, wd0, k);
            let day = k as f64 / g.samples_per_day();
            16.0 + 0.05 * day
                + 4.0 * (2.0 * PI * (h - 15.0) / 24.0).cos()
                + front.step(&mut regional_rng)
                + local.step(&mut rng)
                + wander.step(&mut rng)
                + hw(k)
        })
        .collect();

    let r = a.group.rating();
    let cap_pumps = (a.group_size.max(2) - 1) as f64;
    let booster = a.group == PumpGroup::Booster;
    let mut rng = stream(if booster { 1 } else { 2 });
    let mut slow = Ou::new(if booster { 6.0 } else { 12.0 } * 3600.0, dt, 0.05, &mut rng);
    let mut frac = Vec::with_capacity(n);
    let demand_m3h: Vec<f64> = (0..n)
        .map(|k| {
            let (h, weekend) = clock(g, wd0, k);
            let f = if booster {
                let shape = if weekend {
                    0.45 + 0.40 * gauss(h, 9.5, 2.0)
                        + 0.30 * gauss(h, 19.0, 2.5)
                        + 0.15 * gauss(h, 13.5, 3.0)
                } else {
                    0.45 + 0.50 * gauss(h, 7.5, 1.5)
                        + 0.35 * gauss(h, 19.0, 2.0)
                        + 0.15 * gauss(h, 13.0, 3.0)
                };
                shape * (1.0 + slow.step(&mut rng)) * (1.0 + 0.12 * hw_share(k))
            } else {
                let night = 0.5 * (1.0 + (2.0 * PI * (h - 2.0) / 24.0).cos());
                (0.70 + 0.25 * night) * (1.0 + slow.step(&mut rng)) * (1.0 + 0.06 * hw_share(k))
            };
            frac.push(f);
            f.clamp(0.2, 1.4) * r.flow_m3h * cap_pumps * if booster { 0.72 } else { 0.75 }
        })
        .collect();

    let mut rng = stream(if booster { 3 } else { 4 });
    let mut level = Ou::new(if booster { 1.0 } else { 2.0 } * 86_400.0, dt, 1.0, &mut rng);
    let supply = site.supply.filter(|s| s.3 == a.group);
    let suction_bar: Vec<f64> = (0..n)
        .map(|k| {
            let base = if booster {
                r.suction_bar + 0.12 * level.step(&mut rng) - 0.15 * (frac[k] - 0.6)
            } else {
                r.suction_bar + 0.04 * level.step(&mut rng)
            };
            base + supply.map_or(0.0, |(s, e, d, _)| d * bump(k, s, e))
        })
        .collect();

    // Pumps needed, with hysteresis so that pumps do not cycle on noise.
    let per_pump = 0.95 * r.flow_m3h;
    let m = a.group_size.max(1) as u16;
    let mut running =
        ((demand_m3h.first().copied().unwrap_or(0.0) / per_pump).ceil() as u16).clamp(1, m);
    let running_count = demand_m3h
        .iter()
        .map(|&q| {
            let need = q / per_pump;
            if need > f64::from(running) && running < m {
                running += 1;
            } else if running > 1 && need < 0.85 * f64::from(running - 1) {
                running -= 1;
            }
            running
        })
        .collect();
    SiteEnv { ambient, demand_m3h, suction_bar, running_count }
}

/// Wear level of `kind` at sample `k`.
fn wear(inj: &[Injection], kind: WearKind, k: usize) -> f64 {
    let mut w = 0.0;
    for i in inj {
        if let Injection::Wear { kind: wk, start, end, severity, reset } = *i {
            if wk != kind || k < start {
                continue;
            }
            if k < end {
                let x = (k - start) as f64 / (end - start) as f64;
                w += severity * x * x;
            } else if reset.is_some_and(|r| k < r) {
                w += severity;
            }
        }
    }
    w
}

/// Simulate asset `index` of `plan` (fleet seed `seed`).
pub(crate) fn simulate(
    plan: &FleetPlan,
    seed: u64,
    noise_multiplier: f64,
    index: usize,
) -> AssetData {
    let a = &plan.assets[index];
    let ap = &plan.asset_plans[index];
    let site = &plan.sites[a.site_index];
    let g = &plan.grid;
    let n = g.n;
    let dt = g.dt_s as f64;
    let env = site_env(plan, seed, a, site);
    let mut rng = stream_rng(seed, seed::ASSET, index as u64);
    simulate_pump(plan, a, &ap.injections, &env, noise_multiplier, &mut rng, dt, n).into_asset_data(
        a,
        g,
        &ap.injections,
        &ap.events,
        &mut rng,
    )
}

struct Raw {
    values: Vec<Vec<f64>>,
}

#[expect(clippy::too_many_arguments, reason = "internal step with one caller")]
fn simulate_pump<R: Rng>(
    plan: &FleetPlan,
    a: &AssetInfo,
    inj: &[Injection],
    env: &SiteEnv,
    noise_multiplier: f64,
    rng: &mut R,
    dt: f64,
    n: usize,
) -> Raw {
    let g = &plan.grid;
    let r = a.group.rating();
    let wd0 = plan.timeline.fit.start.weekday().num_days_from_monday();
    // Per-pump spread: no two pumps are identical.
    let qc = 1.0 + 0.03 * normal(rng);
    let hc = 1.0 + 0.03 * normal(rng);
    let ic = 1.0 + 0.04 * normal(rng);
    let kde = 1.0 + 0.08 * normal(rng);
    let knde = 1.0 + 0.08 * normal(rng);
    let kw = 1.0 + 0.08 * normal(rng);
    let vib0 = 1.2 + 0.8 * rng.random::<f64>();
    let amb_off = 1.5 * rng.random::<f64>();

    let alpha = |tau_min: f64| 1.0 - (-dt / (tau_min * 60.0)).exp();
    let (aw_run, aw_stop) = (alpha(20.0), alpha(50.0));
    let (ade_run, ade_stop) = (alpha(35.0), alpha(45.0));
    let (anw_run, anw_stop) = (alpha(40.0), alpha(50.0));

    // Measurement noise: AR(1) per sensor, stationary sd sigma.
    let nm = noise_multiplier;
    let sigma: [f64; 10] = [
        0.15,                 // ambient
        0.12,                 // bearing DE
        0.12,                 // bearing NDE
        0.015,                // discharge
        0.012 * r.flow_m3h,   // flow
        0.005 * r.current_a,  // current
        0.0007 * r.speed_rpm, // speed
        0.008,                // suction
        1.0,                  // vibration: scaled by level below
        0.25,                 // winding
    ];
    let phi: [f64; 10] = [0.8, 0.8, 0.8, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.8];
    let innov: Vec<f64> = phi.iter().map(|p| (1.0 - p * p).sqrt()).collect();
    let mut e: [f64; 10] = [0.0; 10];
    for x in &mut e {
        *x = normal(rng);
    }

    let setpoint: Option<(usize, f64)> = inj.iter().find_map(|i| match *i {
        Injection::Setpoint { start, factor } => Some((start, factor)),
        _ => None,
    });
    let night_only = inj.iter().find_map(|i| match *i {
        Injection::NightOnly { start } => Some(start),
        _ => None,
    });
    let misalign = inj.iter().find_map(|i| match *i {
        Injection::Misalign { start } => Some(start),
        _ => None,
    });
    let downtime: Vec<(usize, usize)> = inj
        .iter()
        .filter_map(|i| match *i {
            Injection::Downtime { start, end } => Some((start, end)),
            _ => None,
        })
        .collect();
    let has_wear =
        |kind| inj.iter().any(|i| matches!(i, Injection::Wear { kind: k, .. } if *k == kind));
    let (wb_on, ww_on, wi_on) =
        (has_wear(WearKind::Bearing), has_wear(WearKind::Winding), has_wear(WearKind::Impeller));

    let mut values: Vec<Vec<f64>> = (0..SENSORS.len()).map(|_| Vec::with_capacity(n)).collect();
    let (mut tw, mut tde, mut tnde) = (f64::NAN, f64::NAN, f64::NAN);
    let m = a.group_size.max(1) as i64;
    let week_s = 7 * 86_400;
    for k in 0..n {
        let (hour, _) = clock(g, wd0, k);
        let t_s = k as i64 * g.dt_s;
        let rot = (t_s - 6 * 3600).div_euclid(week_s).rem_euclid(m);
        let order = (a.slot as i64 - rot).rem_euclid(m);
        let n_run = env.running_count[k];
        let mut running = order < i64::from(n_run);
        let mut s = (env.demand_m3h[k] / f64::from(n_run.max(1)) / r.flow_m3h).clamp(0.55, 1.0);
        if night_only.is_some_and(|st| k >= st) {
            running = !(6.0..22.0).contains(&hour);
        }
        if let Some((st, f)) = setpoint
            && k >= st
        {
            s = (s * f).min(1.1);
        }
        if downtime.iter().any(|&(d0, d1)| k >= d0 && k < d1) {
            running = false;
        }
        let wb = if wb_on { wear(inj, WearKind::Bearing, k) } else { 0.0 };
        let ww = if ww_on { wear(inj, WearKind::Winding, k) } else { 0.0 };
        let wi = if wi_on { wear(inj, WearKind::Impeller, k) } else { 0.0 };
        let mis = if misalign.is_some_and(|st| k >= st) { 1.0 } else { 0.0 };

        let amb = env.ambient[k] + amb_off;
        let suction_site = env.suction_bar[k];
        let (speed, flow, current, head, suction, vib);
        let (tgt_w, tgt_de, tgt_nde, aw, ade, anw);
        if running {
            let s2 = s * s;
            let load = s2 * s;
            speed = r.speed_rpm * s;
            flow = r.flow_m3h * qc * s;
            head = r.head_bar * hc * s2 * (1.0 - 0.10 * wi);
            current = r.current_a * ic * load * (1.0 + 0.07 * wi);
            suction = suction_site - 0.04 * s2;
            tgt_w = amb + (6.0 + 58.0 * load) * kw * (1.0 + 0.8 * ww);
            tgt_de = amb + (10.0 + 22.0 * s2) * kde + 16.0 * wb + 4.0 * mis;
            tgt_nde = amb + (8.0 + 16.0 * s2) * knde + 3.0 * wb + 6.0 * ww + 1.5 * mis;
            vib = vib0 * (0.45 + 0.55 * s2) + 5.5 * wb + 2.0 * mis * s2 + 0.4 * wi;
            (aw, ade, anw) = (aw_run, ade_run, anw_run);
        } else {
            (speed, flow, current, head) = (0.0, 0.0, 0.0, 0.0);
            suction = suction_site;
            (tgt_w, tgt_de, tgt_nde) = (amb, amb, amb);
            vib = 0.04;
            (aw, ade, anw) = (aw_stop, ade_stop, anw_stop);
        }
        if k == 0 {
            (tw, tde, tnde) = (tgt_w, tgt_de, tgt_nde);
        } else {
            tw += (tgt_w - tw) * aw;
            tde += (tgt_de - tde) * ade;
            tnde += (tgt_nde - tnde) * anw;
        }

        for (j, x) in e.iter_mut().enumerate() {
            *x = phi[j] * *x + innov[j] * normal(rng);
        }
        let noise = |j: usize| nm * sigma[j] * e[j];
        let on = if running { 1.0 } else { 0.0 };
        values[sid::AMBIENT].push(amb + noise(sid::AMBIENT));
        values[sid::BEARING_DE].push(tde + noise(sid::BEARING_DE));
        values[sid::BEARING_NDE].push(tnde + noise(sid::BEARING_NDE));
        values[sid::DISCHARGE].push(suction + head + noise(sid::DISCHARGE));
        values[sid::FLOW].push(flow + on * noise(sid::FLOW));
        values[sid::CURRENT].push(current + on * noise(sid::CURRENT));
        values[sid::SPEED].push(speed + on * noise(sid::SPEED));
        values[sid::SUCTION].push(suction + noise(sid::SUCTION));
        let vib_sd = if running { 0.04 + 0.03 * vib } else { 0.01 };
        values[sid::VIBRATION].push(vib + nm * vib_sd * e[sid::VIBRATION]);
        values[sid::WINDING].push(tw + noise(sid::WINDING));
    }
    Raw { values }
}

impl Raw {
    fn into_asset_data<R: Rng>(
        mut self,
        a: &AssetInfo,
        g: &Grid,
        inj: &[Injection],
        events: &[Event],
        rng: &mut R,
    ) -> AssetData {
        let infos = layout::sensor_infos(a.group);
        let n = g.n;
        let per_day = g.samples_per_day();
        // Instruments saturate at their range.
        for (v, info) in self.values.iter_mut().zip(&infos) {
            for x in v.iter_mut() {
                *x = x.clamp(info.range.0, info.range.1);
            }
        }
        let mut present: Vec<Vec<bool>> = vec![vec![true; n]; SENSORS.len()];
        let mut oor: Vec<(usize, usize, usize)> = Vec::new();
        for i in inj {
            match *i {
                Injection::Outage { start, end } => {
                    for p in &mut present {
                        p[start..end].fill(false);
                    }
                }
                Injection::Sensor { sensor, kind, start, end } => {
                    let (lo, hi) = infos[sensor].range;
                    let v = &mut self.values[sensor];
                    match kind {
                        SensorFaultKind::Bias(b) => v[start..end].iter_mut().for_each(|x| *x += b),
                        SensorFaultKind::DriftPerDay(r) => {
                            for (j, x) in v[start..end].iter_mut().enumerate() {
                                *x += r * j as f64 / per_day;
                            }
                        }
                        SensorFaultKind::Stuck => {
                            let held = v[start.saturating_sub(1)];
                            v[start..end].fill(held);
                        }
                        SensorFaultKind::Spikes { rate, lo: a0, hi: a1 } => {
                            for x in &mut v[start..end] {
                                if rng.random::<f64>() < rate {
                                    *x += a0 + (a1 - a0) * rng.random::<f64>();
                                }
                            }
                        }
                        SensorFaultKind::Noise(sd) => {
                            for x in &mut v[start..end] {
                                *x += sd * normal(rng);
                            }
                        }
                        SensorFaultKind::Dropout => present[sensor][start..end].fill(false),
                        SensorFaultKind::OutOfRange => oor.push((sensor, start, end)),
                    }
                    if !matches!(kind, SensorFaultKind::OutOfRange) {
                        v[start..end].iter_mut().for_each(|x| *x = x.clamp(lo, hi));
                    }
                }
                _ => {}
            }
        }
        for (sensor, start, end) in oor {
            let (lo, hi) = infos[sensor].range;
            // An open-circuit probe reads a quarter-span above the top of its range.
            let over = hi + 0.25 * (hi - lo);
            for x in &mut self.values[sensor][start..end] {
                *x = over + 0.5 * normal(rng);
            }
        }
        let sensors = self
            .values
            .into_iter()
            .zip(present)
            .zip(SENSORS.iter())
            .map(|((v, p), d)| {
                let q = d.resolution;
                let rows = p.iter().filter(|&&b| b).count();
                let mut ts_ms = Vec::with_capacity(rows);
                let mut values = Vec::with_capacity(rows);
                for (k, (x, keep)) in v.into_iter().zip(p).enumerate() {
                    if keep {
                        ts_ms.push(g.ts_ms(k));
                        values.push((x / q).round() * q);
                    }
                }
                SensorSeries { sensor: d.id, ts_ms, values }
            })
            .collect();
        AssetData { info: a.clone(), sensors, events: events.to_vec() }
    }
}

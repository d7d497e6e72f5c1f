//! The fleet plan: the time line (fit, control and scan spans), which case is
//! injected into which asset and when, and the ground-truth events
//! (DESIGN.md 4.3) that describe exactly where the truth lies.
//!
//! ```text
//! start                fit end   control end                                  end
//!   |---- fit (clean) ----|-- control --|-------- event window (cases) ---------|
//!                         |------------------- scan ----------------------------|
//! ```
//!
//! Every case starts at or after the end of the control span, so the fit span
//! and the control span are clean for every asset (the control span is a
//! fleet-wide false-alarm control inside the scan). Case times are fractions
//! of the event window, rounded to the sampling grid; hour-long work
//! (maintenance, outages) is capped at a few percent of the window on short
//! fleets.
//!
//! Labelling conventions:
//! - `sensor_fault` events name the sensor; `process_change` and
//!   `equipment_fault` events are asset-level (empty sensor) and the note lists
//!   the sensors that show the change.
//! - `end` is empty for open-ended changes (still present at the end of the
//!   data) and for `failure` (a point event).
//! - A whole-asset outage (every sensor silent) is not an event: it is listed
//!   in [`FleetPlan::outages`] as a data-coverage fact.

use crate::layout::{self, AssetInfo, PumpGroup, SENSORS, sid};
use crate::params::{FaultMix, FleetValidParams};
use crate::seed::{self, stream_rng};
use chrono::{DateTime, Utc};
use rand::Rng;
use rand::seq::SliceRandom;
use telltale_pipelines::record::{Class, Event, Mode};

/// A half-open time span `[start, end)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TimeSpan {
    /// First instant inside the span.
    pub start: DateTime<Utc>,
    /// First instant after the span (exclusive).
    pub end: DateTime<Utc>,
}

impl TimeSpan {
    /// Whether `[start, end)` (an open `end` meaning "until further notice",
    /// a point event being `end == None` too) overlaps this span.
    pub fn overlaps(&self, start: DateTime<Utc>, end: Option<DateTime<Utc>>) -> bool {
        start < self.end && end.is_none_or(|e| e > self.start)
    }
}

/// The time line of a generated fleet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Timeline {
    /// Clean history to fit baselines on (`telltale fit --from start --until end`).
    pub fit: TimeSpan,
    /// Everything after the fit span (`telltale scan --from start --to end`).
    pub scan: TimeSpan,
    /// The first part of the scan span, clean on every asset: a false-alarm control.
    pub control: TimeSpan,
    /// Sampling interval of every sensor, in seconds.
    pub sample_interval_s: u32,
}

/// A whole-asset data outage (every sensor silent): a coverage fact, not a sensor fault.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Outage {
    /// Asset id.
    pub asset: String,
    /// First missing timestamp.
    pub start: DateTime<Utc>,
    /// First timestamp with data again.
    pub end: DateTime<Utc>,
    /// What happened.
    pub note: String,
}

/// The sampling grid in sample indices.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Grid {
    pub(crate) t0_ms: i64,
    pub(crate) dt_s: i64,
    pub(crate) n: usize,
    pub(crate) fit_end: usize,
    pub(crate) window_start: usize,
}

impl Grid {
    fn new(p: &FleetValidParams) -> Self {
        let per_day = (86_400 / p.sample_interval_s) as usize;
        let n = p.days as usize * per_day;
        let fit_end = p.fit_days as usize * per_day;
        // A week of control, or an eighth of the scan on short fleets.
        let control = (7 * per_day).min((n - fit_end) / 8);
        Self {
            t0_ms: p.start.timestamp_millis(),
            dt_s: i64::from(p.sample_interval_s),
            n,
            fit_end,
            window_start: fit_end + control,
        }
    }

    pub(crate) fn ts_ms(&self, k: usize) -> i64 {
        self.t0_ms + k as i64 * self.dt_s * 1000
    }

    pub(crate) fn time(&self, k: usize) -> DateTime<Utc> {
        DateTime::<Utc>::from_timestamp_millis(self.ts_ms(k)).unwrap_or_default()
    }

    fn window_len(&self) -> usize {
        self.n - self.window_start
    }

    /// Sample index at fraction `u` of the event window.
    fn at(&self, u: f64) -> usize {
        (self.window_start + (u * self.window_len() as f64).round() as usize).min(self.n - 1)
    }

    /// `hours` of samples, capped at 6% of the event window on short fleets, at least 2.
    fn hours(&self, hours: f64) -> usize {
        let want = (hours * 3600.0 / self.dt_s as f64).round() as usize;
        want.min((0.06 * self.window_len() as f64) as usize).max(2)
    }

    /// Span between fractions `u0` and `u1`, at least 3 samples, inside the grid.
    fn span(&self, u0: f64, u1: f64) -> (usize, usize) {
        let s = self.at(u0);
        (s, self.at(u1).max(s + 3).min(self.n))
    }

    pub(crate) fn samples_per_day(&self) -> f64 {
        86_400.0 / self.dt_s as f64
    }
}

/// Kinds of equipment wear.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum WearKind {
    /// Drive-end bearing wear: DE temperature and vibration up, NDE a little.
    Bearing,
    /// Motor cooling loss: winding and NDE bearing temperatures up at the same load.
    Winding,
    /// Impeller wear: less head at the same speed, more current.
    Impeller,
}

/// How a sensor's readings are corrupted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum SensorFaultKind {
    Bias(f64),
    DriftPerDay(f64),
    Stuck,
    /// Isolated positive spikes: probability per sample, amplitude range.
    Spikes {
        rate: f64,
        lo: f64,
        hi: f64,
    },
    /// Extra white noise of this standard deviation.
    Noise(f64),
    Dropout,
    /// Open-circuit reading above the range.
    OutOfRange,
}

/// One change applied to an asset's simulation or readings, in sample indices.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Injection {
    Sensor {
        sensor: usize,
        kind: SensorFaultKind,
        start: usize,
        end: usize,
    },
    /// Pump forced to stand still (maintenance, or after a failure until repaired).
    Downtime {
        start: usize,
        end: usize,
    },
    /// No rows for any sensor.
    Outage {
        start: usize,
        end: usize,
    },
    /// Speed setpoint multiplied by `factor` from `start` on.
    Setpoint {
        start: usize,
        factor: f64,
    },
    /// From `start` on the pump runs only between 22:00 and 06:00.
    NightOnly {
        start: usize,
    },
    /// Wear rising as `severity * ((k - start) / (end - start))^2` on `[start, end)`,
    /// held until `reset` (repair), then gone; `reset == None` keeps it.
    Wear {
        kind: WearKind,
        start: usize,
        end: usize,
        severity: f64,
        reset: Option<usize>,
    },
    /// Coupling misalignment from `start` on.
    Misalign {
        start: usize,
    },
}

/// Site-wide changes.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(crate) struct SitePlan {
    /// `(start, end, amplitude degC)`.
    pub(crate) heatwave: Option<(usize, usize, f64)>,
    /// `(start, end, suction change bar, group)`.
    pub(crate) supply: Option<(usize, usize, f64, PumpGroup)>,
}

/// Everything injected into one asset.
#[derive(Debug, Clone, Default)]
pub(crate) struct AssetPlan {
    pub(crate) case: Option<Case>,
    pub(crate) injections: Vec<Injection>,
    pub(crate) events: Vec<Event>,
    pub(crate) outages: Vec<Outage>,
}

/// The scripted cases; each is injected into one asset.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum Case {
    /// `sensor_fault/bias`, subtle, on the DE bearing temperature.
    BiasSubtle,
    /// `sensor_fault/bias`, obvious, on the discharge pressure.
    BiasObvious,
    /// `sensor_fault/drift` on a context sensor (suction pressure), then recalibrated.
    DriftContext,
    /// `sensor_fault/drift`, open-ended, on the NDE bearing temperature.
    DriftOpen,
    /// `sensor_fault/stuck` on the winding temperature.
    StuckWinding,
    /// `sensor_fault/stuck` on a context sensor (flow).
    StuckFlow,
    /// `sensor_fault/spikes` on the vibration.
    Spikes,
    /// `sensor_fault/noise` on the motor current.
    Noise,
    /// `sensor_fault/dropout` on the DE bearing and on the ambient temperature.
    Dropout,
    /// `sensor_fault/out_of_range`: open-circuit NDE bearing probe.
    OutOfRange,
    /// `process_change/level_shift`: speed setpoint raised 8%.
    LevelShift,
    /// `process_change/regime_change`: moved to night-only duty.
    RegimeChange,
    /// `equipment_fault/degradation` of the DE bearing, ending in a failure and a repair.
    BearingFailure,
    /// `equipment_fault/degradation` of the motor cooling, ending in a failure and a repair.
    WindingFailure,
    /// `equipment_fault/degradation`: impeller wear, open-ended.
    ImpellerWear,
    /// `maintenance` followed by `equipment_fault/step_change` (coupling misalignment).
    Misalignment,
    /// `maintenance` without any fault.
    RoutineMaintenance,
    /// A whole-asset outage (power cut): coverage, no event.
    PowerCut,
    /// `equipment_fault/degradation` of the DE bearing, early and subtle, open-ended.
    BearingEarly,
}

impl Case {
    /// Every case, in catalogue order.
    pub const ALL: [Case; 19] = [
        Case::BiasSubtle,
        Case::BiasObvious,
        Case::DriftContext,
        Case::DriftOpen,
        Case::StuckWinding,
        Case::StuckFlow,
        Case::Spikes,
        Case::Noise,
        Case::Dropout,
        Case::OutOfRange,
        Case::LevelShift,
        Case::RegimeChange,
        Case::BearingFailure,
        Case::WindingFailure,
        Case::ImpellerWear,
        Case::Misalignment,
        Case::RoutineMaintenance,
        Case::PowerCut,
        Case::BearingEarly,
    ];
}

struct Ctx<'a> {
    g: &'a Grid,
    asset: &'a str,
    plan: &'a mut AssetPlan,
}

impl Ctx<'_> {
    fn event(
        &mut self,
        sensor: Option<usize>,
        class: Class,
        mode: Option<Mode>,
        start: usize,
        end: Option<usize>,
        note: String,
    ) {
        self.plan.events.push(Event {
            asset: self.asset.to_string(),
            sensor: sensor.map(|i| SENSORS[i].id.to_string()),
            class,
            mode,
            start: self.g.time(start),
            end: end.map(|e| self.g.time(e)),
            note,
        });
    }

    fn sensor_fault(
        &mut self,
        sensor: usize,
        kind: SensorFaultKind,
        mode: Mode,
        (start, end): (usize, usize),
        open: bool,
        note: String,
    ) {
        let end = if open { self.g.n } else { end };
        self.plan.injections.push(Injection::Sensor { sensor, kind, start, end });
        let ev_end = (!open).then_some(end);
        self.event(Some(sensor), Class::SensorFault, Some(mode), start, ev_end, note);
    }

    fn maintenance(&mut self, start: usize, end: usize, sensor: Option<usize>, note: String) {
        if sensor.is_none() {
            self.plan.injections.push(Injection::Downtime { start, end });
        }
        self.event(sensor, Class::Maintenance, None, start, Some(end), note);
    }

    fn apply(&mut self, case: Case) {
        use Mode::*;
        let g = *self.g;
        let n = g.n;
        match case {
            Case::BiasSubtle => self.sensor_fault(
                sid::BEARING_DE,
                SensorFaultKind::Bias(1.2),
                Bias,
                g.span(0.10, 0.40),
                false,
                "DE bearing probe reads +1.2 degC (subtle: about 1 robust sigma of the context-explained baseline); probe re-seated at the end".into(),
            ),
            Case::BiasObvious => self.sensor_fault(
                sid::DISCHARGE,
                SensorFaultKind::Bias(0.6),
                Bias,
                g.span(0.55, 0.80),
                false,
                "discharge pressure transmitter offset +0.6 bar after a zero shift".into(),
            ),
            Case::DriftContext => {
                let sp = g.span(0.20, 0.50);
                self.sensor_fault(
                    sid::SUCTION,
                    SensorFaultKind::DriftPerDay(-0.05),
                    Drift,
                    sp,
                    false,
                    "suction pressure transmitter drifts -0.05 bar/day (a context sensor)".into(),
                );
                self.maintenance(
                    sp.1,
                    (sp.1 + g.hours(1.0)).min(n),
                    Some(sid::SUCTION),
                    "suction pressure transmitter recalibrated; pump kept running".into(),
                );
            }
            Case::DriftOpen => self.sensor_fault(
                sid::BEARING_NDE,
                SensorFaultKind::DriftPerDay(0.35),
                Drift,
                g.span(0.45, 1.0),
                true,
                "NDE bearing probe drifts +0.35 degC/day, not corrected".into(),
            ),
            Case::StuckWinding => self.sensor_fault(
                sid::WINDING,
                SensorFaultKind::Stuck,
                Stuck,
                g.span(0.30, 0.42),
                false,
                "winding temperature frozen at its last value (relay card fault)".into(),
            ),
            Case::StuckFlow => self.sensor_fault(
                sid::FLOW,
                SensorFaultKind::Stuck,
                Stuck,
                g.span(0.62, 0.70),
                false,
                "flow meter output frozen (a context sensor)".into(),
            ),
            Case::Spikes => self.sensor_fault(
                sid::VIBRATION,
                SensorFaultKind::Spikes { rate: 1.0 / 120.0, lo: 4.0, hi: 12.0 },
                Spikes,
                g.span(0.15, 0.35),
                false,
                "isolated +4..12 mm/s vibration spikes from a loose connector (in range)".into(),
            ),
            Case::Noise => self.sensor_fault(
                sid::CURRENT,
                SensorFaultKind::Noise(2.5),
                Noise,
                g.span(0.50, 0.75),
                false,
                "motor current signal noisy (2.5 A extra white noise, damaged screen)".into(),
            ),
            Case::Dropout => {
                self.sensor_fault(
                    sid::BEARING_DE,
                    SensorFaultKind::Dropout,
                    Dropout,
                    g.span(0.35, 0.38),
                    false,
                    "DE bearing temperature missing (no rows), other sensors report".into(),
                );
                self.sensor_fault(
                    sid::AMBIENT,
                    SensorFaultKind::Dropout,
                    Dropout,
                    g.span(0.70, 0.71),
                    false,
                    "ambient temperature missing (no rows), other sensors report".into(),
                );
            }
            Case::OutOfRange => self.sensor_fault(
                sid::BEARING_NDE,
                SensorFaultKind::OutOfRange,
                OutOfRange,
                g.span(0.72, 0.76),
                false,
                "NDE bearing probe open circuit: reads above its 150 degC range".into(),
            ),
            Case::LevelShift => {
                let s = g.at(0.40);
                self.plan.injections.push(Injection::Setpoint { start: s, factor: 1.08 });
                self.event(
                    None,
                    Class::ProcessChange,
                    Some(LevelShift),
                    s,
                    None,
                    "discharge setpoint raised: speed +8%, so flow, discharge pressure, \
                     motor current and temperatures rise as the affinity laws say"
                        .into(),
                );
            }
            Case::RegimeChange => {
                let s = g.at(0.52);
                self.plan.injections.push(Injection::NightOnly { start: s });
                self.event(
                    None,
                    Class::ProcessChange,
                    Some(RegimeChange),
                    s,
                    None,
                    "moved from duty rotation to night-only duty (22:00-06:00); \
                     all sensors follow the new running pattern"
                        .into(),
                );
            }
            Case::BearingFailure => {
                let (s, f) = (g.at(0.05), g.at(0.42));
                let r = (f + g.hours(36.0)).min(n);
                self.plan.injections.push(Injection::Wear {
                    kind: WearKind::Bearing,
                    start: s,
                    end: f,
                    severity: 1.0,
                    reset: Some(r),
                });
                self.event(
                    None,
                    Class::EquipmentFault,
                    Some(Degradation),
                    s,
                    Some(f),
                    "DE bearing wear: bearing_de_temp (up to +16 degC) and vibration \
                     (up to +5.5 mm/s) rise together, bearing_nde_temp a little"
                        .into(),
                );
                self.event(
                    None,
                    Class::Failure,
                    None,
                    f,
                    None,
                    "DE bearing seized; pump tripped".into(),
                );
                self.maintenance(f, r, None, "DE bearing replaced; back to normal".into());
            }
            Case::WindingFailure => {
                let (s, f) = (g.at(0.45), g.at(0.70));
                let r = (f + g.hours(24.0)).min(n);
                self.plan.injections.push(Injection::Wear {
                    kind: WearKind::Winding,
                    start: s,
                    end: f,
                    severity: 1.0,
                    reset: Some(r),
                });
                self.event(
                    None,
                    Class::EquipmentFault,
                    Some(Degradation),
                    s,
                    Some(f),
                    "motor cooling loss (fan cowl clogging): winding_temp rise up to +80% \
                     and bearing_nde_temp up at the same load"
                        .into(),
                );
                self.event(
                    None,
                    Class::Failure,
                    None,
                    f,
                    None,
                    "motor tripped on winding over-temperature".into(),
                );
                self.maintenance(f, r, None, "motor fan and cowl cleaned and replaced".into());
            }
            Case::ImpellerWear => {
                let s = g.at(0.25);
                self.plan.injections.push(Injection::Wear {
                    kind: WearKind::Impeller,
                    start: s,
                    end: n,
                    severity: 1.0,
                    reset: None,
                });
                self.event(
                    None,
                    Class::EquipmentFault,
                    Some(Degradation),
                    s,
                    None,
                    "impeller wear: discharge_pressure head down (to -10%) at the same speed, \
                     motor_current up (to +7%), vibration slightly up"
                        .into(),
                );
            }
            Case::Misalignment => {
                let m0 = g.at(0.30);
                let m1 = (m0 + g.hours(6.0)).min(n);
                self.maintenance(
                    m0,
                    m1,
                    None,
                    "mechanical seal replaced; coupling refitted".into(),
                );
                self.plan.injections.push(Injection::Misalign { start: m1 });
                self.event(
                    None,
                    Class::EquipmentFault,
                    Some(StepChange),
                    m1,
                    None,
                    "coupling misaligned after maintenance: vibration step (about +2 mm/s) \
                     and bearing_de_temp step (+4 degC)"
                        .into(),
                );
            }
            Case::RoutineMaintenance => {
                let m0 = g.at(0.55);
                let m1 = (m0 + g.hours(5.0)).min(n);
                self.maintenance(
                    m0,
                    m1,
                    None,
                    "routine inspection and greasing; no fault found".into(),
                );
            }
            Case::PowerCut => {
                let o0 = g.at(0.60);
                let o1 = (o0 + g.hours(8.0)).min(n);
                self.plan.injections.push(Injection::Outage { start: o0, end: o1 });
                self.plan.outages.push(Outage {
                    asset: self.asset.to_string(),
                    start: g.time(o0),
                    end: g.time(o1),
                    note: "power cut at the pump's panel: every sensor silent (coverage, not a sensor fault)"
                        .into(),
                });
            }
            Case::BearingEarly => {
                let s = g.at(0.70);
                self.plan.injections.push(Injection::Wear {
                    kind: WearKind::Bearing,
                    start: s,
                    end: n,
                    severity: 0.2,
                    reset: None,
                });
                self.event(
                    None,
                    Class::EquipmentFault,
                    Some(Degradation),
                    s,
                    None,
                    "early DE bearing wear (subtle): bearing_de_temp up to +3 degC and \
                     vibration up to +1 mm/s by the end of the data"
                        .into(),
                );
            }
        }
    }
}

/// The plan of a whole fleet: assets, time line, ground truth.
#[derive(Debug, Clone)]
pub struct FleetPlan {
    /// Fit, control and scan spans.
    pub timeline: Timeline,
    /// Every asset, in index order.
    pub assets: Vec<AssetInfo>,
    /// Ground-truth events (DESIGN.md 4.3), sorted by start, asset, sensor.
    pub events: Vec<Event>,
    /// Whole-asset outages (coverage facts, not events).
    pub outages: Vec<Outage>,
    /// Assets with no event and no outage at all: false-alarm controls.
    pub clean_assets: Vec<String>,
    pub(crate) grid: Grid,
    pub(crate) sites: Vec<SitePlan>,
    pub(crate) asset_plans: Vec<AssetPlan>,
}

impl FleetPlan {
    /// The scripted case injected into asset `index`, if any (site-wide
    /// changes such as the heatwave are not cases).
    pub fn case(&self, index: usize) -> Option<Case> {
        self.asset_plans.get(index).and_then(|p| p.case)
    }
}

/// Plan a fleet: cheap (no samples are generated), deterministic in the seed.
pub fn plan_fleet(p: &FleetValidParams) -> FleetPlan {
    let g = Grid::new(p);
    let assets = layout::assets(p.sites, p.pumps_per_site);
    let mut rng = stream_rng(p.seed, seed::PLAN, 0);
    let mut sites = vec![SitePlan::default(); p.sites];
    let mut cases: Vec<Option<Case>> = vec![None; assets.len()];
    let supply_group = if layout::raw_count(p.pumps_per_site) > 0 {
        PumpGroup::RawWater
    } else {
        PumpGroup::Booster
    };
    let heatwave = |g: &Grid| {
        let (s, e) = g.span(0.42, 0.56);
        (s, e, 9.0)
    };
    let supply = |g: &Grid| {
        let (s, e) = g.span(0.78, 0.90);
        (s, e, -0.25, supply_group)
    };
    match p.fault_mix {
        FaultMix::None => {}
        FaultMix::Catalogue => {
            sites[if p.sites >= 2 { 1 } else { 0 }].heatwave = Some(heatwave(&g));
            sites[0].supply = Some(supply(&g));
            // Shuffle each site's pumps, then deal the cases round-robin over
            // the sites so that every site gets a mix of cases and clean pumps.
            let mut per_site: Vec<Vec<usize>> = (0..p.sites)
                .map(|s| (s * p.pumps_per_site..(s + 1) * p.pumps_per_site).collect())
                .collect();
            for v in &mut per_site {
                v.shuffle(&mut rng);
            }
            let order: Vec<usize> =
                (0..p.pumps_per_site).flat_map(|r| per_site.iter().map(move |v| v[r])).collect();
            let mut catalogue = Case::ALL.to_vec();
            catalogue.shuffle(&mut rng);
            let n = assets.len();
            let take = catalogue.len().min(n - n / 5);
            for (&a, &c) in order.iter().zip(&catalogue[..take]) {
                cases[a] = Some(c);
            }
        }
        FaultMix::Share(share) => {
            for s in &mut sites {
                let u: f64 = rng.random();
                if u < share / 3.0 {
                    s.heatwave = Some(heatwave(&g));
                } else if u < 2.0 * share / 3.0 {
                    s.supply = Some(supply(&g));
                }
            }
            for c in &mut cases {
                if rng.random::<f64>() < share {
                    *c = Some(Case::ALL[rng.random_range(0..Case::ALL.len())]);
                }
            }
        }
    }

    let mut asset_plans = Vec::with_capacity(assets.len());
    for (a, case) in assets.iter().zip(&cases) {
        let mut plan = AssetPlan { case: *case, ..AssetPlan::default() };
        let mut ctx = Ctx { g: &g, asset: &a.id, plan: &mut plan };
        if let Some(c) = case {
            ctx.apply(*c);
        }
        let site = sites[a.site_index];
        if let Some((s, e, amp)) = site.heatwave {
            ctx.event(
                None,
                Class::ProcessChange,
                Some(Mode::CommonMode),
                s,
                Some(e),
                format!(
                    "heatwave at {}: ambient up to +{amp} degC and demand +12% at every pump \
                     of the site; all temperatures follow",
                    a.site
                ),
            );
        }
        if let Some((s, e, d, grp)) = site.supply
            && grp == a.group
        {
            ctx.event(
                None,
                Class::ProcessChange,
                Some(Mode::CommonMode),
                s,
                Some(e),
                format!(
                    "supply change at {}: {} suction pressure {d:+} bar (low source level), \
                     so discharge pressure follows at every {} pump of the site",
                    a.site,
                    grp.id(),
                    grp.id()
                ),
            );
        }
        asset_plans.push(plan);
    }

    let mut events: Vec<Event> =
        asset_plans.iter().flat_map(|p| p.events.iter().cloned()).collect();
    events.sort_by(|x, y| (x.start, &x.asset, &x.sensor).cmp(&(y.start, &y.asset, &y.sensor)));
    let outages: Vec<Outage> = asset_plans.iter().flat_map(|p| p.outages.iter().cloned()).collect();
    let clean_assets = assets
        .iter()
        .zip(&asset_plans)
        .filter(|(_, p)| p.events.is_empty() && p.outages.is_empty())
        .map(|(a, _)| a.id.clone())
        .collect();
    let timeline = Timeline {
        fit: TimeSpan { start: g.time(0), end: g.time(g.fit_end) },
        scan: TimeSpan { start: g.time(g.fit_end), end: g.time(g.n) },
        control: TimeSpan { start: g.time(g.fit_end), end: g.time(g.window_start) },
        sample_interval_s: p.sample_interval_s,
    };
    FleetPlan { timeline, assets, events, outages, clean_assets, grid: g, sites, asset_plans }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::FleetParams;
    use chrono::Duration;

    #[test]
    fn demo_spans_are_exact() {
        let plan = plan_fleet(&FleetParams::demo().check().unwrap());
        let t = |s: &str| DateTime::parse_from_rfc3339(s).unwrap().to_utc();
        assert_eq!(plan.timeline.fit.start, t("2026-05-04T00:00:00Z"));
        assert_eq!(plan.timeline.fit.end, t("2026-06-01T00:00:00Z"));
        assert_eq!(plan.timeline.control.end, t("2026-06-08T00:00:00Z"));
        assert_eq!(plan.timeline.scan.end, t("2026-07-27T00:00:00Z"));
        assert_eq!(Duration::seconds(plan.grid.dt_s), Duration::minutes(1));
    }

    #[test]
    fn catalogue_uses_every_case_on_the_demo_fleet() {
        let plan = plan_fleet(&FleetParams::demo().check().unwrap());
        for c in Case::ALL {
            assert_eq!((0..30).filter(|&i| plan.case(i) == Some(c)).count(), 1, "{c:?}");
        }
    }
}

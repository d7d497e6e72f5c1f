//! The scan job: judge every asset's history in `[from, to)` against its
//! stored baseline and report suspicions (DESIGN.md sections 4.4 and 5,
//! `telltale scan`).
//!
//! ```text
//!  store: baselines + calibrations (one JSON per asset)
//!  history [from − warm-up, to) ─ for_each_asset ─► batch ─ par_iter:
//!        align on the baseline grid ─ evaluate_asset (models::verdict):
//!        scores → hourly blocks → causal episodes per channel
//!  fleet stage (all assets' block levels in memory, small):
//!        peers = same site and group (same site when fewer than 2) → PeerSupport:
//!        the same sensor id, the same channel (level for a level episode,
//!        residual for a residual one), moved the same way over the episode's steps
//!        decide → verdicts → keep those detected in [from, to)
//!        Benjamini–Hochberg across the fleet at q → score → rank
//! ```
//!
//! **Causality.** Detection at a step uses only rows up to the end of that
//! step. The verdict of a change (class, mode) is the one the evidence
//! supports at the end of the scanned span, and `detected` is the end of
//! the step whose alarm completed the evidence for that verdict.
//!
//! **Score.** `score = confidence × (1 − p_BH)`, where `p_BH` is the
//! Benjamini–Hochberg adjusted p-value of the verdict across every verdict
//! of the fleet in the span, and `confidence` is the decision procedure's
//! weight for the class (see [`telltale_models::verdict::decide`](mod@telltale_models::verdict::decide)).
//! Verdicts with `p_BH > fdr_q` are not reported.
//!
//! **Rank.** By `priority = score × class weight × criticality weight ×
//! size weight`, with class weights equipment fault 1.0, sensor fault 0.8,
//! process change 0.6 (a machine at risk first, a wrong instrument next, a
//! changed process last), criticality weight `0.5 + 0.125 · criticality`
//! (1 → 0.625, 5 → 1.125) and size weight `min(1, 0.5 + 0.25 · log2(1 +
//! magnitude))`; ties by detection time, asset, sensor. These weights are
//! our ranking policy (common practice, no source).
//!
//! Memory: the reader bounds what it buffers; the job holds per asset its
//! baseline and the level, residual and texture block summaries (hours ×
//! sensors) for the fleet stage, never its rows after evaluation: about
//! 60 kB per asset-week of scan, so memory grows slowly with the fleet.

use crate::error::{Error, Result};
use crate::io::{AssetHistory, BadFile, HistoryReader};
use crate::jobs::store::{Store, StoredBaseline};
use crate::record::{Class, Evidence, Mode, Suspicion, suspicion_id};
use crate::registry::{Registry, resolve};
use crate::time::{format_time, from_millis};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::time::Instant;
use telltale_models::baseline::{SensorSeries, align};
use telltale_models::multitest::benjamini_hochberg;
use telltale_models::verdict::{
    AssetEvaluation, Channel, Episode, PeerSupport, Verdict, VerdictClass, VerdictMode,
    VerdictParams, decide, evaluate_asset, peer_moved,
};

/// Settings of one scan; build with [`ScanSettings::new`] and set the public fields.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct ScanSettings {
    /// History file or directory.
    pub history: PathBuf,
    /// Optional registry; its groups, sites and criticality override the store's.
    pub registry: Option<PathBuf>,
    /// Baseline store.
    pub store: PathBuf,
    /// Start of the reported span, epoch ms, inclusive.
    pub from_ms: i64,
    /// End of the span, epoch ms, exclusive.
    pub to_ms: i64,
    /// History read before `from` to warm the detectors up, ms (default 3 days).
    pub warmup_ms: i64,
    /// Skip unreadable history files.
    pub skip_bad_files: bool,
    /// Verdict-engine settings.
    pub params: VerdictParams,
    /// Threads (`0`: the available cores).
    pub threads: usize,
}

impl ScanSettings {
    /// Default settings for a span.
    pub fn new(
        history: impl Into<PathBuf>,
        store: impl Into<PathBuf>,
        from_ms: i64,
        to_ms: i64,
    ) -> Self {
        ScanSettings {
            history: history.into(),
            registry: None,
            store: store.into(),
            from_ms,
            to_ms,
            warmup_ms: 3 * 86_400_000,
            skip_bad_files: false,
            params: VerdictParams::default(),
            threads: 0,
        }
    }
}

/// What a scan did.
#[derive(Debug, Clone, PartialEq)]
pub struct ScanReport {
    /// Suspicions, ranked (rank 1 first).
    pub suspicions: Vec<Suspicion>,
    /// Assets judged.
    pub assets_scanned: usize,
    /// Assets with history but no usable baseline, with the reason.
    pub assets_skipped: Vec<(String, String)>,
    /// Readings read (warm-up included).
    pub rows_read: u64,
    /// Verdicts detected in the span before the fleet-wide FDR step.
    pub verdicts_before_fdr: usize,
    /// Unreadable files skipped.
    pub bad_files: Vec<BadFile>,
    /// Wall time, seconds.
    pub seconds: f64,
}

struct Evaluated {
    stored: StoredBaseline,
    eval: AssetEvaluation,
}

/// The series of `history` in the stored baseline's sensor order, each
/// with its sensor's description (`empty` for a sensor without readings).
pub(crate) fn series_of<'a>(
    stored: &StoredBaseline,
    history: &'a AssetHistory,
    empty: &'a crate::io::SensorSeries,
) -> Vec<SensorSeries<'a>> {
    stored
        .sensors
        .iter()
        .zip(&stored.baseline.sensors)
        .map(|(st, spec)| {
            let h = history.sensor(&st.id).unwrap_or(empty);
            SensorSeries { ts_ms: &h.ts_ms, values: &h.value, good: &h.good, spec: *spec }
        })
        .collect()
}

fn evaluate_one(
    s: &ScanSettings,
    origin_ms: i64,
    end_ms: i64,
    stored: StoredBaseline,
    history: &AssetHistory,
) -> std::result::Result<Evaluated, String> {
    let b = &stored.baseline;
    let Some(cal) = stored.calibration.as_ref() else {
        return Err("its baseline has no calibration (written by an older telltale); re-run \
                    `telltale fit`"
            .to_owned());
    };
    if cal.block_ms != s.params.block_ms {
        return Err(format!(
            "its calibration is for {} ms steps, the scan uses {} ms; re-run `telltale fit`",
            cal.block_ms, s.params.block_ms
        ));
    }
    let empty = crate::io::SensorSeries::default();
    let series = series_of(&stored, history, &empty);
    let frame = align(&series, b.step_ms, Some(origin_ms), Some(end_ms), b.params.reduce())
        .map_err(|e| e.to_string())?;
    let mut eval = evaluate_asset(b, cal, frame.values.view(), frame.origin_ms, &s.params)
        .map_err(|e| e.to_string())?;
    // the fleet stage needs only what the decision reads
    eval.blocks.shed_counts();
    Ok(Evaluated { stored, eval })
}

fn class_of(c: VerdictClass) -> Class {
    match c {
        VerdictClass::SensorFault => Class::SensorFault,
        VerdictClass::ProcessChange => Class::ProcessChange,
        VerdictClass::EquipmentFault => Class::EquipmentFault,
    }
}

fn mode_of(m: VerdictMode) -> Mode {
    match m {
        VerdictMode::Bias => Mode::Bias,
        VerdictMode::Drift => Mode::Drift,
        VerdictMode::Stuck => Mode::Stuck,
        VerdictMode::Spikes => Mode::Spikes,
        VerdictMode::Noise => Mode::Noise,
        VerdictMode::Dropout => Mode::Dropout,
        VerdictMode::OutOfRange => Mode::OutOfRange,
        VerdictMode::LevelShift => Mode::LevelShift,
        VerdictMode::RegimeChange => Mode::RegimeChange,
        VerdictMode::CommonMode => Mode::CommonMode,
        VerdictMode::Degradation => Mode::Degradation,
        VerdictMode::StepChange => Mode::StepChange,
    }
}

fn basis_text(c: Channel) -> &'static str {
    match c {
        Channel::Level => "robust sigma of the sensor's baseline in its operating regime",
        Channel::Resid => "robust sigma of the sensor's context-regression residual",
        Channel::Texture => "natural log of the step-to-step spread over the baseline's",
        Channel::Spikes => "isolated outliers per evaluation step",
        Channel::Outside => "readings outside the instrument range",
        Channel::Silent | Channel::Frozen => "grid rows of the run",
        Channel::Occupancy => "total-variation distance of regime occupancy",
    }
}

/// One sentence for the reviewer.
fn summary(v: &Verdict, asset: &str, names: &[String], site: Option<&str>, when: &str) -> String {
    let sensor = v.sensor.map_or("", |s| names[s].as_str());
    let list: Vec<&str> = v.sensors.iter().map(|&s| names[s].as_str()).collect();
    let list = list.join(", ");
    let dir = if v.evidence.first().is_some_and(|e| e.detail.contains("upward")) {
        "high"
    } else {
        "low"
    };
    match v.mode {
        VerdictMode::Bias => format!(
            "{sensor} on {asset} reads {dir} by {:.1} sigma since {when} while the asset's other \
             sensors and its peers do not: check or recalibrate the instrument before acting on \
             its readings.",
            v.magnitude
        ),
        VerdictMode::Drift => format!(
            "{sensor} on {asset} is drifting {dir} ({:.1} sigma so far) since {when} with no \
             matching change in the other sensors or the peers: check the instrument's \
             calibration.",
            v.magnitude
        ),
        VerdictMode::Stuck => format!(
            "{sensor} on {asset} has repeated one value for {:.0} rows since {when} while the \
             machine runs: check the transmitter and its signal path.",
            v.magnitude
        ),
        VerdictMode::Dropout => format!(
            "{sensor} on {asset} gave no readings for {:.0} rows from {when} while the other \
             sensors reported: check the instrument, its wiring and the historian tag.",
            v.magnitude
        ),
        VerdictMode::OutOfRange => format!(
            "{sensor} on {asset} read outside its instrument range {:.0} times from {when}: \
             likely an open circuit or a failed transmitter.",
            v.magnitude
        ),
        VerdictMode::Spikes => format!(
            "{sensor} on {asset} shows isolated spikes (up to {:.1} per step) from {when} with \
             a normal level: look for a loose connection or interference.",
            v.magnitude
        ),
        VerdictMode::Noise => format!(
            "{sensor} on {asset} is noisier than its baseline (spread x{:.1}) from {when} with \
             its level unchanged: check screening, earthing and the signal cable.",
            v.magnitude.exp()
        ),
        VerdictMode::LevelShift => format!(
            "{asset}'s operating point moved at {when} ({list}) and its condition sensors \
             followed as the baseline predicts: confirm the change and re-baseline if it was \
             intended."
        ),
        VerdictMode::RegimeChange => format!(
            "{asset} has run in a different pattern of operating regimes since about {when}: \
             confirm the duty change and re-baseline if it was intended."
        ),
        VerdictMode::CommonMode => format!(
            "{asset} changed at {when} ({list}) together with {} peer(s){}: a shared cause such \
             as weather or supply, not this machine alone.",
            v.peers_moved.len(),
            site.map_or(String::new(), |s| format!(" at {s}"))
        ),
        VerdictMode::Degradation => format!(
            "{asset}: {list} have been moving together since {when}, not explained by the \
             operating context and not shared by peers: plan an inspection of the machine."
        ),
        VerdictMode::StepChange => format!(
            "{asset}: {list} stepped together at {when}, not explained by the operating context \
             and not shared by peers: inspect the machine (for example its last maintenance)."
        ),
    }
}

fn class_weight(c: Class) -> f64 {
    match c {
        Class::EquipmentFault => 1.0,
        Class::SensorFault => 0.8,
        _ => 0.6,
    }
}

/// Ranking priority; see the [module docs](self).
pub fn priority(s: &Suspicion, criticality: u8) -> f64 {
    let crit = 0.5 + 0.125 * f64::from(criticality);
    let size = (0.5 + 0.25 * (1.0 + s.magnitude.abs()).log2()).min(1.0);
    s.score * class_weight(s.class) * crit * size
}

/// Runs the scan; see the [module docs](self).
///
/// # Errors
/// [`Error::BadInput`] for an empty span, bad settings, an unreadable
/// registry, history or store, or a store without baselines.
pub fn run_scan(settings: &ScanSettings) -> Result<ScanReport> {
    let started = Instant::now();
    let p = &settings.params;
    p.validate().map_err(|m| Error::bad_input(&settings.store, m))?;
    if settings.from_ms >= settings.to_ms {
        return Err(Error::bad_input(
            &settings.history,
            format!(
                "empty scan span: --from {} is not before --to {}",
                format_time(from_millis(settings.from_ms)),
                format_time(from_millis(settings.to_ms))
            ),
        ));
    }
    let store = Store::open(&settings.store)?;
    let listed = store.list()?;
    if listed.is_empty() {
        return Err(Error::bad_input(
            &settings.store,
            "the store holds no baselines; run `telltale fit` first",
        ));
    }
    let registry = settings.registry.as_ref().map(Registry::load).transpose()?;
    let (origin, end) = grid_span(settings);
    let reader = HistoryReader::try_new(&settings.history)?
        .with_time_range(origin, settings.to_ms)
        .with_skip_bad_files(settings.skip_bad_files);
    if let Some(r) = registry.as_ref() {
        let inv = reader.inventory()?;
        for w in resolve(Some(r), &inv).warnings {
            tracing::warn!("{w}");
        }
    }
    let threads = if settings.threads > 0 {
        settings.threads
    } else {
        std::thread::available_parallelism().map_or(1, usize::from)
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .thread_name(|i| format!("telltale-scan-{i}"))
        .build()
        .map_err(|e| Error::io(&settings.store, std::io::Error::other(e)))?;
    let mut done: Vec<Evaluated> = Vec::new();
    let mut skipped: Vec<(String, String)> = Vec::new();
    let mut batch: Vec<(AssetHistory, StoredBaseline)> = Vec::new();
    let cap = 2 * threads;
    let flush = |batch: &mut Vec<(AssetHistory, StoredBaseline)>,
                 done: &mut Vec<Evaluated>,
                 skipped: &mut Vec<(String, String)>| {
        let res: Vec<(String, std::result::Result<Evaluated, String>)> = pool.install(|| {
            batch
                .par_drain(..)
                .map(|(h, b)| (h.asset.clone(), evaluate_one(settings, origin, end, b, &h)))
                .collect()
        });
        for (a, r) in res {
            match r {
                Ok(e) => done.push(e),
                Err(reason) => {
                    tracing::warn!(asset = %a, %reason, "asset not scanned");
                    skipped.push((a, reason));
                }
            }
        }
    };
    let summary = reader.for_each_asset(|history| -> Result<()> {
        if listed.binary_search(&history.asset).is_err() {
            skipped.push((history.asset.clone(), "no baseline in the store".to_owned()));
            return Ok(());
        }
        let mut stored = store.read_baseline(&history.asset)?;
        if let Some(r) = registry.as_ref()
            && let Some(a) = r.asset(&history.asset)
        {
            stored.group = a.group.clone();
            stored.site = a.site.clone();
            stored.criticality = a.criticality;
        }
        let known: Vec<&str> = stored.sensors.iter().map(|s| s.id.as_str()).collect();
        let extra: Vec<&str> = history
            .sensors
            .iter()
            .map(|s| s.sensor.as_str())
            .filter(|s| !known.contains(s))
            .collect();
        if !extra.is_empty() {
            tracing::warn!(
                asset = %history.asset,
                sensors = %extra.join(", "),
                "sensors not in the baseline are not judged; re-fit to include them"
            );
        }
        batch.push((history, stored));
        if batch.len() >= cap {
            flush(&mut batch, &mut done, &mut skipped);
        }
        Ok(())
    })?;
    flush(&mut batch, &mut done, &mut skipped);
    done.sort_by(|a, b| a.stored.asset.cmp(&b.stored.asset));
    let (suspicions, before) = fleet_stage(settings, &done, origin);
    skipped.sort();
    Ok(ScanReport {
        suspicions,
        assets_scanned: done.len(),
        assets_skipped: skipped,
        rows_read: summary.rows_in_range,
        verdicts_before_fdr: before,
        bad_files: summary.bad_files,
        seconds: started.elapsed().as_secs_f64(),
    })
}

/// The evaluation grid of a scan: from `from − warm-up` down to a step
/// boundary, to `to` up to one.
fn grid_span(s: &ScanSettings) -> (i64, i64) {
    let blk = s.params.block_ms;
    let origin = (s.from_ms - s.warmup_ms.max(0)).div_euclid(blk) * blk;
    let end = s.to_ms.div_euclid(blk) * blk + if s.to_ms.rem_euclid(blk) == 0 { 0 } else { blk };
    (origin, end)
}

/// Judges one asset's readings held in memory against its stored baseline
/// over `[from, to)` of `settings`, by the same evaluation, decision,
/// fleet-wide FDR and ranking as [`run_scan`] on a history that holds only
/// this asset (so no peers). `settings.history` and `settings.registry` are
/// not read. For callers that receive readings rather than files (the HTTP
/// service).
///
/// # Errors
/// [`Error::BadInput`] for an empty span, bad settings, or a baseline that
/// cannot judge (no calibration, another step length, alignment failure).
pub fn scan_asset(
    settings: &ScanSettings,
    stored: StoredBaseline,
    history: &AssetHistory,
) -> Result<ScanReport> {
    let started = Instant::now();
    settings.params.validate().map_err(|m| Error::bad_input(&settings.store, m))?;
    if settings.from_ms >= settings.to_ms {
        return Err(Error::bad_input(&settings.store, "empty scan span: from is not before to"));
    }
    let (origin, end) = grid_span(settings);
    // the batch reader keeps only rows in [origin, to); so does this
    let inside = |t: &i64| (origin..settings.to_ms).contains(t);
    let clipped;
    let history = if history.sensors.iter().all(|s| s.ts_ms.iter().all(inside)) {
        history
    } else {
        clipped = AssetHistory {
            asset: history.asset.clone(),
            sensors: history
                .sensors
                .iter()
                .map(|s| {
                    let keep: Vec<usize> = (0..s.len()).filter(|&i| inside(&s.ts_ms[i])).collect();
                    crate::io::SensorSeries {
                        sensor: s.sensor.clone(),
                        ts_ms: keep.iter().map(|&i| s.ts_ms[i]).collect(),
                        value: keep.iter().map(|&i| s.value[i]).collect(),
                        good: keep.iter().map(|&i| s.good[i]).collect(),
                    }
                })
                .collect(),
        };
        &clipped
    };
    let asset = stored.asset.clone();
    let done = vec![
        evaluate_one(settings, origin, end, stored, history)
            .map_err(|m| Error::bad_input(&settings.store, format!("asset {asset:?}: {m}")))?,
    ];
    let (suspicions, before) = fleet_stage(settings, &done, origin);
    Ok(ScanReport {
        suspicions,
        assets_scanned: 1,
        assets_skipped: Vec::new(),
        rows_read: history.rows() as u64,
        verdicts_before_fdr: before,
        bad_files: Vec::new(),
        seconds: started.elapsed().as_secs_f64(),
    })
}

/// Peer sets: same site and group when that gives at least two others, else same site.
fn peer_sets(done: &[Evaluated]) -> Vec<Vec<usize>> {
    let mut by_site_group: BTreeMap<(Option<&str>, &str), Vec<usize>> = BTreeMap::new();
    let mut by_site: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
    for (i, e) in done.iter().enumerate() {
        let site = e.stored.site.as_deref();
        by_site_group.entry((site, e.stored.group.as_str())).or_default().push(i);
        if let Some(s) = site {
            by_site.entry(s).or_default().push(i);
        }
    }
    done.iter()
        .enumerate()
        .map(|(i, e)| {
            let site = e.stored.site.as_deref();
            let sg: Vec<usize> = by_site_group
                .get(&(site, e.stored.group.as_str()))
                .map(|v| v.iter().copied().filter(|&j| j != i).collect())
                .unwrap_or_default();
            // an unregistered asset is its own group with no site: no peers
            if sg.len() >= 2 || site.is_none() {
                return if site.is_none() && e.stored.group == e.stored.asset {
                    Vec::new()
                } else {
                    sg
                };
            }
            site.and_then(|s| by_site.get(s))
                .map(|v| v.iter().copied().filter(|&j| j != i).collect())
                .unwrap_or_default()
        })
        .collect()
}

fn fleet_stage(s: &ScanSettings, done: &[Evaluated], origin: i64) -> (Vec<Suspicion>, usize) {
    let p = &s.params;
    let peers = peer_sets(done);
    let names: Vec<Vec<String>> =
        done.iter().map(|e| e.stored.sensors.iter().map(|x| x.id.clone()).collect()).collect();
    struct Pending {
        asset: usize,
        v: Verdict,
        detected_ms: i64,
    }
    let mut pending: Vec<Pending> = Vec::new();
    for (i, e) in done.iter().enumerate() {
        let blocks = &e.eval.blocks;
        let offset = ((blocks.origin_ms - origin) / p.block_ms) as isize;
        let peer_of = |ep: &Episode| -> PeerSupport {
            let Some(sidx) = ep.sensor else { return PeerSupport::default() };
            let id = &names[i][sidx];
            let hi = ep.detected_block as isize + offset;
            let lo = (ep.onset_block as isize + offset).max(hi - 24);
            let mut sup = PeerSupport::default();
            for &j in &peers[i] {
                let Some(k) = names[j].iter().position(|n| n == id) else { continue };
                let (pu, limit) = if ep.channel == Channel::Resid {
                    (&done[j].eval.resid_u, p.min_resid)
                } else {
                    (&done[j].eval.level_u, p.peer_u)
                };
                let off_j = ((done[j].eval.blocks.origin_ms - origin) / p.block_ms) as isize;
                let u: Vec<f64> = (lo..=hi)
                    .filter_map(|b| {
                        let r = b - off_j;
                        (r >= 0 && (r as usize) < pu.nrows()).then(|| pu[[r as usize, k]])
                    })
                    .collect();
                match peer_moved(&u, ep.side, limit) {
                    Some(true) => {
                        sup.peers += 1;
                        sup.moved.push(done[j].stored.asset.clone());
                    }
                    Some(false) => sup.peers += 1,
                    None => {}
                }
            }
            sup
        };
        let cal = e.stored.calibration.as_ref();
        let Some(cal) = cal else { continue };
        let verdicts =
            decide(&e.stored.baseline, cal, blocks, &e.eval.episodes, &names[i], peer_of, p);
        for v in verdicts {
            let detected_ms = blocks.end_ms(v.detected_block);
            if detected_ms >= s.from_ms && detected_ms < s.to_ms {
                pending.push(Pending { asset: i, v, detected_ms });
            }
        }
    }
    let before = pending.len();
    if pending.is_empty() {
        return (Vec::new(), 0);
    }
    let pv: Vec<f64> = pending.iter().map(|x| x.v.p_value.clamp(0.0, 1.0)).collect();
    let Ok(fdr) = benjamini_hochberg(&pv, p.fdr_q) else { return (Vec::new(), before) };
    let mut out: Vec<(f64, Suspicion)> = Vec::new();
    for (k, x) in pending.into_iter().enumerate() {
        if !fdr.rejected[k] {
            continue;
        }
        let e = &done[x.asset];
        let st = &e.stored;
        let v = &x.v;
        let class = class_of(v.class);
        let mode = mode_of(v.mode);
        let onset = from_millis(v.onset_ms);
        let sensor = v.sensor.map(|s| names[x.asset][s].clone());
        let when = format_time(onset);
        let mut evidence: Vec<Evidence> = v
            .evidence
            .iter()
            .map(|it| Evidence {
                test: it.test.clone(),
                statistic: finite(it.statistic),
                threshold: finite(it.threshold),
                p_value: it.p_value.map(finite),
                detail: it.detail.clone(),
            })
            .collect();
        evidence.push(Evidence {
            test: "fleet_fdr".to_owned(),
            statistic: finite(fdr.adjusted[k]),
            threshold: p.fdr_q,
            p_value: Some(finite(v.p_value)),
            detail: format!(
                "Benjamini-Hochberg adjusted p-value across the {} verdicts of the fleet in the \
                 span; magnitude is in {}",
                fdr.adjusted.len(),
                basis_text(v.magnitude_basis)
            ),
        });
        let score = (v.confidence * (1.0 - fdr.adjusted[k])).clamp(0.0, 1.0);
        let sus = Suspicion {
            id: suspicion_id(&st.asset, sensor.as_deref(), class, mode, onset),
            rank: 0,
            asset: st.asset.clone(),
            sensor,
            class,
            mode,
            score,
            magnitude: finite(v.magnitude),
            onset,
            detected: from_millis(x.detected_ms),
            summary: summary(v, &st.asset, &names[x.asset], st.site.as_deref(), &when),
            evidence,
        };
        out.push((priority(&sus, st.criticality), sus));
    }
    out.sort_by(|a, b| {
        b.0.total_cmp(&a.0)
            .then(a.1.detected.cmp(&b.1.detected))
            .then(a.1.asset.cmp(&b.1.asset))
            .then(a.1.sensor.cmp(&b.1.sensor))
    });
    let mut res: Vec<Suspicion> = out.into_iter().map(|(_, s)| s).collect();
    for (i, s) in res.iter_mut().enumerate() {
        s.rank = u32::try_from(i + 1).unwrap_or(u32::MAX);
    }
    (res, before)
}

fn finite(x: f64) -> f64 {
    if x.is_finite() {
        x
    } else if x > 0.0 {
        f64::MAX
    } else if x < 0.0 {
        f64::MIN
    } else {
        0.0
    }
}

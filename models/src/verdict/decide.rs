//! From episodes to verdicts: the decision procedure.
//!
//! ```text
//! 0. weak     level, residual and texture episodes with p > `episode_p`,
//!             or whose sustained size (median over the episode) is below
//!             `min_level` / `min_resid` / `min_texture`, are dropped: within
//!             what the held-out data did, or too small to act on; a
//!             texture episode spanning fewer than `min_noise_blocks` steps
//!             is a burst of the process (a start, a stop), not noise.
//! 1. absorb   a level/residual/texture episode on a sensor that overlaps an
//!             instrument signature (frozen, silent, outside range, spikes) of
//!             the same sensor belongs to the signature; a residual episode
//!             that overlaps a signature of any context sensor is dropped (its
//!             prediction used a bad input); a level episode inside a regime
//!             occupancy episode is explained by the new regime.
//! 2. signatures → sensor_fault: frozen → stuck, silent → dropout,
//!             outside → out_of_range, spikes → spikes; texture up → noise.
//!             Frozen runs on two or more sensors starting within
//!             `close_blocks` of each other are the machine standing still
//!             (or its data path frozen), not instrument faults: no verdict.
//! 3. occupancy  → process_change/regime_change.
//! 4. context-level episodes and condition episodes (residual, or level
//!    without a regression) are grouped apart, each when their spans overlap
//!    (or their alarms are within `group_blocks`); per group:
//!    a. peers   if at least half of the group's sensors moved the same way
//!               at ≥ `peer_share` of ≥ 2 peers → process_change/common_mode
//!    b. context a context sensor's level moved (by at least `min_context`):
//!               and a condition sensor's own level moved by `min_level`
//!               over the same steps, or several context sensors moved
//!                                                → process_change/level_shift
//!               alone, with the condition levels unchanged (only the
//!               predictions moved)               → sensor_fault on that context sensor
//!    c. else    two or more condition sensors    → equipment_fault
//!               exactly one sensor               → sensor_fault on it
//!    a condition group made only of residual episodes that overlap a
//!    context sensor fault is explained by it (a bad input) and dropped;
//!    a sensor or equipment verdict whose line falls by more than half its
//!    median level over the episode is a transient excursion dying away by
//!    itself and is not reported (common practice, no source);
//!    mode by shape: a Theil–Sen line (Sen 1968) through the episode's
//!    block values that rises by at least half their median level, with a
//!    slope whose 95 % interval excludes 0, is a trend (drift /
//!    degradation), otherwise a step (bias / step_change).
//! ```
//!
//! `detected` is the alarm that completed the evidence for the verdict: the
//! sensor's own alarm for a sensor fault, the second condition sensor's
//! alarm for an equipment fault, the later of the first context and first
//! condition alarms for a level shift, the first alarm for a common-mode
//! change. A group's p-value is the smallest member p-value times the
//! number of members (Bonferroni). The confidence weights (0.6 .. 0.95) are
//! our stated policy, common practice, no source.

use super::calibrate::Calibration;
use super::detect::{Channel, Episode, block_u, sustained};
use super::features::Blocks;
use super::{EvidenceItem, PeerSupport, Verdict, VerdictClass, VerdictMode, VerdictParams};
use crate::baseline::{AssetBaseline, SensorRole};

fn overlaps(a: (usize, usize), b: (usize, usize), slack: usize) -> bool {
    a.0 <= b.1 + slack && b.0 <= a.1 + slack
}

/// Shape of an episode: Theil–Sen line (Sen 1968) through its side-adjusted
/// block values `u` over `[onset, end]`. Returns `(rise, level, slope_low)`:
/// `rise = slope · (steps − 1)`, `level` = median `u`, `slope_low` the lower
/// 95 % confidence bound of the slope.
fn shape(blocks: &Blocks, cal: &Calibration, e: &Episode, last: usize) -> Option<(f64, f64, f64)> {
    let s = e.sensor?;
    let (a, b) = e.span(last);
    let (t, y): (Vec<f64>, Vec<f64>) = (a..=b.min(last))
        .map(|k| (k as f64, block_u(blocks, cal, s, e.channel, k) * e.side))
        .filter(|(_, v)| v.is_finite())
        .unzip();
    if y.len() < 6 {
        return None;
    }
    let fit = crate::trend::theil_sen(&t, &y).ok()?;
    let mut ys = y.clone();
    let level = crate::robust::median_in_place(&mut ys)?;
    let span = t.last()? - t.first()?;
    Some((fit.slope * span, level, fit.slope_low))
}

/// A trend (drift, degradation) rather than a step: the fitted line rises by
/// at least half the episode's median level and its slope's 95 % interval
/// excludes 0 (common practice, no source).
fn is_trend(blocks: &Blocks, cal: &Calibration, e: &Episode, last: usize) -> (bool, f64) {
    match shape(blocks, cal, e, last) {
        Some((rise, level, lo)) if level > 0.0 => (rise >= 0.5 * level && lo > 0.0, rise / level),
        _ => (false, f64::NAN),
    }
}

fn episode_evidence(e: &Episode, names: &[String]) -> EvidenceItem {
    let who = e.sensor.map_or("asset", |s| names[s].as_str());
    let dir = if e.side > 0.0 {
        "upward"
    } else if e.side < 0.0 {
        "downward"
    } else {
        ""
    };
    let units = match e.channel {
        Channel::Level => "robust σ of the regime baseline",
        Channel::Resid => "residual σ of the context regression",
        Channel::Texture => "log ratio of the step-to-step spread to the baseline's",
        Channel::Spikes => "isolated outliers per step",
        Channel::Outside => "readings outside the instrument range",
        Channel::Silent | Channel::Frozen => "rows",
        Channel::Occupancy => "total-variation distance of regime occupancy",
    };
    EvidenceItem {
        test: e.channel.as_str().to_owned(),
        statistic: e.statistic,
        threshold: e.threshold,
        p_value: Some(e.p_value),
        detail: format!(
            "{who}: {} {dir} alarm; peak {:.2}, magnitude {:.2} ({units})",
            e.channel.as_str(),
            e.peak,
            e.magnitude
        )
        .replace("  ", " "),
    }
}

fn verdict_from(
    class: VerdictClass,
    mode: VerdictMode,
    sensor: Option<usize>,
    members: &[&Episode],
    detected: &Episode,
    confidence: f64,
    names: &[String],
) -> Verdict {
    let onset = members.iter().map(|e| (e.onset_block, e.onset_ms)).min().unwrap_or((0, 0));
    let lead = members
        .iter()
        .max_by(|a, b| a.magnitude.total_cmp(&b.magnitude))
        .copied()
        .unwrap_or(detected);
    let pmin = members.iter().map(|e| e.p_value).fold(1.0, f64::min);
    let mut sensors: Vec<usize> = members.iter().filter_map(|e| e.sensor).collect();
    sensors.sort_unstable();
    sensors.dedup();
    let end = if members.iter().any(|e| e.end_block.is_none()) {
        None
    } else {
        members.iter().filter_map(|e| e.end_block).max()
    };
    Verdict {
        class,
        mode,
        sensor,
        sensors,
        onset_block: onset.0,
        onset_ms: onset.1,
        detected_block: detected.detected_block,
        end_block: end,
        p_value: (pmin * members.len() as f64).min(1.0),
        magnitude: lead.magnitude,
        magnitude_basis: lead.channel,
        confidence,
        evidence: members.iter().map(|e| episode_evidence(e, names)).collect(),
        peers_moved: Vec::new(),
    }
}

/// Applies the decision procedure of the [module docs](self) to one asset's
/// episodes. `peers(e)` gives the peer support of a level or residual
/// episode. `names` are the sensor ids, for the evidence text.
pub fn decide(
    baseline: &AssetBaseline,
    cal: &Calibration,
    blocks: &Blocks,
    episodes: &[Episode],
    names: &[String],
    mut peers: impl FnMut(&Episode) -> PeerSupport,
    p: &VerdictParams,
) -> Vec<Verdict> {
    let last = blocks.len().saturating_sub(1);
    let slack = p.close_blocks;
    let is_ctx = |s: usize| baseline.sensors[s].role == SensorRole::Context;
    // weak or small level, residual and texture episodes take no part
    let big = |e: &Episode| {
        let size = sustained(blocks, cal, e, last);
        match e.channel {
            Channel::Level if e.sensor.is_some_and(is_ctx) => size >= p.min_context,
            Channel::Level => size >= p.min_level,
            Channel::Resid => size >= p.min_resid,
            Channel::Texture => {
                let (a, b) = e.span(last);
                size >= p.min_texture && b + 1 - a >= p.min_noise_blocks
            }
            _ => true,
        }
    };
    let episodes: Vec<&Episode> = episodes
        .iter()
        .filter(|e| {
            e.channel.is_signature()
                || e.channel == Channel::Occupancy
                || (e.p_value <= p.episode_p && big(e))
        })
        .collect();
    let sig: Vec<&Episode> =
        episodes.iter().copied().filter(|e| e.channel.is_signature()).collect();
    let occ: Vec<&Episode> =
        episodes.iter().copied().filter(|e| e.channel == Channel::Occupancy).collect();
    // a noisier signal also throws isolated outliers: noise explains spikes
    let noisy: Vec<&Episode> =
        episodes.iter().copied().filter(|e| e.channel == Channel::Texture).collect();
    let sig: Vec<&Episode> = sig
        .into_iter()
        .filter(|e| {
            e.channel != Channel::Spikes
                || !noisy
                    .iter()
                    .any(|n| n.sensor == e.sensor && overlaps(n.span(last), e.span(last), slack))
        })
        .collect();
    let absorbed = |e: &Episode| -> bool {
        let span = e.span(last);
        let Some(s) = e.sensor else { return false };
        sig.iter().any(|g| {
            let gs = g.sensor.unwrap_or(usize::MAX);
            overlaps(span, g.span(last), slack)
                && (gs == s || (e.channel == Channel::Resid && is_ctx(gs)))
        }) || (e.channel == Channel::Level
            && occ.iter().any(|o| {
                let (a, b) = o.span(last);
                e.onset_block + slack >= a && e.onset_block <= b
            }))
    };
    // several sensors freezing together are the machine standing still (or
    // its data path frozen), not several instruments failing at once
    let frozen_together = |e: &Episode| -> bool {
        e.channel == Channel::Frozen
            && sig.iter().any(|o| {
                o.channel == Channel::Frozen
                    && o.sensor != e.sensor
                    && o.onset_block.abs_diff(e.onset_block) <= slack
            })
    };
    let mut out = Vec::new();
    for e in sig.iter().filter(|e| !frozen_together(e)) {
        let mode = match e.channel {
            Channel::Frozen => VerdictMode::Stuck,
            Channel::Silent => VerdictMode::Dropout,
            Channel::Outside => VerdictMode::OutOfRange,
            _ => VerdictMode::Spikes,
        };
        let conf = if e.channel == Channel::Spikes { 0.9 } else { 0.95 };
        out.push(verdict_from(VerdictClass::SensorFault, mode, e.sensor, &[e], e, conf, names));
    }
    for e in episodes.iter().copied().filter(|e| e.channel == Channel::Texture && !absorbed(e)) {
        out.push(verdict_from(
            VerdictClass::SensorFault,
            VerdictMode::Noise,
            e.sensor,
            &[e],
            e,
            0.85,
            names,
        ));
    }
    for e in &occ {
        out.push(verdict_from(
            VerdictClass::ProcessChange,
            VerdictMode::RegimeChange,
            None,
            &[e],
            e,
            0.75,
            names,
        ));
    }
    // Context moves and condition changes are grouped apart (overlapping
    // spans, or alarms within `group_blocks`), then related: a context
    // sensor that moved alone (a context sensor fault) explains the
    // condition residuals that overlap it.
    let change: Vec<&Episode> = episodes
        .iter()
        .copied()
        .filter(|e| matches!(e.channel, Channel::Level | Channel::Resid) && !absorbed(e))
        .collect();
    let on_ctx = |e: &Episode| e.channel == Channel::Level && e.sensor.is_some_and(is_ctx);
    let ctx_groups = group(change.iter().copied().filter(|e| on_ctx(e)).collect(), p, last);
    let cond_groups = group(change.iter().copied().filter(|e| !on_ctx(e)).collect(), p, last);
    let mut faulty_ctx: Vec<(usize, usize)> = Vec::new();
    for g in ctx_groups {
        let Some(v) = decide_group(baseline, cal, blocks, &g, names, &mut peers, p, last) else {
            continue;
        };
        if v.class == VerdictClass::SensorFault {
            faulty_ctx.extend(g.iter().map(|e| e.span(last)));
        }
        out.push(v);
    }
    for g in cond_groups {
        let explained = g.iter().all(|e| {
            e.channel == Channel::Resid && faulty_ctx.iter().any(|&f| overlaps(e.span(last), f, 0))
        });
        if !explained {
            out.extend(decide_group(baseline, cal, blocks, &g, names, &mut peers, p, last));
        }
    }
    out.sort_by_key(|v| (v.detected_block, v.sensor));
    out
}

/// Groups episodes whose spans overlap or whose alarms are within `group_blocks`.
fn group<'a>(mut eps: Vec<&'a Episode>, p: &VerdictParams, last: usize) -> Vec<Vec<&'a Episode>> {
    eps.sort_by_key(|e| (e.onset_block, e.detected_block));
    let mut groups: Vec<Vec<&Episode>> = Vec::new();
    for e in eps {
        let span = e.span(last);
        match groups.last_mut() {
            Some(g)
                if g.iter().any(|x| {
                    overlaps(span, x.span(last), 0)
                        || e.detected_block.abs_diff(x.detected_block) <= p.group_blocks
                }) =>
            {
                g.push(e)
            }
            _ => groups.push(vec![e]),
        }
    }
    groups
}

#[allow(clippy::too_many_arguments)]
fn decide_group(
    baseline: &AssetBaseline,
    cal: &Calibration,
    blocks: &Blocks,
    g: &[&Episode],
    names: &[String],
    peers: &mut impl FnMut(&Episode) -> PeerSupport,
    p: &VerdictParams,
    last: usize,
) -> Option<Verdict> {
    let is_ctx = |s: usize| baseline.sensors[s].role == SensorRole::Context;
    let mut sensors: Vec<usize> = g.iter().filter_map(|e| e.sensor).collect();
    sensors.sort_unstable();
    sensors.dedup();
    // peers: one support per sensor, from its strongest episode
    let mut shared = 0usize;
    let mut peer_items = Vec::new();
    let mut moved_names: Vec<String> = Vec::new();
    for &s in &sensors {
        let Some(e) = g
            .iter()
            .filter(|e| e.sensor == Some(s))
            .max_by(|a, b| a.magnitude.total_cmp(&b.magnitude))
        else {
            continue;
        };
        let sup = peers(e);
        if sup.peers == 0 {
            continue;
        }
        let share = sup.moved.len() as f64 / sup.peers as f64;
        let is_shared = sup.peers >= 2 && share >= p.peer_share;
        shared += usize::from(is_shared);
        peer_items.push(EvidenceItem {
            test: "peer_share".to_owned(),
            statistic: share,
            threshold: p.peer_share,
            p_value: None,
            detail: format!(
                "{}: {} of {} peers moved the same way in the same steps{}",
                names[s],
                sup.moved.len(),
                sup.peers,
                if sup.moved.is_empty() {
                    String::new()
                } else {
                    format!(" ({})", sup.moved.join(", "))
                }
            ),
        });
        for n in sup.moved {
            if !moved_names.contains(&n) {
                moved_names.push(n);
            }
        }
    }
    let first = |pred: &dyn Fn(&Episode) -> bool| -> Option<&Episode> {
        g.iter().filter(|e| pred(e)).min_by_key(|e| e.detected_block).copied()
    };
    let ctx_lvl = |e: &Episode| e.channel == Channel::Level && e.sensor.is_some_and(is_ctx);
    let cond_lvl =
        |e: &Episode| e.channel == Channel::Level && e.sensor.is_some_and(|s| !is_ctx(s));
    let n_ctx = sensors
        .iter()
        .filter(|&&s| is_ctx(s) && g.iter().any(|e| e.sensor == Some(s) && ctx_lvl(e)))
        .count();
    let earliest = first(&|_| true).unwrap_or(g[0]);
    let mut v = if shared > 0 && 2 * shared >= sensors.len() {
        let conf = 0.6 + 0.35 * (shared as f64 / sensors.len() as f64);
        let mut v = verdict_from(
            VerdictClass::ProcessChange,
            VerdictMode::CommonMode,
            None,
            g,
            earliest,
            conf,
            names,
        );
        v.peers_moved = moved_names;
        v
    } else if n_ctx > 0 {
        let c1 = first(&ctx_lvl);
        let k1 = first(&cond_lvl);
        // did the condition sensors' own levels follow the context move?
        let followed: Vec<usize> = c1
            .map(|c| {
                let (a, b) = c.span(last);
                (0..baseline.sensors.len())
                    .filter(|&s| !is_ctx(s))
                    .filter(|&s| {
                        let Some(cc) = cal.sensors[s].level else { return false };
                        let mut v: Vec<f64> = (a..=b.min(last))
                            .map(|k| blocks.level[[k, s]] - cc.center)
                            .filter(|x| x.is_finite())
                            .collect();
                        crate::robust::median_in_place(&mut v)
                            .is_some_and(|m| m.abs() >= p.min_level)
                    })
                    .collect()
            })
            .unwrap_or_default();
        if let (Some(c), Some(k)) = (c1, k1) {
            let det = if c.detected_block >= k.detected_block { c } else { k };
            verdict_from(
                VerdictClass::ProcessChange,
                VerdictMode::LevelShift,
                None,
                g,
                det,
                0.8,
                names,
            )
        } else if let (Some(c), false) = (c1, followed.is_empty()) {
            let mut v = verdict_from(
                VerdictClass::ProcessChange,
                VerdictMode::LevelShift,
                None,
                g,
                c,
                0.8,
                names,
            );
            v.evidence.push(EvidenceItem {
                test: "condition_followed".to_owned(),
                statistic: followed.len() as f64,
                threshold: 1.0,
                p_value: None,
                detail: format!(
                    "condition sensors whose own level moved by at least {} robust sigma with the \
                     context: {}",
                    p.min_level,
                    followed.iter().map(|&s| names[s].as_str()).collect::<Vec<_>>().join(", ")
                ),
            });
            v.sensors.extend(followed);
            v.sensors.sort_unstable();
            v.sensors.dedup();
            v
        } else if n_ctx >= 2 {
            let mut ctx_eps: Vec<&Episode> = g.iter().filter(|e| ctx_lvl(e)).copied().collect();
            ctx_eps.sort_by_key(|e| e.detected_block);
            let det = ctx_eps
                .iter()
                .find(|e| e.sensor != ctx_eps[0].sensor)
                .copied()
                .unwrap_or(ctx_eps[0]);
            verdict_from(
                VerdictClass::ProcessChange,
                VerdictMode::LevelShift,
                None,
                g,
                det,
                0.7,
                names,
            )
        } else {
            let e = c1.unwrap_or(earliest);
            let (trend, _) = is_trend(blocks, cal, e, last);
            let mode = if trend { VerdictMode::Drift } else { VerdictMode::Bias };
            let mut v = verdict_from(VerdictClass::SensorFault, mode, e.sensor, g, e, 0.8, names);
            v.magnitude = e.magnitude;
            v.magnitude_basis = e.channel;
            v
        }
    } else {
        let mut cond: Vec<&Episode> = g.to_vec();
        cond.sort_by_key(|e| e.detected_block);
        let lead = g
            .iter()
            .max_by(|a, b| a.magnitude.total_cmp(&b.magnitude))
            .copied()
            .unwrap_or(earliest);
        let (trend, _) = is_trend(blocks, cal, lead, last);
        if sensors.len() >= 2 {
            let det = cond.iter().find(|e| e.sensor != cond[0].sensor).copied().unwrap_or(cond[0]);
            let mode = if trend { VerdictMode::Degradation } else { VerdictMode::StepChange };
            let conf = 0.75 + 0.1 * ((sensors.len() - 1).min(2) as f64);
            verdict_from(VerdictClass::EquipmentFault, mode, None, g, det, conf, names)
        } else {
            let mode = if trend { VerdictMode::Drift } else { VerdictMode::Bias };
            let conf = if peer_items.is_empty() { 0.7 } else { 0.85 };
            verdict_from(VerdictClass::SensorFault, mode, lead.sensor, g, cond[0], conf, names)
        }
    };
    // shape and context evidence
    if let Some(lead) = g.iter().max_by(|a, b| a.magnitude.total_cmp(&b.magnitude))
        && let Some((rise, level, lo)) = shape(blocks, cal, lead, last)
    {
        v.evidence.push(EvidenceItem {
            test: "shape_rise_over_level".to_owned(),
            statistic: if level != 0.0 { rise / level } else { 0.0 },
            threshold: 0.5,
            p_value: None,
            detail: format!(
                "Theil-Sen line over the episode rises {rise:.2} against a median level of \
                 {level:.2} (slope lower 95% bound {lo:.4} per step): a rise of at least half \
                 the level with a positive slope reads as a trend, otherwise a step"
            ),
        });
    }
    let (a, b) = (v.onset_block, v.detected_block.min(last));
    let med = |x: &[f64]| {
        let mut w: Vec<f64> = x[a.min(x.len())..(b + 1).min(x.len())]
            .iter()
            .copied()
            .filter(|v| v.is_finite())
            .collect();
        crate::robust::median_in_place(&mut w)
    };
    if let (Some(t2), Some(spe)) = (med(&blocks.t2_ratio), med(&blocks.spe_ratio)) {
        v.evidence.push(EvidenceItem {
            test: "pca_t2_over_limit".to_owned(),
            statistic: t2,
            threshold: 1.0,
            p_value: None,
            detail: "median Hotelling T² / its limit from onset to detection (high: the operating point moved)".to_owned(),
        });
        v.evidence.push(EvidenceItem {
            test: "pca_spe_over_limit".to_owned(),
            statistic: spe,
            threshold: 1.0,
            p_value: None,
            detail: "median SPE / its limit from onset to detection (high: the sensors disagree with each other)".to_owned(),
        });
    }
    v.evidence.extend(peer_items);
    // a sensor or equipment change that is dying away by itself within its
    // episode (its line falls by more than half its level) is a transient
    // excursion, not a lasting change
    if v.class != VerdictClass::ProcessChange
        && let Some(lead) = g.iter().max_by(|a, b| a.magnitude.total_cmp(&b.magnitude))
        && let Some((rise, level, _)) = shape(blocks, cal, lead, last)
        && level > 0.0
        && rise < -0.5 * level
    {
        return None;
    }
    Some(v)
}

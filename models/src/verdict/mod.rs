//! The verdict engine: from a fitted baseline and new rows to suspicions
//! with a class, a mode and evidence.
//!
//! ```text
//! rows ─ score_rows ─► RowScores ─ block_features ─► Blocks ─┐
//!      └ streaks (silent / frozen runs) ────────────────────┤
//!                                    Calibration (held out) ─┤
//!                                                detect ─► Episodes (per channel, causal)
//!                         peers (fleet stage, PeerSupport) ─┤
//!                                                decide ─► Verdicts (class, mode, p, evidence)
//! ```
//!
//! * [`features`]: evaluation blocks (default one hour) per sensor;
//! * [`calibrate`](mod@calibrate): null distributions from held-out fit data;
//! * [`detect`](mod@detect): CUSUM, spike, range, run and regime-occupancy
//!   channels, each with a p-value;
//! * [`decide`](mod@decide): the decision procedure mapping evidence to a class and mode.
//!
//! Everything here works on sensor positions; names are used only as labels
//! in evidence text. Peer comparison needs other assets' data, so it is a
//! callback ([`PeerSupport`]) that the pipelines layer answers from the
//! whole fleet's block levels ([`peer_moved`]).

pub mod calibrate;
pub mod decide;
pub mod detect;
pub mod features;

pub use calibrate::{Calibration, ChannelCal, OccupancyCal, SensorCal, calibrate};
pub use decide::decide;
pub use detect::{Channel, Episode, block_u, detect, sustained};
pub use features::{Blocks, Streak, StreakKind, block_features, streaks};

use crate::baseline::{AssetBaseline, BaselineError, RowScores, score_rows};
use ndarray::ArrayView2;

/// Settings of the verdict engine.
///
/// | field | default | units | meaning |
/// |-------|---------|-------|---------|
/// | `block_ms` | 3 600 000 | ms | evaluation step |
/// | `fa_per_100_asset_weeks` | 0.5 | rate | false-alarm budget of the CUSUM charts of one asset (half the product target, for margin) |
/// | `cusum_k` | 0.5 | σ of `u` | CUSUM reference value (tuned to a 1σ shift, Montgomery) |
/// | `close_blocks` | 12 | blocks | quiet steps that end an episode |
/// | `spike_factor` | 8 | × rate scale | jump from both neighbours that makes a spike |
/// | `spike_window` | 24 | blocks | trailing window of the spike count |
/// | `min_fill` | 0.25 | share | rows a block needs for a median |
/// | `min_streak_rows` | 30 | rows | shortest silent or frozen run reported |
/// | `group_blocks` | 48 | blocks | alarms this close belong to one change |
/// | `peer_share` | 0.5 | share | peers that must move the same way for a common-mode change |
/// | `peer_u` | 1 | robust σ | how far a peer's block level (median over the episode's steps) must move to count |
/// | `min_level` | 1 | robust σ | sustained size a level episode of a condition sensor needs to take part, and the move that counts as "followed" |
/// | `min_context` | 2 | robust σ | sustained size a context sensor's level episode needs: the operating point left its usual envelope (weather fronts and reservoir wander stay below it) |
/// | `min_resid` | 0.75 | residual σ | sustained size a residual episode needs |
/// | `min_texture` | ln 1.5 | log ratio | sustained rise of the texture ratio a noise verdict needs |
/// | `min_noise_blocks` | 4 | blocks | steps a texture episode must span (onset to end, or to the latest step) for a noise verdict: a noisier instrument stays noisy, a burst at a start or a stop is the process |
/// | `occupancy_window` | 72 | blocks | window of the regime-occupancy test |
/// | `fdr_q` | 0.01 | share | Benjamini–Hochberg level across the fleet |
/// | `episode_p` | 0.01 | prob. | a level, residual or texture episode takes part in a verdict only at this p-value or below |
///
/// Defaults are common practice, no source, except where a reference is named.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct VerdictParams {
    /// Evaluation step, ms.
    pub block_ms: i64,
    /// False-alarm budget per asset for the charts.
    pub fa_per_100_asset_weeks: f64,
    /// CUSUM reference value.
    pub cusum_k: f64,
    /// Quiet steps that end an episode.
    pub close_blocks: usize,
    /// Spike jump, in rate scales.
    pub spike_factor: f64,
    /// Spike count window, blocks.
    pub spike_window: usize,
    /// Rows a block needs.
    pub min_fill: f64,
    /// Shortest run reported.
    pub min_streak_rows: usize,
    /// Alarms this close form one change.
    pub group_blocks: usize,
    /// Peer share for common mode.
    pub peer_share: f64,
    /// Peer movement threshold, robust σ.
    pub peer_u: f64,
    /// Sustained size of a condition sensor's level episode, robust σ.
    pub min_level: f64,
    /// Sustained size of a context sensor's level episode, robust σ.
    pub min_context: f64,
    /// Sustained size of a residual episode, residual σ.
    pub min_resid: f64,
    /// Sustained rise of the log texture ratio.
    pub min_texture: f64,
    /// Steps a texture episode must span for a noise verdict.
    pub min_noise_blocks: usize,
    /// Regime occupancy window, blocks.
    pub occupancy_window: usize,
    /// Benjamini–Hochberg level.
    pub fdr_q: f64,
    /// Largest p-value of an episode that takes part in a verdict.
    pub episode_p: f64,
}

impl Default for VerdictParams {
    fn default() -> Self {
        Self {
            block_ms: 3_600_000,
            fa_per_100_asset_weeks: 0.5,
            cusum_k: 0.5,
            close_blocks: 12,
            spike_factor: 8.0,
            spike_window: 24,
            min_fill: 0.25,
            min_streak_rows: 30,
            group_blocks: 48,
            peer_share: 0.5,
            peer_u: 1.0,
            min_level: 1.0,
            min_context: 2.0,
            min_resid: 0.75,
            min_texture: std::f64::consts::LN_2 * 0.585,
            min_noise_blocks: 4,
            occupancy_window: 72,
            fdr_q: 0.01,
            episode_p: 0.01,
        }
    }
}

impl VerdictParams {
    /// Checks the settings; the message names the field and the range.
    ///
    /// # Errors
    /// A description of the first invalid field.
    pub fn validate(&self) -> Result<(), String> {
        let bad = |f: &str, r: &str| Err(format!("verdict setting {f} must be {r}"));
        if self.block_ms <= 0 {
            return bad("block_ms", "> 0 ms");
        }
        if !(self.fa_per_100_asset_weeks > 0.0 && self.fa_per_100_asset_weeks.is_finite()) {
            return bad("fa_per_100_asset_weeks", "a finite number > 0");
        }
        if !(self.cusum_k >= 0.0 && self.cusum_k < 5.0) {
            return bad("cusum_k", "in [0, 5)");
        }
        if self.close_blocks == 0
            || self.spike_window == 0
            || self.min_streak_rows == 0
            || self.min_noise_blocks == 0
        {
            return bad(
                "close_blocks, spike_window, min_streak_rows and min_noise_blocks",
                "at least 1",
            );
        }
        if !(self.min_fill > 0.0 && self.min_fill <= 1.0) {
            return bad("min_fill", "in (0, 1]");
        }
        if !(self.peer_share > 0.0 && self.peer_share <= 1.0) {
            return bad("peer_share", "in (0, 1]");
        }
        if !(self.episode_p > 0.0 && self.episode_p <= 1.0) {
            return bad("episode_p", "in (0, 1]");
        }
        if !(self.fdr_q > 0.0 && self.fdr_q < 1.0) {
            return bad("fdr_q", "in (0, 1)");
        }
        Ok(())
    }
}

/// Verdict classes (DESIGN.md section 3).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum VerdictClass {
    /// The instrument or its signal path is wrong.
    SensorFault,
    /// The machine behaves differently, explained by context or shared by peers.
    ProcessChange,
    /// The machine's condition changed.
    EquipmentFault,
}

impl VerdictClass {
    /// The vocabulary name.
    pub fn as_str(self) -> &'static str {
        match self {
            VerdictClass::SensorFault => "sensor_fault",
            VerdictClass::ProcessChange => "process_change",
            VerdictClass::EquipmentFault => "equipment_fault",
        }
    }
}

/// Verdict modes (DESIGN.md section 3).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[allow(missing_docs)]
pub enum VerdictMode {
    Bias,
    Drift,
    Stuck,
    Spikes,
    Noise,
    Dropout,
    OutOfRange,
    LevelShift,
    RegimeChange,
    CommonMode,
    Degradation,
    StepChange,
}

impl VerdictMode {
    /// The vocabulary name.
    pub fn as_str(self) -> &'static str {
        match self {
            VerdictMode::Bias => "bias",
            VerdictMode::Drift => "drift",
            VerdictMode::Stuck => "stuck",
            VerdictMode::Spikes => "spikes",
            VerdictMode::Noise => "noise",
            VerdictMode::Dropout => "dropout",
            VerdictMode::OutOfRange => "out_of_range",
            VerdictMode::LevelShift => "level_shift",
            VerdictMode::RegimeChange => "regime_change",
            VerdictMode::CommonMode => "common_mode",
            VerdictMode::Degradation => "degradation",
            VerdictMode::StepChange => "step_change",
        }
    }
}

/// One piece of evidence (converted to the suspicion's evidence by the pipelines).
#[derive(Debug, Clone, PartialEq)]
pub struct EvidenceItem {
    /// Test or channel name.
    pub test: String,
    /// Statistic.
    pub statistic: f64,
    /// Threshold.
    pub threshold: f64,
    /// Tail probability, where the test has one.
    pub p_value: Option<f64>,
    /// What it means, with sensor names.
    pub detail: String,
}

/// What the asset's peers did around an episode.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PeerSupport {
    /// Peers with data for the sensor in the steps compared.
    pub peers: usize,
    /// Names of the peers that moved the same way.
    pub moved: Vec<String>,
}

/// One verdict on one asset.
#[derive(Debug, Clone, PartialEq)]
pub struct Verdict {
    /// Class.
    pub class: VerdictClass,
    /// Mode.
    pub mode: VerdictMode,
    /// The sensor for sensor faults; `None` for asset-level verdicts.
    pub sensor: Option<usize>,
    /// Every sensor involved.
    pub sensors: Vec<usize>,
    /// Onset block.
    pub onset_block: usize,
    /// Onset, epoch ms.
    pub onset_ms: i64,
    /// Block whose end is the detection time.
    pub detected_block: usize,
    /// Last block (`None`: still open).
    pub end_block: Option<usize>,
    /// p-value of the verdict's evidence (before the fleet-wide step).
    pub p_value: f64,
    /// Size of the change (see `magnitude_basis`).
    pub magnitude: f64,
    /// Channel whose units `magnitude` is in.
    pub magnitude_basis: Channel,
    /// Confidence of the class given the evidence, 0..1.
    pub confidence: f64,
    /// Evidence.
    pub evidence: Vec<EvidenceItem>,
    /// Peers that shared the change (common mode).
    pub peers_moved: Vec<String>,
}

/// Whether a peer's block levels `u` (minus their held-out center, one per
/// block of `[from, to]`) moved in direction `side` by more than `peer_u`:
/// their median, side-adjusted, exceeds it. `None` when fewer than 3 blocks have
/// data.
pub fn peer_moved(u: &[f64], side: f64, peer_u: f64) -> Option<bool> {
    let mut v: Vec<f64> = u.iter().copied().filter(|x| x.is_finite()).map(|x| x * side).collect();
    if v.len() < 3 {
        return None;
    }
    let m = crate::robust::median_in_place(&mut v)?;
    Some(m > peer_u)
}

/// One asset's evaluation before the fleet stage.
#[derive(Debug, Clone)]
pub struct AssetEvaluation {
    /// Blocks.
    pub blocks: Blocks,
    /// Episodes.
    pub episodes: Vec<Episode>,
    /// Block level minus its held-out center, robust σ of the baseline,
    /// `blocks × sensors` (for peers).
    pub level_u: ndarray::Array2<f64>,
    /// Block residual minus its held-out center, residual σ (for peers).
    pub resid_u: ndarray::Array2<f64>,
}

/// Scores, summarises and runs detection on one asset's aligned rows
/// (`values`, row 0 at `origin_ms`, a multiple of `p.block_ms`).
///
/// # Errors
/// [`BaselineError::SensorCount`] when `values` does not have the
/// baseline's sensors.
pub fn evaluate_asset(
    baseline: &AssetBaseline,
    cal: &Calibration,
    values: ArrayView2<'_, f64>,
    origin_ms: i64,
    p: &VerdictParams,
) -> Result<AssetEvaluation, BaselineError> {
    let mut scores = RowScores::new(values.nrows(), values.ncols());
    score_rows(baseline, values, &mut scores)?;
    let blocks = block_features(
        baseline,
        values,
        origin_ms,
        &scores,
        p.block_ms,
        p.spike_factor,
        p.min_fill,
    );
    let st = streaks(values, &scores.regime, p.min_streak_rows);
    let episodes = detect(baseline, cal, &blocks, &st, p);
    let mut level_u = ndarray::Array2::from_elem(blocks.level.dim(), f64::NAN);
    let mut resid_u = ndarray::Array2::from_elem(blocks.level.dim(), f64::NAN);
    for b in 0..blocks.len() {
        for s in 0..values.ncols() {
            let c = &cal.sensors[s];
            level_u[[b, s]] = c.level.map_or(f64::NAN, |c| blocks.level[[b, s]] - c.center);
            resid_u[[b, s]] = c.resid.map_or(f64::NAN, |c| blocks.resid[[b, s]] - c.center);
        }
    }
    Ok(AssetEvaluation { blocks, episodes, level_u, resid_u })
}

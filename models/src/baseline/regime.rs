//! Operating regimes of one asset, learned from its context sensors.
//!
//! Regime 0 is always **stopped** (it may be empty); regimes `1..=k` are
//! running regimes. Rows are classified in two steps.
//!
//! **1. Stopped (rest rule, data only).** A sensor is a *rest indicator* when
//! its values have a separate low mode at the bottom of its scale:
//!
//! ```text
//! lo   = instrument range low if given, else 0 if the 0.1 % quantile is ≥ 0, else that quantile
//! hi   = 99.9 % quantile of the sensor's values (type 7)
//! rest = lo + f · (hi - lo)                       f = rest_fraction (default 0.05)
//! a    = share of values ≤ rest                   (the low mode)
//! b    = share of values in (rest, lo + 4 f (hi - lo)]   (the gap above it)
//! indicator  ⇔  min_stop_share ≤ a ≤ 1 - min_stop_share  and  b ≤ a / 4
//! ```
//!
//! The candidates are the context sensors, or every sensor when the asset
//! has no context sensor. A row is stopped when a **strict majority** of the
//! indicators that have a value in it sit at rest, so one faulty indicator
//! reading zero cannot stop a machine that has two or more. A speed or flow
//! that drops to zero qualifies; an ambient temperature (unimodal, no gap) or
//! a low but running speed (its low mode is far above `lo + f·span`) does not.
//! The rule, `f` and the `a/4` gap are common practice, no source.
//!
//! **2. Running regimes (k-means).** Rows that are not stopped and have every
//! context sensor are robust-standardised per context sensor (median, MAD;
//! Qn when MAD = 0) and clustered with linfa's k-means (k-means++ start,
//! 10 runs, fixed seed) for `k = 2..=max_running_regimes`, on a deterministic
//! strided subsample of at most 4000 rows. The `k` with the largest mean
//! silhouette (computed on at most 1500 of those rows) is kept if its
//! silhouette is at least `min_silhouette` (default 0.7, "strong structure"
//! in Kaufman & Rousseeuw 1990, §2.2) and every cluster holds at least
//! `min_regime_share` of the running rows; otherwise there is one running
//! regime. An asset without context sensors has one running regime. Running
//! regimes are numbered in increasing order of their centroid (first context
//! sensor first). New rows go to the nearest centroid over the context
//! sensors they have.
//!
//! # References
//! * S. Lloyd (1982), "Least squares quantization in PCM", *IEEE Trans.
//!   Information Theory* 28(2), 129-137; D. Arthur and S. Vassilvitskii
//!   (2007), "k-means++: the advantages of careful seeding", *SODA*, 1027-1035.
//! * P. J. Rousseeuw (1987), "Silhouettes: a graphical aid to the
//!   interpretation and validation of cluster analysis", *J. Computational
//!   and Applied Mathematics* 20, 53-65; L. Kaufman and P. J. Rousseeuw
//!   (1990), *Finding Groups in Data*, Wiley.

use linfa::DatasetBase;
use linfa::traits::{Fit, Predict};
use linfa_clustering::KMeans;
use ndarray::{Array2, ArrayView1, ArrayView2};

use super::align::{SensorRole, SensorSpec};
use super::error::BaselineError;
use crate::robust::{QuantileType, mad, median, qn, quantiles};

/// Index of the stopped regime.
pub const STOPPED: usize = 0;

const MAX_CLUSTER_ROWS: usize = 4000;
const MAX_SILHOUETTE_ROWS: usize = 1500;

/// A rest indicator: the sensor is at rest when its value is `<= threshold`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RestRule {
    /// Sensor position in the asset.
    pub sensor: usize,
    /// At-rest threshold, sensor units.
    pub threshold: f64,
    /// Share of fit rows at rest on this sensor.
    pub rest_share: f64,
}

/// Knobs of the regime model (a subset of
/// [`AssetBaselineValidParams`](super::AssetBaselineValidParams)).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct RegimeKnobs {
    pub(crate) max_running: usize,
    pub(crate) min_regime_share: f64,
    pub(crate) min_silhouette: f64,
    pub(crate) rest_fraction: f64,
    pub(crate) min_stop_share: f64,
    pub(crate) min_rows: usize,
}

/// Fitted regime model of one asset.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RegimeModel {
    rest: Vec<RestRule>,
    context: Vec<usize>,
    center: Vec<f64>,
    scale: Vec<f64>,
    centroids: Vec<Vec<f64>>,
    occupancy: Vec<f64>,
    silhouette: Option<f64>,
}

impl RegimeModel {
    /// Number of regimes including the stopped one (`1 + running`).
    pub fn n_regimes(&self) -> usize {
        1 + self.centroids.len().max(1)
    }
    /// Number of running regimes (≥ 1).
    pub fn n_running(&self) -> usize {
        self.centroids.len().max(1)
    }
    /// The rest indicators found in the fit data.
    pub fn rest_rules(&self) -> &[RestRule] {
        &self.rest
    }
    /// Positions of the context sensors used for clustering.
    pub fn context_sensors(&self) -> &[usize] {
        &self.context
    }
    /// Robust centre (median) of each context sensor over running fit rows.
    pub fn context_center(&self) -> &[f64] {
        &self.center
    }
    /// Robust scale (MAD, Qn fallback) of each context sensor over running fit rows.
    pub fn context_scale(&self) -> &[f64] {
        &self.scale
    }
    /// Running-regime centroids in robust-standardised context units; empty
    /// when there is one running regime without clustering.
    pub fn centroids(&self) -> &[Vec<f64>] {
        &self.centroids
    }
    /// Share of classified fit rows in each regime (index 0 = stopped).
    pub fn occupancy(&self) -> &[f64] {
        &self.occupancy
    }
    /// Mean silhouette of the chosen clustering (`None` for one running regime).
    pub fn silhouette(&self) -> Option<f64> {
        self.silhouette
    }

    /// `true` when a strict majority of the rest indicators present in `row`
    /// are at rest.
    pub fn is_stopped(&self, row: ArrayView1<'_, f64>) -> bool {
        let (mut present, mut at_rest) = (0usize, 0usize);
        for r in &self.rest {
            let v = row[r.sensor];
            if v.is_finite() {
                present += 1;
                at_rest += usize::from(v <= r.threshold);
            }
        }
        present > 0 && 2 * at_rest > present
    }

    /// Standardised context value of context sensor `k` (position in
    /// [`RegimeModel::context_sensors`]) from a full row; NaN if missing.
    pub fn standardise_context(&self, row: ArrayView1<'_, f64>, k: usize) -> f64 {
        (row[self.context[k]] - self.center[k]) / self.scale[k]
    }

    /// Regime of one full row (values of all sensors in asset order):
    /// [`STOPPED`], or `1..=n_running`. `None` when the asset has context
    /// sensors and none of them has a value in the row.
    ///
    /// # Panics
    /// If `row` is shorter than the largest sensor position used.
    pub fn classify(&self, row: ArrayView1<'_, f64>) -> Option<usize> {
        if self.is_stopped(row) {
            return Some(STOPPED);
        }
        if self.context.is_empty() {
            return Some(1);
        }
        let mut best: Option<(usize, f64)> = None;
        let mut any = false;
        for (c, cen) in self.centroids.iter().enumerate() {
            let mut d = 0.0;
            for (k, m) in cen.iter().enumerate() {
                let z = self.standardise_context(row, k);
                if z.is_finite() {
                    any = true;
                    d += (z - m) * (z - m);
                }
            }
            if best.is_none_or(|(_, bd)| d < bd) {
                best = Some((c, d));
            }
        }
        if self.centroids.is_empty() {
            any = (0..self.context.len()).any(|k| row[self.context[k]].is_finite());
            return any.then_some(1);
        }
        if !any {
            return None;
        }
        best.map(|(c, _)| c + 1)
    }

    /// Fits the model to an aligned frame (`rows × sensors`) and returns it
    /// with each fit row's regime.
    pub(crate) fn fit(
        values: ArrayView2<'_, f64>,
        specs: &[SensorSpec],
        knobs: &RegimeKnobs,
    ) -> Result<(Self, Vec<Option<usize>>), BaselineError> {
        let context: Vec<usize> =
            (0..specs.len()).filter(|&j| specs[j].role == SensorRole::Context).collect();
        let candidates: Vec<usize> =
            if context.is_empty() { (0..specs.len()).collect() } else { context.clone() };
        let rest: Vec<RestRule> =
            candidates.iter().filter_map(|&j| rest_rule(&values, j, specs[j], knobs)).collect();
        let mut model = Self {
            rest,
            context: context.clone(),
            center: vec![0.0; context.len()],
            scale: vec![1.0; context.len()],
            centroids: Vec::new(),
            occupancy: Vec::new(),
            silhouette: None,
        };
        let n = values.nrows();
        let stopped: Vec<bool> = (0..n).map(|r| model.is_stopped(values.row(r))).collect();
        let running: Vec<usize> = (0..n)
            .filter(|&r| {
                !stopped[r]
                    && !context.is_empty()
                    && context.iter().all(|&j| values[[r, j]].is_finite())
            })
            .collect();
        if !context.is_empty() && running.len() >= knobs.min_rows {
            for (k, &j) in context.iter().enumerate() {
                let col: Vec<f64> = running.iter().map(|&r| values[[r, j]]).collect();
                model.center[k] = median(&col).unwrap_or(0.0);
                model.scale[k] = robust_scale(&col);
            }
            let stride = running.len().div_ceil(MAX_CLUSTER_ROWS);
            let sub: Vec<usize> = running.iter().copied().step_by(stride).collect();
            let z = Array2::from_shape_fn((sub.len(), context.len()), |(i, k)| {
                model.standardise_context(values.row(sub[i]), k)
            });
            let (centroids, sil) = choose_clusters(z.view(), knobs)?;
            model.centroids = centroids;
            model.silhouette = sil;
        }
        let labels: Vec<Option<usize>> = (0..n)
            .map(|r| {
                if values.row(r).iter().all(|v| !v.is_finite()) {
                    None
                } else {
                    model.classify(values.row(r))
                }
            })
            .collect();
        let mut occ = vec![0.0; model.n_regimes()];
        let mut tot = 0.0;
        for l in labels.iter().flatten() {
            occ[*l] += 1.0;
            tot += 1.0;
        }
        if tot > 0.0 {
            occ.iter_mut().for_each(|o| *o /= tot);
        }
        model.occupancy = occ;
        Ok((model, labels))
    }
}

/// Robust scale for standardising: normal-consistent MAD, Qn when the MAD is
/// 0, and 1 when both are 0 (a constant input).
pub(crate) fn robust_scale(x: &[f64]) -> f64 {
    match mad(x) {
        Some(s) if s > 0.0 => s,
        _ => match qn(x) {
            Some(s) if s > 0.0 => s,
            _ => 1.0,
        },
    }
}

fn rest_rule(
    values: &ArrayView2<'_, f64>,
    j: usize,
    spec: SensorSpec,
    knobs: &RegimeKnobs,
) -> Option<RestRule> {
    let x: Vec<f64> = values.column(j).iter().copied().filter(|v| v.is_finite()).collect();
    if x.len() < knobs.min_rows {
        return None;
    }
    let q = quantiles(&x, &[0.001, 0.999], QuantileType::Type7)?;
    let lo = match spec.range {
        Some([lo, _]) => lo,
        None if q[0] >= 0.0 => 0.0,
        None => q[0],
    };
    let span = q[1] - lo;
    if span.is_nan() || span <= 0.0 {
        return None;
    }
    let rest = lo + knobs.rest_fraction * span;
    let gap = lo + 4.0 * knobs.rest_fraction * span;
    let n = x.len() as f64;
    let a = x.iter().filter(|&&v| v <= rest).count() as f64 / n;
    let b = x.iter().filter(|&&v| v > rest && v <= gap).count() as f64 / n;
    (a >= knobs.min_stop_share && a <= 1.0 - knobs.min_stop_share && b <= a / 4.0)
        .then_some(RestRule { sensor: j, threshold: rest, rest_share: a })
}

type Centroids = Vec<Vec<f64>>;

fn choose_clusters(
    z: ArrayView2<'_, f64>,
    knobs: &RegimeKnobs,
) -> Result<(Centroids, Option<f64>), BaselineError> {
    let n = z.nrows();
    let mut best: Option<(Centroids, f64)> = None;
    let data = DatasetBase::from(z.to_owned());
    for k in 2..=knobs.max_running {
        if n < 10 * k {
            break;
        }
        let model = KMeans::params(k)
            .n_runs(10)
            .fit(&data)
            .map_err(|e| BaselineError::Clustering(e.to_string()))?;
        let labels = model.predict(&data);
        let mut counts = vec![0usize; k];
        labels.iter().for_each(|&l| counts[l] += 1);
        if counts.iter().any(|&c| (c as f64) < knobs.min_regime_share * n as f64) {
            continue;
        }
        let sil = silhouette(z, labels.as_slice().unwrap_or(&labels.to_vec()), k);
        if best.as_ref().is_none_or(|(_, s)| sil > *s) {
            let cents: Centroids =
                model.centroids().rows().into_iter().map(|r| r.to_vec()).collect();
            best = Some((cents, sil));
        }
    }
    match best {
        Some((mut c, s)) if s >= knobs.min_silhouette => {
            c.sort_by(|a, b| {
                a.iter()
                    .zip(b)
                    .map(|(x, y)| x.total_cmp(y))
                    .find(|o| o.is_ne())
                    .unwrap_or(std::cmp::Ordering::Equal)
            });
            Ok((c, Some(s)))
        }
        _ => Ok((Vec::new(), None)),
    }
}

/// Mean silhouette width (Rousseeuw 1987) of a labelling, Euclidean
/// distance, on an evenly strided subset of at most 1500 rows.
fn silhouette(z: ArrayView2<'_, f64>, labels: &[usize], k: usize) -> f64 {
    let n = z.nrows();
    let stride = n.div_ceil(MAX_SILHOUETTE_ROWS);
    let idx: Vec<usize> = (0..n).step_by(stride).collect();
    let mut total = 0.0;
    let mut m = 0usize;
    let mut sums = vec![0.0; k];
    let mut cnt = vec![0usize; k];
    for &i in &idx {
        sums.iter_mut().for_each(|s| *s = 0.0);
        cnt.iter_mut().for_each(|c| *c = 0);
        for &j in &idx {
            if i == j {
                continue;
            }
            let d: f64 =
                z.row(i).iter().zip(z.row(j)).map(|(a, b)| (a - b) * (a - b)).sum::<f64>().sqrt();
            sums[labels[j]] += d;
            cnt[labels[j]] += 1;
        }
        let own = labels[i];
        if cnt[own] == 0 {
            continue; // singleton: silhouette 0 by convention
        }
        let a = sums[own] / cnt[own] as f64;
        let b = (0..k)
            .filter(|&c| c != own && cnt[c] > 0)
            .map(|c| sums[c] / cnt[c] as f64)
            .fold(f64::INFINITY, f64::min);
        if b.is_finite() {
            let s = (b - a) / a.max(b);
            total += if s.is_finite() { s } else { 0.0 };
        }
        m += 1;
    }
    if m == 0 { 0.0 } else { total / m as f64 }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use ndarray::array;

    #[test]
    fn silhouette_of_two_tight_far_clusters_is_near_one() {
        let z = array![[0.0], [0.1], [10.0], [10.1]];
        let s = silhouette(z.view(), &[0, 0, 1, 1], 2);
        // hand computation from the definition: a = 0.1 for every point,
        // b = mean distance to the other cluster = 10.05, 9.95, 9.95, 10.05
        let want = (2.0 * (1.0 - 0.1 / 10.05) + 2.0 * (1.0 - 0.1 / 9.95)) / 4.0;
        assert_relative_eq!(s, want, max_relative = 1e-12);
    }

    #[test]
    fn robust_scale_falls_back_to_qn_then_one() {
        let x = [1.0, 1.0, 1.0, 1.0, 2.0, 3.0];
        assert_eq!(mad(&x), Some(0.0));
        assert!(robust_scale(&x) > 0.0);
        assert_eq!(robust_scale(&[5.0; 10]), 1.0);
    }
}

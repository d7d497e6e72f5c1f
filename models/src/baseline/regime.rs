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
//! Qn when MAD = 0) and clustered with linfa-clustering's k-means (Lloyd's
//! algorithm from k-means++ starts, best of 10 runs by inertia, at most 300
//! rounds, linfa's fixed seed) for `k = 2..=max_running_regimes`, on a deterministic
//! strided subsample of at most 4000 rows. The `k` with the largest
//! mean silhouette (computed on at most 1500 of those rows) is kept if its
//! silhouette is at least `min_silhouette` (default 0.7, "strong structure"
//! in Kaufman & Rousseeuw 1990, §2.2) and every cluster holds at least
//! `min_regime_share` of the running rows; otherwise there is one running
//! regime. An asset without context sensors has one running regime. Running
//! regimes are numbered in increasing order of their centroid (first context
//! sensor first). New rows go to the nearest centroid over the context
//! sensors they have.
//!
//! **Screen.** Most assets have one running regime, and the full search
//! above is the costliest step of a fit, so it runs only when a cheap screen
//! says it could succeed: linfa k-means (5 runs) and the silhouette on a
//! strided subsample of at most 300 of the clustered rows, for every `k`.
//! When the screen's best silhouette is below `min_silhouette − 0.1`, the
//! asset has one running regime without the full search. The 0.1 margin is
//! about six standard errors of a mean silhouette over 300 rows (silhouette
//! widths rarely spread more than 0.3), so the screen changes the outcome
//! only in cases far out in the tail (common practice, no source). On the
//! 1000-asset benchmark fleet the regimes and centroids equal those of the
//! unscreened search (10 runs for every `k`) on every asset; with 3 screen
//! runs one asset with a 0.70 silhouette lost its second running regime.
//!
//! The silhouette sorts its subset by cluster and sums the distances to each
//! cluster over one contiguous column-major block, which is what keeps the
//! full search cheap. A point alone in its cluster counts with silhouette 0
//! in the mean, as in scikit-learn's `silhouette_score`.
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
use super::sensor::type7_quantiles;
use crate::robust::{mad, median, qn};

/// Index of the stopped regime.
pub const STOPPED: usize = 0;

/// Rows clustered (strided subsample of the running rows).
const MAX_CLUSTER_ROWS: usize = 4000;
/// Rows of the clustered subsample whose silhouette is computed.
const MAX_SILHOUETTE_ROWS: usize = 1500;
/// Rows of the screening pass (strided subsample of the clustered rows).
const SCREEN_ROWS: usize = 300;
/// The full search runs when the screen's best silhouette reaches
/// `min_silhouette - SCREEN_MARGIN`.
const SCREEN_MARGIN: f64 = 0.1;
/// k-means++ starts per k in the full search.
const N_RUNS: usize = 10;
/// k-means++ starts per k in the screen (3 lost one borderline asset of
/// the benchmark fleet, see the module docs).
const SCREEN_RUNS: usize = 5;
/// Lloyd rounds per start at most (linfa's and scikit-learn's default).
const MAX_ITER: u64 = 300;
/// A run stops when its centroids move less than this (standardised
/// units; linfa's default).
const TOLERANCE: f64 = 1e-4;

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
            let mut z = Vec::with_capacity(running.len().div_ceil(stride) * context.len());
            for &r in running.iter().step_by(stride) {
                let row = values.row(r);
                z.extend((0..context.len()).map(|k| model.standardise_context(row, k)));
            }
            let (centroids, sil) = choose_clusters(Points { x: &z, d: context.len() }, knobs)?;
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
    let mut x: Vec<f64> = values.column(j).iter().copied().filter(|v| v.is_finite()).collect();
    if x.len() < knobs.min_rows {
        return None;
    }
    let q: [f64; 2] = type7_quantiles(&mut x, [0.001, 0.999])?;
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

/// Row-major `n × d` points (`x.len() = n·d`, `d ≥ 1`).
#[derive(Debug, Clone, Copy)]
struct Points<'a> {
    x: &'a [f64],
    d: usize,
}

impl<'a> Points<'a> {
    fn n(&self) -> usize {
        self.x.len() / self.d
    }
    fn row(&self, i: usize) -> &'a [f64] {
        &self.x[i * self.d..(i + 1) * self.d]
    }
    /// Every `ceil(n / max_rows)`-th row, so at most `max_rows` rows.
    fn strided(&self, max_rows: usize) -> Vec<f64> {
        let stride = self.n().div_ceil(max_rows).max(1);
        (0..self.n()).step_by(stride).flat_map(|i| self.row(i).iter().copied()).collect()
    }
}

/// One k-means solution: `k × d` centroids and a label per point.
#[derive(Debug, Clone)]
struct KMeansFit {
    centroids: Array2<f64>,
    labels: Vec<usize>,
}

/// linfa-clustering's k-means: Lloyd's algorithm (Lloyd 1982) from
/// k-means++ starts (Arthur & Vassilvitskii 2007), best of `runs` by
/// inertia, at most `MAX_ITER` rounds per run, stopping when the centroids
/// move less than `TOLERANCE`. `KMeans::params` draws the starts from a
/// Xoshiro256+ generator seeded with 42, so the result is reproducible.
/// linfa's update step counts the old centroid as one more member of its
/// cluster (an emptied cluster keeps its centroid); at convergence the
/// centroids are the cluster means to within `TOLERANCE`. The labels are
/// each point's nearest centroid of the best run.
fn kmeans(p: Points<'_>, k: usize, runs: usize) -> Result<KMeansFit, BaselineError> {
    let x = ArrayView2::from_shape((p.n(), p.d), p.x)
        .map_err(|e| BaselineError::Clustering(e.to_string()))?;
    let data = DatasetBase::from(x);
    let model = KMeans::params(k)
        .n_runs(runs)
        .max_n_iterations(MAX_ITER)
        .tolerance(TOLERANCE)
        .fit(&data)
        .map_err(|e| BaselineError::Clustering(e.to_string()))?;
    let labels = model.predict(&x).to_vec();
    Ok(KMeansFit { centroids: model.centroids().clone(), labels })
}

fn choose_clusters(
    z: Points<'_>,
    knobs: &RegimeKnobs,
) -> Result<(Centroids, Option<f64>), BaselineError> {
    if z.x.iter().any(|v| !v.is_finite()) {
        return Err(BaselineError::Clustering(
            "non-finite standardised context value in a running row".into(),
        ));
    }
    // screen: a small subsample decides whether a k could reach min_silhouette at all
    let screen = z.strided(SCREEN_ROWS);
    let sp = Points { x: &screen, d: z.d };
    let mut screen_best = f64::NEG_INFINITY;
    for k in 2..=knobs.max_running {
        if sp.n() < 10 * k {
            break;
        }
        let fit = kmeans(sp, k, SCREEN_RUNS)?;
        screen_best = screen_best.max(silhouette(sp, &fit.labels, k));
    }
    if screen_best < knobs.min_silhouette - SCREEN_MARGIN {
        return Ok((Vec::new(), None));
    }
    let n = z.n();
    let mut best: Option<(Centroids, f64)> = None;
    for k in 2..=knobs.max_running {
        if n < 10 * k {
            break;
        }
        let fit = kmeans(z, k, N_RUNS)?;
        let mut counts = vec![0usize; k];
        fit.labels.iter().for_each(|&l| counts[l] += 1);
        if counts.iter().any(|&c| (c as f64) < knobs.min_regime_share * n as f64) {
            continue;
        }
        let sil = silhouette(z, &fit.labels, k);
        if best.as_ref().is_none_or(|(_, s)| sil > *s) {
            let cents: Centroids = fit.centroids.rows().into_iter().map(|r| r.to_vec()).collect();
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

/// Sum of the Euclidean distances from `x` to the points `s..e` of the
/// column-major `cols` (`d` columns of length `m`); `tmp` is scratch.
fn block_distance_sum(
    cols: &[f64],
    m: usize,
    (s, e): (usize, usize),
    x: &[f64],
    tmp: &mut [f64],
) -> f64 {
    let t = &mut tmp[..e - s];
    t.iter_mut().for_each(|v| *v = 0.0);
    for (dd, &xv) in x.iter().enumerate() {
        for (ti, &c) in t.iter_mut().zip(&cols[dd * m + s..dd * m + e]) {
            let u = c - xv;
            *ti += u * u;
        }
    }
    let mut acc = [0.0f64; 4];
    let mut chunks = t.chunks_exact(4);
    for ch in &mut chunks {
        for l in 0..4 {
            acc[l] += ch[l].sqrt();
        }
    }
    let rest: f64 = chunks.remainder().iter().map(|v| v.sqrt()).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + rest
}

/// Mean silhouette width (Rousseeuw 1987) of a labelling, Euclidean
/// distance, on an evenly strided subset of at most `MAX_SILHOUETTE_ROWS`
/// points: `s(i) = (b - a) / max(a, b)` with `a` the mean distance to the
/// other members of the own cluster and `b` the smallest mean distance to
/// another cluster; a point alone in its cluster has `s = 0`, as in
/// scikit-learn's `silhouette_score`. The subset is ordered by cluster, so
/// each sum runs over one contiguous block.
fn silhouette(p: Points<'_>, labels: &[usize], k: usize) -> f64 {
    let n = p.n();
    let stride = n.div_ceil(MAX_SILHOUETTE_ROWS).max(1);
    let idx: Vec<usize> = (0..n).step_by(stride).collect();
    let m = idx.len();
    let mut size = vec![0usize; k];
    idx.iter().for_each(|&i| size[labels[i]] += 1);
    let mut start = vec![0usize; k + 1];
    for c in 0..k {
        start[c + 1] = start[c] + size[c];
    }
    let mut fill = start.clone();
    let mut cols = vec![0.0; p.d * m];
    let mut lab = vec![0usize; m];
    for &i in &idx {
        let c = labels[i];
        let pos = fill[c];
        fill[c] += 1;
        lab[pos] = c;
        for (dd, v) in p.row(i).iter().enumerate() {
            cols[dd * m + pos] = *v;
        }
    }
    let mut tmp = vec![0.0; m];
    let mut x = vec![0.0; p.d];
    let mut sums = vec![0.0; k];
    let mut total = 0.0;
    for pos in 0..m {
        for (dd, v) in x.iter_mut().enumerate() {
            *v = cols[dd * m + pos];
        }
        for c in 0..k {
            sums[c] = if size[c] == 0 {
                0.0
            } else {
                block_distance_sum(&cols, m, (start[c], start[c + 1]), &x, &mut tmp)
            };
        }
        let own = lab[pos];
        if size[own] < 2 {
            continue; // alone in its cluster: s = 0
        }
        let a = sums[own] / (size[own] - 1) as f64;
        let b = (0..k)
            .filter(|&c| c != own && size[c] > 0)
            .map(|c| sums[c] / size[c] as f64)
            .fold(f64::INFINITY, f64::min);
        if b.is_finite() {
            let s = (b - a) / a.max(b);
            total += if s.is_finite() { s } else { 0.0 };
        }
    }
    if m == 0 { 0.0 } else { total / m as f64 }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Three tight groups of 2-D points and a lone far point.
    const PTS: [f64; 24] = [
        0.0, 0.0, 0.3, -0.2, -0.1, 0.4, 0.2, 0.1, 5.0, 5.0, 5.4, 4.8, 4.7, 5.3, 5.1, 5.2, 0.0, 6.0,
        0.5, 6.2, -0.3, 5.7, 10.0, 0.0,
    ];

    #[test]
    fn silhouette_matches_scikit_learn() {
        let p = Points { x: &PTS, d: 2 };
        // scikit-learn 1.9.1, sklearn.metrics.silhouette_score(X, labels); the
        // lone point as its own cluster scores 0 there too
        let s = silhouette(p, &[0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 3], 4);
        assert_relative_eq!(s, 0.8304138585238886, max_relative = 1e-12);
        let s = silhouette(p, &[0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 1], 3);
        assert_relative_eq!(s, 0.7492653354960425, max_relative = 1e-12);
    }

    /// `true` when two labellings define the same partition (equal up to a
    /// permutation of the labels).
    fn same_partition(a: &[usize], b: &[usize]) -> bool {
        a.len() == b.len()
            && (0..a.len()).all(|i| (0..a.len()).all(|j| (a[i] == a[j]) == (b[i] == b[j])))
    }

    /// Checks linfa's k-means against a scikit-learn solution: the same
    /// partition, centroids equal up to a permutation (m-k-means updates stop
    /// at `TOLERANCE`, so to 1e-4), and the same inertia.
    fn check_against(
        p: Points<'_>,
        k: usize,
        labels: &[usize],
        centres: &[[f64; 2]],
        inertia: f64,
    ) {
        let fit = kmeans(p, k, N_RUNS).unwrap();
        assert!(same_partition(&fit.labels, labels), "labels {:?}", fit.labels);
        let mut got: Vec<Vec<f64>> = fit.centroids.rows().into_iter().map(|r| r.to_vec()).collect();
        got.sort_by(|a, b| a[0].total_cmp(&b[0]).then(a[1].total_cmp(&b[1])));
        let mut want = centres.to_vec();
        want.sort_by(|a, b| a[0].total_cmp(&b[0]).then(a[1].total_cmp(&b[1])));
        for (g, w) in got.iter().zip(&want) {
            assert!((g[0] - w[0]).abs() < 1e-4 && (g[1] - w[1]).abs() < 1e-4, "{g:?} vs {w:?}");
        }
        let e: f64 = (0..p.n())
            .map(|i| {
                let c = fit.centroids.row(fit.labels[i]);
                p.row(i).iter().zip(c).map(|(x, m)| (x - m) * (x - m)).sum::<f64>()
            })
            .sum();
        assert_relative_eq!(e, inertia, max_relative = 1e-6);
    }

    #[test]
    fn kmeans_matches_scikit_learn() {
        // scikit-learn 1.9.1, KMeans(n_clusters=3, n_init=10, random_state=0).fit(X[:11]):
        // labels_ [1 1 1 1 0 0 0 0 2 2 2], inertia_ 1.1383333333333336
        check_against(
            Points { x: &PTS[..22], d: 2 },
            3,
            &[1, 1, 1, 1, 0, 0, 0, 0, 2, 2, 2],
            &[[5.05, 5.075], [0.1, 0.075], [0.06666666666666667, 5.966666666666667]],
            1.1383333333333336,
        );
        // the same with the lone far point, KMeans(n_clusters=4, ...).fit(X):
        // labels_ [1 1 1 1 0 0 0 0 2 2 2 3], inertia_ 1.1383333333333334
        check_against(
            Points { x: &PTS, d: 2 },
            4,
            &[1, 1, 1, 1, 0, 0, 0, 0, 2, 2, 2, 3],
            &[[5.05, 5.075], [0.1, 0.075], [0.06666666666666667, 5.966666666666667], [10.0, 0.0]],
            1.1383333333333334,
        );
    }

    #[test]
    fn kmeans_is_deterministic() {
        let p = Points { x: &PTS, d: 2 };
        let (a, b) = (kmeans(p, 3, SCREEN_RUNS).unwrap(), kmeans(p, 3, SCREEN_RUNS).unwrap());
        assert_eq!(a.labels, b.labels);
        assert_eq!(a.centroids, b.centroids);
    }

    #[test]
    fn silhouette_of_two_tight_far_clusters_is_near_one() {
        let z = [0.0, 0.1, 10.0, 10.1];
        let s = silhouette(Points { x: &z, d: 1 }, &[0, 0, 1, 1], 2);
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

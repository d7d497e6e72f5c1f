//! Exact PELT with O(1) segment costs from prefix sums.

use super::error::PeltError;
use super::params::{Autocorrelation, Cost, PeltParams, PeltValidParams, Penalty, Pruning};
use crate::changepoint::ols_cusum::deviation_cusum;
use crate::changepoint::scale::sigma_from_differences;

/// Entry point of PELT (see [`PeltValidParams::segment`]).
#[derive(Debug, Clone, Copy)]
pub struct Pelt;

impl Pelt {
    /// Unchecked parameters for `cost`, with the defaults.
    pub fn params(cost: Cost) -> PeltParams {
        PeltParams::new(cost)
    }
}

/// The optimal segmentation of a series.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Segmentation {
    /// Segment end indices (exclusive), increasing, the last one = n (ruptures' convention).
    pub breakpoints: Vec<usize>,
    /// Optimal penalised cost: sum of segment costs + beta * changes (+ MBIC length terms).
    pub penalised_cost: f64,
    /// Penalty per change actually used (cost units).
    pub beta: f64,
    /// AR(1) coefficient used to scale the penalty (`None` when not applied).
    pub phi: Option<f64>,
    /// Marginal noise sigma used by an `L2` BIC/MBIC (`None` otherwise), data units.
    pub sigma: Option<f64>,
}

impl Segmentation {
    /// Number of change points (`breakpoints.len() - 1`).
    pub fn n_changes(&self) -> usize {
        self.breakpoints.len().saturating_sub(1)
    }
}

/// Prefix sums of the series centred on its mean (centring keeps the
/// `S2 - S1^2 / len` cancellation small for data with a large offset).
struct Prefix {
    s1: Vec<f64>,
    s2: Vec<f64>,
}

impl Prefix {
    fn new(y: &[f64]) -> Self {
        let mean = y.iter().sum::<f64>() / y.len() as f64;
        let mut s1 = Vec::with_capacity(y.len() + 1);
        let mut s2 = Vec::with_capacity(y.len() + 1);
        let (mut a, mut b) = (0.0, 0.0);
        s1.push(0.0);
        s2.push(0.0);
        for &v in y {
            let c = v - mean;
            a += c;
            b += c * c;
            s1.push(a);
            s2.push(b);
        }
        Self { s1, s2 }
    }

    #[inline]
    fn sse(&self, s: usize, t: usize) -> f64 {
        let len = (t - s) as f64;
        let d1 = self.s1[t] - self.s1[s];
        let d2 = self.s2[t] - self.s2[s];
        (d2 - d1 * d1 / len).max(0.0)
    }
}

/// The objective: segment cost plus an optional `gamma * ln(len / n)` term (MBIC).
struct Objective {
    prefix: Prefix,
    cost: Cost,
    floor: f64,
    gamma: f64,
    ln_n: f64,
}

impl Objective {
    #[inline]
    fn cost(&self, s: usize, t: usize) -> f64 {
        let len = (t - s) as f64;
        let sse = self.prefix.sse(s, t);
        let c = match self.cost {
            Cost::L2 => sse,
            Cost::Normal => len * (sse / len + self.floor).ln(),
        };
        if self.gamma != 0.0 { c + self.gamma * (len.ln() - self.ln_n) } else { c }
    }
}

impl PeltValidParams {
    /// Segment `y` by minimising the penalised cost with PELT.
    ///
    /// ```text
    /// minimise over 0 = t_0 < t_1 < ... < t_m < t_{m+1} = n, t_{i+1} - t_i >= min_size:
    ///     sum_{i=0..m} [ C(y[t_i..t_{i+1}]) + gamma ln((t_{i+1} - t_i) / n) ] + beta m
    /// L2:     C = sum (y - mean_seg)^2                        (data units^2)
    /// Normal: C = len ln(var_seg + floor), var with ddof 0     (dimensionless)
    /// F(0) = -beta;  F(t) = min_{s in R_t} F(s) + C(s, t) + beta     (Jackson et al. 2005 recursion)
    /// prune s for all ends >= t + min_size when F(s) + C(s, t) > F(t)   (Killick et al. 2012, K = 0)
    /// penalties (n = series length, f = (1 + phi) / (1 - phi), f = 1 without AR(1)):
    ///     Value(b):  beta = b,                 gamma = 0
    ///     Bic:       beta = 2 s^2 f ln n (L2), 3 f ln n (Normal),     gamma = 0
    ///     Mbic:      beta = 3 s^2 f ln n (L2), 3 f ln n (Normal),     gamma = s^2 f (L2), f (Normal)
    ///     s = noise_sigma, or MAD(diff y) / sqrt(2) / sqrt(1 - phi) (MAD normal-consistent)
    /// ```
    ///
    /// Every index is a candidate (ruptures `jump=1`). Both costs satisfy
    /// `C(s, u) >= C(s, t) + C(t, u)` (a split never costs more: the MLE of
    /// the whole segment is feasible for each part; with `floor` the bound
    /// follows from `len ln(v + floor) + len = min over (mu, sigma^2) of sum [ln sigma^2 + ((x - mu)^2 + floor) / sigma^2]`),
    /// and the MBIC length term obeys the same inequality, so K = 0 pruning is
    /// exact. Costs take O(1) from prefix sums. Run time is about
    /// O(n * mean segment length) when changes are spread through the series;
    /// it degrades to O(n^2) for a long series with no change at all.
    ///
    /// BIC uses p + 1 = 2 (mean) or 3 (mean and variance) parameters per
    /// change as the R changepoint package does (Killick & Eckley 2014; from
    /// memory); for `L2` the log-likelihood is in units of sigma^2, hence the
    /// s^2 factor (EXTERNAL-CHECKS.md section 16 uses beta = 2 s^2 ln n on the
    /// Nile). MBIC follows Zhang & Siegmund (2007), 3/2 k ln n + 1/2 sum ln(n_i/n)
    /// on the log-likelihood scale, doubled here (the R `wbs` documentation of
    /// `mbic.penalty` states the same form); it was derived for a change in
    /// mean, and its use with the `Normal` cost is common practice, no source.
    ///
    /// # Errors
    /// [`PeltError::NonFinite`] for a NaN/infinite value (with its index),
    /// [`PeltError::TooShort`] when `y.len() < min_size`, and
    /// [`PeltError::ZeroScale`] when BIC/MBIC need a sigma and the
    /// difference-based estimate is 0.
    ///
    /// # Panics
    /// Never.
    ///
    /// # References
    /// R. Killick, P. Fearnhead, I. A. Eckley (2012), "Optimal detection of changepoints with a
    /// linear computational cost", Journal of the American Statistical Association 107(500),
    /// 1590-1598.
    /// B. Jackson, J. D. Scargle, D. Barnes, et al. (2005), "An algorithm for optimal partitioning
    /// of data on an interval", IEEE Signal Processing Letters 12(2), 105-108.
    /// G. Schwarz (1978), "Estimating the dimension of a model", Annals of Statistics 6(2), 461-464.
    /// N. R. Zhang, D. O. Siegmund (2007), "A modified Bayes information criterion with
    /// applications to the analysis of comparative genomic hybridization data", Biometrics 63(1),
    /// 22-32.
    /// R. Killick, I. A. Eckley (2014), "changepoint: An R package for changepoint analysis",
    /// Journal of Statistical Software 58(3), 1-19.
    pub fn segment(&self, y: &[f64]) -> Result<Segmentation, PeltError> {
        if let Some((index, &value)) = y.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(PeltError::NonFinite { index, value });
        }
        let n = y.len();
        if n < self.min_size || n == 0 {
            return Err(PeltError::TooShort { n, min_size: self.min_size });
        }
        let ln_n = (n as f64).ln();
        let needs_scale = !matches!(self.penalty, Penalty::Value(_));
        let sigma_d = match (needs_scale, self.cost, self.noise_sigma) {
            (true, Cost::L2, None) => {
                let s = sigma_from_differences(y).unwrap_or(0.0);
                if s <= 0.0 {
                    return Err(PeltError::ZeroScale);
                }
                Some(s)
            }
            _ => None,
        };
        // (beta, gamma, sigma) for a given AR(1) coefficient
        let penalty_for = |phi: Option<f64>| {
            let f = phi.map_or(1.0, |p| (1.0 + p) / (1.0 - p));
            let sigma = match (needs_scale, self.cost) {
                (true, Cost::L2) => {
                    self.noise_sigma.or(sigma_d.map(|s| s / (1.0 - phi.unwrap_or(0.0)).sqrt()))
                }
                _ => None,
            };
            let s2 = sigma.map_or(1.0, |s| s * s);
            let (beta, gamma) = match self.penalty {
                Penalty::Value(b) => (b, 0.0),
                Penalty::Bic => {
                    let p_plus_1 = match self.cost {
                        Cost::L2 => 2.0,
                        Cost::Normal => 3.0,
                    };
                    (p_plus_1 * s2 * f * ln_n, 0.0)
                }
                Penalty::Mbic => (3.0 * s2 * f * ln_n, s2 * f),
            };
            (beta, gamma, sigma)
        };
        let mut obj = Objective {
            prefix: Prefix::new(y),
            cost: self.cost,
            floor: self.variance_floor,
            gamma: 0.0,
            ln_n,
        };
        let mut phi = match (needs_scale, self.autocorrelation) {
            (true, Autocorrelation::Ar1) => {
                // start from the series with its single best level split removed, so one
                // large step does not inflate phi (and hide itself behind the penalty)
                let k = deviation_cusum(y)
                    .iter()
                    .enumerate()
                    .take(n.saturating_sub(2))
                    .skip(1)
                    .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
                    .map_or(n, |(i, _)| i + 1);
                Some(within_segment_lag1(y, &[k, n]).clamp(0.0, 0.99))
            }
            _ => None,
        };
        let (mut beta, gamma, mut sigma) = penalty_for(phi);
        obj.gamma = gamma;
        let (mut breakpoints, mut penalised_cost) =
            pelt_core(&obj, n, self.min_size, beta, self.pruning);
        // then re-estimate phi within the segments found, while that lowers it
        for _ in 0..4 {
            let Some(p1) = phi else { break };
            if breakpoints.len() < 2 {
                break;
            }
            let p2 = within_segment_lag1(y, &breakpoints).clamp(0.0, 0.99);
            if p2 >= p1 - 1e-3 {
                break;
            }
            phi = Some(p2);
            let (b, g, s) = penalty_for(phi);
            (beta, sigma, obj.gamma) = (b, s, g);
            (breakpoints, penalised_cost) = pelt_core(&obj, n, self.min_size, beta, self.pruning);
        }
        Ok(Segmentation { breakpoints, penalised_cost, beta, phi, sigma })
    }
}

/// Pooled lag-1 autocorrelation of `y` with each segment's own mean removed.
fn within_segment_lag1(y: &[f64], breakpoints: &[usize]) -> f64 {
    let (mut c0, mut c1, mut start) = (0.0, 0.0, 0);
    for &end in breakpoints {
        let seg = &y[start..end];
        let mean = seg.iter().sum::<f64>() / seg.len() as f64;
        c0 += seg.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>();
        c1 += seg.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum::<f64>();
        start = end;
    }
    if c0 > 0.0 { c1 / c0 } else { 0.0 }
}

/// The PELT recursion; returns (breakpoints, F(n)).
fn pelt_core(
    obj: &Objective,
    n: usize,
    m: usize,
    beta: f64,
    pruning: Pruning,
) -> (Vec<usize>, f64) {
    let mut f = vec![0.0; n + 1];
    let mut last = vec![0usize; n + 1];
    f[0] = -beta;
    // candidate last-change positions, increasing; `until[i]` = first end at which
    // candidate i may be dropped (usize::MAX = not yet pruned)
    let mut cands: Vec<usize> = vec![0];
    let mut until: Vec<usize> = vec![usize::MAX];
    let mut vals: Vec<f64> = Vec::new();
    for t in m..=n {
        if t - m >= m {
            cands.push(t - m);
            until.push(usize::MAX);
        }
        if pruning == Pruning::Exact {
            let mut j = 0;
            for i in 0..cands.len() {
                if until[i] > t {
                    cands[j] = cands[i];
                    until[j] = until[i];
                    j += 1;
                }
            }
            cands.truncate(j);
            until.truncate(j);
        }
        vals.clear();
        let (mut best, mut arg) = (f64::INFINITY, 0usize);
        for &s in &cands {
            let v = f[s] + obj.cost(s, t) + beta;
            vals.push(v);
            // strict: ties keep the smallest s, like ruptures' min() over increasing candidates
            if v < best {
                best = v;
                arg = s;
            }
        }
        f[t] = best;
        last[t] = arg;
        let bound = best + beta;
        match pruning {
            Pruning::Exact => {
                // a small slack so rounding never prunes a candidate that ties the optimum
                let slack = 1e-9 * (best.abs() + beta.abs() + 1.0);
                for (u, &v) in until.iter_mut().zip(&vals) {
                    if *u == usize::MAX && v > bound + slack {
                        *u = t + m;
                    }
                }
            }
            Pruning::RupturesCompatible => {
                let mut j = 0;
                for i in 0..cands.len() {
                    if vals[i] <= bound {
                        cands[j] = cands[i];
                        j += 1;
                    }
                }
                cands.truncate(j);
                until.truncate(j);
            }
        }
    }
    let mut bkps = Vec::new();
    let mut t = n;
    while t > 0 {
        bkps.push(t);
        t = last[t];
    }
    bkps.reverse();
    (bkps, f[n])
}

#[cfg(test)]
pub(crate) mod oracle {
    //! Brute-force optimal partitioning (Jackson et al. 2005): every admissible
    //! last change at every end, no pruning; the test oracle for PELT.
    use super::*;

    /// Same objective as [`PeltValidParams::segment`] with an explicit beta and no MBIC term.
    pub(crate) fn optimal_partitioning(
        y: &[f64],
        cost: Cost,
        m: usize,
        beta: f64,
    ) -> (Vec<usize>, f64) {
        let n = y.len();
        let obj = Objective { prefix: Prefix::new(y), cost, floor: 1e-6, gamma: 0.0, ln_n: 0.0 };
        let mut f = vec![f64::INFINITY; n + 1];
        let mut last = vec![0usize; n + 1];
        f[0] = -beta;
        for t in m..=n {
            for s in 0..=(t - m) {
                if s != 0 && s < m {
                    continue;
                }
                let v = f[s] + obj.cost(s, t) + beta;
                if v < f[t] {
                    f[t] = v;
                    last[t] = s;
                }
            }
        }
        let mut bkps = Vec::new();
        let mut t = n;
        while t > 0 {
            bkps.push(t);
            t = last[t];
        }
        bkps.reverse();
        (bkps, f[n])
    }
}

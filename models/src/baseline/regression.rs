//! Robust regression of each condition sensor on the operating context.
//!
//! ```text
//! x = [1, d_2 .. d_K, z_1, z_1², .., z_C, z_C²]
//!     d_g  = 1 if the row is in running regime g (g ≥ 2; regime 1 is the reference)
//!     z_c  = (context_c - median_c) / scale_c      robust-standardised context
//! y ≈ xᵀβ,   β by Huber M-estimation (IRLS):
//!     r = y - Xβ,  s = MAD(r),  w_i = min(1, k s / |r_i|),  β ← (XᵀWX)⁻¹ XᵀWy
//! ```
//!
//! The quadratic in each context variable covers the affinity-law shapes of
//! pumps and fans (head ∝ speed², and power ∝ speed³ closely over a running
//! range) without naming any quantity. Fitted on running rows only (a
//! stopped machine has its own per-sensor baseline), on a deterministic
//! strided subsample of at most 20 000 rows; the residual scale (MAD, Qn
//! fallback, resolution floor) and the residual AR(1) φ come from every fit
//! row. Residual units: those of the sensor; `residual z = r / scale`.
//!
//! Each IRLS step forms `XᵀWX` as `XᵀX − Σ (1 − w_i) x_i x_iᵀ` over the
//! down-weighted rows only (`XᵀX` once per fit), since Huber weights are 1
//! for most rows; the result equals direct accumulation up to rounding.
//!
//! # References
//! P. J. Huber (1973), "Robust regression: asymptotics, conjectures and Monte
//! Carlo", *Annals of Statistics* 1(5), 799-821; P. W. Holland and R. E.
//! Welsch (1977), "Robust regression using iteratively reweighted
//! least-squares", *Communications in Statistics — Theory and Methods* 6(9),
//! 813-827 (IRLS; k = 1.345 gives 95 % efficiency at the normal).

use ndarray::{ArrayView1, ArrayView2};

use super::regime::RegimeModel;
use super::sensor::{floored_scale, pooled_phi, runs};

const MAX_FIT_ROWS: usize = 20_000;

/// Fitted robust regression of one condition sensor on the context.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ConditionRegression {
    target: usize,
    n_running: usize,
    coef: Vec<f64>,
    residual_scale: f64,
    residual_phi: Option<f64>,
    n_fit: usize,
    iterations: usize,
}

impl ConditionRegression {
    /// Sensor position of the modelled condition sensor.
    pub fn target(&self) -> usize {
        self.target
    }
    /// Coefficients in the order `[1, d_2..d_K, z_1, z_1², ..]` (sensor units).
    pub fn coefficients(&self) -> &[f64] {
        &self.coef
    }
    /// Robust residual scale (sensor units).
    pub fn residual_scale(&self) -> f64 {
        self.residual_scale
    }
    /// Lag-1 autocorrelation of the residuals.
    pub fn residual_phi(&self) -> Option<f64> {
        self.residual_phi
    }
    /// Rows used.
    pub fn n_fit(&self) -> usize {
        self.n_fit
    }
    /// IRLS iterations used.
    pub fn iterations(&self) -> usize {
        self.iterations
    }

    /// Prediction for one full row in running regime `regime` (≥ 1);
    /// `None` when a context value is missing or the regime is stopped.
    pub fn predict(
        &self,
        regimes: &RegimeModel,
        row: ArrayView1<'_, f64>,
        regime: usize,
    ) -> Option<f64> {
        // the dot product of `features` with the coefficients, without
        // building the feature vector (this runs for every row and sensor)
        if regime == 0 {
            return None;
        }
        let c = &self.coef;
        let mut y = c[0];
        if regime >= 2 && regime <= self.n_running {
            y += c[regime - 1];
        }
        let off = self.n_running;
        for k in 0..regimes.context_sensors().len() {
            let z = regimes.standardise_context(row, k);
            if !z.is_finite() {
                return None;
            }
            y += c[off + 2 * k] * z + c[off + 2 * k + 1] * z * z;
        }
        Some(y)
    }

    /// Residual z of one row: `(y - ŷ) / residual_scale`; NaN when `y` or
    /// the prediction is missing.
    pub fn residual_z(
        &self,
        regimes: &RegimeModel,
        row: ArrayView1<'_, f64>,
        regime: usize,
    ) -> f64 {
        match self.predict(regimes, row, regime) {
            Some(p) => (row[self.target] - p) / self.residual_scale,
            None => f64::NAN,
        }
    }
}

fn n_features(n_context: usize, n_running: usize) -> usize {
    1 + (n_running - 1) + 2 * n_context
}

fn features(
    regimes: &RegimeModel,
    n_running: usize,
    row: ArrayView1<'_, f64>,
    regime: usize,
    x: &mut [f64],
) -> Option<()> {
    if regime == 0 {
        return None;
    }
    x[0] = 1.0;
    for g in 2..=n_running {
        x[g - 1] = f64::from(u8::from(regime == g));
    }
    let off = n_running;
    for k in 0..regimes.context_sensors().len() {
        let z = regimes.standardise_context(row, k);
        if !z.is_finite() {
            return None;
        }
        x[off + 2 * k] = z;
        x[off + 2 * k + 1] = z * z;
    }
    Some(())
}

/// Solves the symmetric system `a β = b` (`m × m`, row-major) by Gaussian
/// elimination with partial pivoting after adding a tiny ridge
/// `1e-10 · trace / m` so collinear features do not break the solve.
fn solve(mut a: Vec<f64>, mut b: Vec<f64>, m: usize) -> Option<Vec<f64>> {
    let ridge = 1e-10 * (0..m).map(|i| a[i * m + i]).sum::<f64>() / m as f64;
    for i in 0..m {
        a[i * m + i] += ridge;
    }
    for c in 0..m {
        let piv = (c..m).max_by(|&i, &j| a[i * m + c].abs().total_cmp(&a[j * m + c].abs()))?;
        if a[piv * m + c].abs() < 1e-300 {
            return None;
        }
        if piv != c {
            for k in 0..m {
                a.swap(c * m + k, piv * m + k);
            }
            b.swap(c, piv);
        }
        for i in c + 1..m {
            let f = a[i * m + c] / a[c * m + c];
            if f != 0.0 {
                for k in c..m {
                    a[i * m + k] -= f * a[c * m + k];
                }
                b[i] -= f * b[c];
            }
        }
    }
    let mut x = vec![0.0; m];
    for i in (0..m).rev() {
        let s: f64 = (i + 1..m).map(|k| a[i * m + k] * x[k]).sum();
        x[i] = (b[i] - s) / a[i * m + i];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// Upper triangle of `Σ c_i x_i x_iᵀ` and `Σ c_i x_i y_i` added into `a`, `b`
/// over the rows `i` of `xs` (row-major, `m` columns) with `c_i ≠ 0`.
fn accumulate(
    xs: &[f64],
    y: &[f64],
    c: impl Fn(usize) -> f64,
    m: usize,
    a: &mut [f64],
    b: &mut [f64],
) {
    for (i, (x, &yi)) in xs.chunks_exact(m).zip(y).enumerate() {
        let ci = c(i);
        if ci == 0.0 {
            continue;
        }
        for p in 0..m {
            let wx = ci * x[p];
            b[p] += wx * yi;
            for (aq, xq) in a[p * m + p..(p + 1) * m].iter_mut().zip(&x[p..]) {
                *aq += wx * xq;
            }
        }
    }
}

/// Weighted least squares `(XᵀWX)⁻¹ XᵀWy` from the unweighted normal
/// equations `gram = XᵀX`, `xty = Xᵀy` (upper triangles): since Huber weights
/// are 1 for most rows, `XᵀWX = XᵀX − Σ_{w_i<1} (1 − w_i) x_i x_iᵀ` touches
/// only the down-weighted rows.
fn weighted_ls(
    xs: &[f64],
    y: &[f64],
    w: &[f64],
    m: usize,
    gram: &[f64],
    xty: &[f64],
) -> Option<Vec<f64>> {
    let mut a = gram.to_vec();
    let mut b = xty.to_vec();
    accumulate(xs, y, |i| if w[i] < 1.0 { w[i] - 1.0 } else { 0.0 }, m, &mut a, &mut b);
    for p in 0..m {
        for q in 0..p {
            a[p * m + q] = a[q * m + p];
        }
    }
    solve(a, b, m)
}

/// Fits the regression of sensor `target` on the context over the running
/// rows of `values`, with Huber constant `k`. `None` without context sensors
/// or with fewer than `max(min_rows, 5 × features)` usable rows.
pub(crate) fn fit_regression(
    values: ArrayView2<'_, f64>,
    labels: &[Option<usize>],
    regimes: &RegimeModel,
    target: usize,
    resolution: Option<f64>,
    k: f64,
    min_rows: usize,
) -> Option<ConditionRegression> {
    let nc = regimes.context_sensors().len();
    if nc == 0 {
        return None;
    }
    let n_running = regimes.n_running();
    let m = n_features(nc, n_running);
    let n = values.nrows();
    let mut x = vec![0.0; m];
    let usable = |r: usize, x: &mut [f64]| -> bool {
        match labels[r] {
            Some(g) if g >= 1 && values[[r, target]].is_finite() => {
                features(regimes, n_running, values.row(r), g, x).is_some()
            }
            _ => false,
        }
    };
    let rows: Vec<usize> = (0..n).filter(|&r| usable(r, &mut x)).collect();
    if rows.len() < min_rows.max(5 * m) {
        return None;
    }
    let stride = rows.len().div_ceil(MAX_FIT_ROWS);
    let sub: Vec<usize> = rows.iter().copied().step_by(stride).collect();
    let mut xs = vec![0.0; sub.len() * m];
    let mut y = Vec::with_capacity(sub.len());
    for (i, &r) in sub.iter().enumerate() {
        usable(r, &mut xs[i * m..(i + 1) * m]);
        y.push(values[[r, target]]);
    }
    let mut gram = vec![0.0; m * m];
    let mut xty = vec![0.0; m];
    accumulate(&xs, &y, |_| 1.0, m, &mut gram, &mut xty);
    let mut w = vec![1.0; y.len()];
    let mut beta = weighted_ls(&xs, &y, &w, m, &gram, &xty)?;
    let mut scratch = Vec::new();
    let mut iterations = 0;
    let mut resid = vec![0.0; y.len()];
    for it in 1..=50 {
        iterations = it;
        for ((ri, x), yi) in resid.iter_mut().zip(xs.chunks_exact(m)).zip(&y) {
            let f: f64 = x.iter().zip(&beta).map(|(a, b)| a * b).sum();
            *ri = yi - f;
        }
        let (_, s, _) = floored_scale(&resid, resolution, &mut scratch)?;
        for (wi, r) in w.iter_mut().zip(&resid) {
            let u = r.abs() / s;
            *wi = if u <= k { 1.0 } else { k / u };
        }
        let next = weighted_ls(&xs, &y, &w, m, &gram, &xty)?;
        let big = beta.iter().fold(1.0f64, |a, b| a.max(b.abs()));
        let step = next.iter().zip(&beta).fold(0.0f64, |a, (p, q)| a.max((p - q).abs()));
        beta = next;
        if step <= 1e-9 * big {
            break;
        }
    }
    // residuals over every usable row, in row order, for scale and φ
    let mut full = vec![f64::NAN; n];
    for &r in &rows {
        usable(r, &mut x);
        let f: f64 = x.iter().zip(&beta).map(|(a, b)| a * b).sum();
        full[r] = values[[r, target]] - f;
    }
    let all: Vec<f64> = rows.iter().map(|&r| full[r]).collect();
    let (_, residual_scale, _) = floored_scale(&all, resolution, &mut scratch)?;
    let segments = runs(n, |r| full[r].is_finite());
    let residual_phi = pooled_phi(&full, &segments);
    Some(ConditionRegression {
        target,
        n_running,
        coef: beta,
        residual_scale,
        residual_phi,
        n_fit: rows.len(),
        iterations,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn solve_matches_a_hand_solved_system() {
        // [2 1; 1 3] x = [3; 5]  →  x = (0.8, 1.4)
        let x = solve(vec![2.0, 1.0, 1.0, 3.0], vec![3.0, 5.0], 2).unwrap();
        assert_relative_eq!(x[0], 0.8, max_relative = 1e-8);
        assert_relative_eq!(x[1], 1.4, max_relative = 1e-8);
    }
}

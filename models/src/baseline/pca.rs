//! PCA monitoring: Hotelling's T², the squared prediction error (SPE, Q),
//! their control limits, reconstruction-based contributions and the
//! reconstruction of one sensor from the others.
//!
//! The model is fitted on already standardised rows `z` (robust-standardised
//! running rows in [`AssetBaseline`](super::AssetBaseline); mean/sd-scaled
//! data in the reference checks). With `P` the `p × A` retained loadings and
//! `Λ = diag(λ_1..λ_A)`:
//!
//! ```text
//! t   = Pᵀ (z - z̄)                     scores
//! T²  = Σ_a t_a² / λ_a = (z-z̄)ᵀ D (z-z̄),     D = P Λ⁻¹ Pᵀ
//! SPE = ‖C̃ (z - z̄)‖² = (z-z̄)ᵀ C̃ (z-z̄),       C̃ = I - P Pᵀ
//! ```
//!
//! All quantities are in squared standardised units (unitless).
//!
//! # References
//! * J. E. Jackson and G. S. Mudholkar (1979), "Control procedures for
//!   residuals associated with principal component analysis",
//!   *Technometrics* 21(3), 341-349.
//! * G. E. P. Box (1954), "Some theorems on quadratic forms applied in the
//!   study of analysis of variance problems, I", *Annals of Mathematical
//!   Statistics* 25(2), 290-302; P. Nomikos and J. F. MacGregor (1995),
//!   "Multivariate SPC charts for monitoring batch processes",
//!   *Technometrics* 37(1), 41-59.
//! * N. D. Tracy, J. C. Young and R. L. Mason (1992), "Multivariate control
//!   charts for individual observations", *Journal of Quality Technology*
//!   24(2), 88-95; NIST/SEMATECH e-Handbook of Statistical Methods, §6.5.4.3
//!   (Phase II limit).
//! * R. Dunia, S. J. Qin, T. F. Edgar and T. J. McAvoy (1996),
//!   "Identification of faulty sensors using principal component analysis",
//!   *AIChE Journal* 42(10), 2797-2812.
//! * C. F. Alcala and S. J. Qin (2009), "Reconstruction-based contribution
//!   for process monitoring", *Automatica* 45(7), 1593-1600.

use ndarray::{Array1, Array2, ArrayView1, ArrayView2, Axis};
use statrs::distribution::{ChiSquared, ContinuousCDF, FisherSnedecor};

use super::eigen::symmetric_eigen;
use crate::dist::{beta_ppf, norm_ppf};

/// Eigenvalues, eigenvectors, column means and row count of a fit.
type Decomposition = (Array1<f64>, Array2<f64>, Array1<f64>, usize);

/// Fitted PCA model on standardised data.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PcaModel {
    mean: Array1<f64>,
    eigenvalues: Array1<f64>,
    loadings: Array2<f64>,
    n_fit: usize,
    /// `C̃ = I - P Pᵀ`
    residual_projector: Array2<f64>,
    /// `D = P Λ⁻¹ Pᵀ`
    t2_matrix: Array2<f64>,
}

/// T² and SPE control limits at one false-alarm probability `alpha`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PcaLimits {
    /// False-alarm probability per row.
    pub alpha: f64,
    /// T², new observations (Phase II, F form).
    pub t2_phase2: f64,
    /// T², the training rows themselves (Phase I, beta form).
    pub t2_phase1: f64,
    /// T², large-sample χ²_A form.
    pub t2_chi2: f64,
    /// SPE, Jackson & Mudholkar (1979).
    pub spe_jm: f64,
    /// SPE, Box (1954) g·χ²_h.
    pub spe_box: f64,
}

/// Result of reconstructing one sensor from the others (Dunia et al. 1996).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reconstruction {
    /// Estimated fault magnitude along the sensor direction `f̂ = (C̃z)_i / C̃_ii`
    /// (standardised units).
    pub fault: f64,
    /// SPE after removing `f̂ ξ_i` from the row: `SPE − RBC_i`.
    pub spe_after: f64,
}

impl PcaModel {
    /// Fits PCA to the rows of `z` (`n × p`, no NaN), keeping the smallest
    /// number of components whose cumulative share of the total variance
    /// reaches `variance_share` (clamped to `1..=p-1` so a residual space
    /// remains). Covariance divisor `n - 1`.
    ///
    /// Returns `None` for `n < 3`, `p < 2`, non-finite input or zero variance.
    ///
    /// | Parameter        | Units | Range    | Purpose |
    /// |------------------|-------|----------|---------|
    /// | `variance_share` | share | (0, 1]   | cumulative explained variance to keep; 0.9 is common practice, no source |
    pub fn fit(z: ArrayView2<'_, f64>, variance_share: f64) -> Option<Self> {
        let (eig, vecs, mean, n) = Self::decompose(z)?;
        let p = eig.len();
        let total: f64 = eig.iter().map(|v| v.max(0.0)).sum();
        let mut cum = 0.0;
        let mut a = p;
        for (i, l) in eig.iter().enumerate() {
            cum += l.max(0.0);
            if cum >= variance_share * total * (1.0 - 1e-12) {
                a = i + 1;
                break;
            }
        }
        Some(Self::assemble(eig, &vecs, mean, n, a.clamp(1, p - 1)))
    }

    /// Fits PCA keeping exactly `n_components` (clamped to `1..=p-1`).
    /// `None` as for [`PcaModel::fit`].
    pub fn fit_with_components(z: ArrayView2<'_, f64>, n_components: usize) -> Option<Self> {
        let (eig, vecs, mean, n) = Self::decompose(z)?;
        let p = eig.len();
        Some(Self::assemble(eig, &vecs, mean, n, n_components.clamp(1, p - 1)))
    }

    fn decompose(z: ArrayView2<'_, f64>) -> Option<Decomposition> {
        let (n, p) = z.dim();
        if n < 3 || p < 2 || z.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let mean = z.mean_axis(Axis(0))?;
        let c = &z - &mean;
        let cov = c.t().dot(&c) / (n as f64 - 1.0);
        let (eig, vecs) = symmetric_eigen(cov.view());
        if eig[0].is_nan() || eig[0] <= 0.0 {
            return None;
        }
        Some((eig, vecs, mean, n))
    }

    fn assemble(
        eig: Array1<f64>,
        vecs: &Array2<f64>,
        mean: Array1<f64>,
        n: usize,
        a: usize,
    ) -> Self {
        let p = eig.len();
        let loadings = Array2::from_shape_fn((p, a), |(i, j)| vecs[[i, j]]);
        let mut residual_projector = Array2::<f64>::eye(p) - loadings.dot(&loadings.t());
        // symmetrise against rounding
        for i in 0..p {
            for j in 0..i {
                let m = 0.5 * (residual_projector[[i, j]] + residual_projector[[j, i]]);
                residual_projector[[i, j]] = m;
                residual_projector[[j, i]] = m;
            }
        }
        let mut scaled = loadings.clone();
        for (k, mut col) in scaled.columns_mut().into_iter().enumerate() {
            col /= eig[k].max(f64::MIN_POSITIVE);
        }
        let t2_matrix = scaled.dot(&loadings.t());
        Self { mean, eigenvalues: eig, loadings, n_fit: n, residual_projector, t2_matrix }
    }

    /// Number of sensors `p`.
    pub fn n_features(&self) -> usize {
        self.mean.len()
    }
    /// Retained components `A`.
    pub fn n_components(&self) -> usize {
        self.loadings.ncols()
    }
    /// Rows used in the fit `n`.
    pub fn n_fit(&self) -> usize {
        self.n_fit
    }
    /// All `p` covariance eigenvalues, descending (squared standardised units).
    pub fn eigenvalues(&self) -> ArrayView1<'_, f64> {
        self.eigenvalues.view()
    }
    /// Retained loadings `P` (`p × A`, columns unit length, largest entry positive).
    pub fn loadings(&self) -> ArrayView2<'_, f64> {
        self.loadings.view()
    }
    /// Mean of the fitted standardised rows.
    pub fn mean(&self) -> ArrayView1<'_, f64> {
        self.mean.view()
    }
    /// Eigenvalues of the discarded components `λ_{A+1..p}`.
    pub fn residual_eigenvalues(&self) -> ArrayView1<'_, f64> {
        self.eigenvalues.slice_axis(Axis(0), ndarray::Slice::from(self.n_components()..))
    }

    fn centred(&self, z: ArrayView1<'_, f64>, out: &mut [f64]) {
        assert_eq!(
            z.len(),
            self.n_features(),
            "pca: row has {} values, model {}",
            z.len(),
            self.n_features()
        );
        for ((o, v), m) in out.iter_mut().zip(z.iter()).zip(self.mean.iter()) {
            *o = v - m;
        }
    }

    /// Hotelling's T² of one row (NaN if any value is NaN).
    ///
    /// # Panics
    /// If `z.len() != p`.
    pub fn t2(&self, z: ArrayView1<'_, f64>) -> f64 {
        let mut c = vec![0.0; self.n_features()];
        self.centred(z, &mut c);
        quad(&self.t2_matrix, &c)
    }

    /// SPE (Q statistic) of one row (NaN if any value is NaN).
    ///
    /// # Panics
    /// If `z.len() != p`.
    pub fn spe(&self, z: ArrayView1<'_, f64>) -> f64 {
        let mut c = vec![0.0; self.n_features()];
        self.centred(z, &mut c);
        quad(&self.residual_projector, &c)
    }

    /// Reconstruction-based contributions of each sensor to SPE
    /// (`M = C̃`) and to T² (`M = D`), written into `rbc_spe` and `rbc_t2`:
    ///
    /// ```text
    /// RBC_i = (ξ_iᵀ M z)² / (ξ_iᵀ M ξ_i) = (M z)_i² / M_ii
    /// ```
    ///
    /// `RBC_SPE_i` equals the drop in SPE when sensor `i` is reconstructed
    /// from the others; the faulty sensor has the largest one under a single
    /// sensor fault. RBC for T² is reported but is not diagnostic in general.
    /// A sensor fully explained by the retained components (`M_ii ≈ 0`) gets 0.
    ///
    /// # Panics
    /// If any slice length differs from `p`.
    pub fn rbc(&self, z: ArrayView1<'_, f64>, rbc_spe: &mut [f64], rbc_t2: &mut [f64]) {
        let p = self.n_features();
        assert!(rbc_spe.len() == p && rbc_t2.len() == p, "pca: rbc outputs must have p entries");
        let mut c = vec![0.0; p];
        self.centred(z, &mut c);
        rbc_into(&self.residual_projector, &c, rbc_spe);
        rbc_into(&self.t2_matrix, &c, rbc_t2);
    }

    /// Reconstructs sensor `i` of row `z` from the others along `ξ_i`
    /// (Dunia et al. 1996): the fault estimate `f̂` minimising
    /// `SPE(z − f ξ_i)` and the SPE that remains.
    ///
    /// # Panics
    /// If `z.len() != p` or `i >= p`.
    pub fn reconstruct(&self, z: ArrayView1<'_, f64>, i: usize) -> Reconstruction {
        let p = self.n_features();
        assert!(i < p, "pca: sensor index {i} out of range 0..{p}");
        let mut c = vec![0.0; p];
        self.centred(z, &mut c);
        let row = self.residual_projector.row(i);
        let mz: f64 = row.iter().zip(&c).map(|(a, b)| a * b).sum();
        let mii = self.residual_projector[[i, i]];
        let spe = quad(&self.residual_projector, &c);
        if mii <= 1e-12 {
            return Reconstruction { fault: 0.0, spe_after: spe };
        }
        let fault = mz / mii;
        Reconstruction { fault, spe_after: (spe - mz * mz / mii).max(0.0) }
    }

    /// Control limits at false-alarm probability `alpha` from this model's
    /// `A`, `n` and residual eigenvalues.
    ///
    /// # Panics
    /// If `alpha` is not in `(0, 1)`.
    pub fn limits(&self, alpha: f64) -> PcaLimits {
        let a = self.n_components();
        let n = self.n_fit;
        let resid = self.residual_eigenvalues().to_vec();
        PcaLimits {
            alpha,
            t2_phase2: t2_limit_phase2(a, n, alpha),
            t2_phase1: t2_limit_phase1(a, n, alpha),
            t2_chi2: t2_limit_chi2(a, alpha),
            spe_jm: spe_limit_jm(&resid, alpha),
            spe_box: spe_limit_box(&resid, alpha),
        }
    }
}

fn quad(m: &Array2<f64>, c: &[f64]) -> f64 {
    let mut s = 0.0;
    for (i, row) in m.rows().into_iter().enumerate() {
        let r: f64 = row.iter().zip(c).map(|(a, b)| a * b).sum();
        s += c[i] * r;
    }
    s
}

fn rbc_into(m: &Array2<f64>, c: &[f64], out: &mut [f64]) {
    for (i, row) in m.rows().into_iter().enumerate() {
        let mz: f64 = row.iter().zip(c).map(|(a, b)| a * b).sum();
        let mii = m[[i, i]];
        out[i] = if mii > 1e-12 { mz * mz / mii } else { 0.0 };
    }
}

fn check_alpha(alpha: f64) {
    assert!(alpha > 0.0 && alpha < 1.0, "alpha must be in (0, 1), got {alpha}");
}

/// Phase II T² limit for a new observation, `A` components estimated from
/// `n` rows:
///
/// ```text
/// T²_α = A (n+1)(n-1) / (n (n-A)) · F_{1-α}(A, n-A)
/// ```
///
/// # Panics
/// If `alpha ∉ (0, 1)` or `n <= A`.
///
/// # References
/// NIST/SEMATECH e-Handbook of Statistical Methods, §6.5.4.3; T. P. Ryan
/// (2000), *Statistical Methods for Quality Improvement*, 2nd ed., Wiley, ch. 9.
pub fn t2_limit_phase2(a: usize, n: usize, alpha: f64) -> f64 {
    check_alpha(alpha);
    assert!(n > a && a > 0, "t2_limit_phase2: need n > A > 0, got n = {n}, A = {a}");
    let (af, nf) = (a as f64, n as f64);
    let f = match FisherSnedecor::new(af, nf - af) {
        Ok(d) => d.inverse_cdf(1.0 - alpha),
        Err(e) => panic!("t2_limit_phase2: invalid degrees of freedom: {e}"),
    };
    af * (nf + 1.0) * (nf - 1.0) / (nf * (nf - af)) * f
}

/// Phase I T² limit for the training rows themselves:
///
/// ```text
/// T²_α = (n-1)² / n · Beta_{1-α}(A/2, (n-A-1)/2)
/// ```
///
/// # Panics
/// If `alpha ∉ (0, 1)` or `n <= A + 1`.
///
/// # References
/// Tracy, Young and Mason (1992), *J. Quality Technology* 24(2), 88-95.
pub fn t2_limit_phase1(a: usize, n: usize, alpha: f64) -> f64 {
    check_alpha(alpha);
    assert!(n > a + 1 && a > 0, "t2_limit_phase1: need n > A + 1 > 1, got n = {n}, A = {a}");
    let (af, nf) = (a as f64, n as f64);
    (nf - 1.0).powi(2) / nf * beta_ppf(1.0 - alpha, af / 2.0, (nf - af - 1.0) / 2.0)
}

/// Large-sample T² limit `χ²_{1-α}(A)`.
///
/// # Panics
/// If `alpha ∉ (0, 1)` or `a == 0`.
pub fn t2_limit_chi2(a: usize, alpha: f64) -> f64 {
    check_alpha(alpha);
    chi2_ppf(1.0 - alpha, a as f64)
}

fn chi2_ppf(p: f64, df: f64) -> f64 {
    match ChiSquared::new(df) {
        Ok(d) => d.inverse_cdf(p),
        Err(e) => panic!("chi-squared quantile: invalid degrees of freedom {df}: {e}"),
    }
}

fn thetas(resid: &[f64]) -> (f64, f64, f64) {
    let mut t = (0.0, 0.0, 0.0);
    for &l in resid {
        let l = l.max(0.0);
        t.0 += l;
        t.1 += l * l;
        t.2 += l * l * l;
    }
    t
}

/// Jackson & Mudholkar (1979) SPE limit from the residual eigenvalues
/// `λ_{A+1..p}`:
///
/// ```text
/// θ_i = Σ_{j>A} λ_j^i,   h_0 = 1 - 2 θ_1 θ_3 / (3 θ_2²),   c_α = Φ⁻¹(1-α)
/// Q_α = θ_1 [ c_α √(2 θ_2 h_0²) / θ_1 + 1 + θ_2 h_0 (h_0 - 1) / θ_1² ]^(1/h_0)
/// ```
///
/// Returns 0 for an empty or all-zero residual space.
///
/// # Panics
/// If `alpha ∉ (0, 1)`.
///
/// # References
/// Jackson and Mudholkar (1979), *Technometrics* 21(3), 341-349.
pub fn spe_limit_jm(resid: &[f64], alpha: f64) -> f64 {
    check_alpha(alpha);
    let (t1, t2, t3) = thetas(resid);
    if t1 <= 0.0 {
        return 0.0;
    }
    let h0 = 1.0 - 2.0 * t1 * t3 / (3.0 * t2 * t2);
    let c = norm_ppf(1.0 - alpha);
    t1 * (c * (2.0 * t2 * h0 * h0).sqrt() / t1 + 1.0 + t2 * h0 * (h0 - 1.0) / (t1 * t1))
        .powf(1.0 / h0)
}

/// Box (1954) SPE limit, the scaled χ² approximation used by Nomikos &
/// MacGregor (1995):
///
/// ```text
/// g = θ_2 / θ_1,   h = θ_1² / θ_2,   Q_α = g · χ²_{1-α}(h)
/// ```
///
/// Returns 0 for an empty or all-zero residual space.
///
/// # Panics
/// If `alpha ∉ (0, 1)`.
pub fn spe_limit_box(resid: &[f64], alpha: f64) -> f64 {
    check_alpha(alpha);
    let (t1, t2, _) = thetas(resid);
    if t1 <= 0.0 {
        return 0.0;
    }
    (t2 / t1) * chi2_ppf(1.0 - alpha, t1 * t1 / t2)
}

#[cfg(test)]
mod tests {
    //! Reference values: scikit-learn 1.9.1 / numpy 2.4.6 / scipy 1.17.1 via
    //! tests/golden/make_reference_vectors.py, catalogue §14 (json key
    //! `14_pca`); Brownlee (1965) stack-loss data as shipped by statsmodels.
    use super::*;
    use approx::assert_relative_eq;

    const ARITH: f64 = 1e-10; // catalogue tolerance class T-arith
    const DIST: f64 = 1e-8; // T-dist

    const STACKLOSS: [[f64; 4]; 21] = [
        [80., 27., 89., 42.],
        [80., 27., 88., 37.],
        [75., 25., 90., 37.],
        [62., 24., 87., 28.],
        [62., 22., 87., 18.],
        [62., 23., 87., 18.],
        [62., 24., 93., 19.],
        [62., 24., 93., 20.],
        [58., 23., 87., 15.],
        [58., 18., 80., 14.],
        [58., 18., 89., 14.],
        [58., 17., 88., 13.],
        [58., 18., 82., 11.],
        [58., 19., 93., 12.],
        [50., 18., 89., 8.],
        [50., 18., 86., 7.],
        [50., 19., 72., 8.],
        [50., 19., 79., 8.],
        [50., 20., 80., 9.],
        [56., 20., 82., 15.],
        [70., 20., 91., 15.],
    ];

    /// Standardise with the sample mean and ddof = 1 sd (catalogue §14.3).
    fn standardised() -> Array2<f64> {
        let x = Array2::from_shape_fn((21, 4), |(i, j)| STACKLOSS[i][j]);
        let m = x.mean_axis(Axis(0)).unwrap();
        let sd = x.std_axis(Axis(0), 1.0);
        (&x - &m) / &sd
    }

    fn model() -> PcaModel {
        PcaModel::fit_with_components(standardised().view(), 2).unwrap()
    }

    #[test]
    fn stackloss_eigenvalues_and_loadings() {
        let m = model();
        let want =
            [2.997471741087385, 0.7340444731762397, 0.2153114073072845, 0.053172378429090277];
        for (g, w) in m.eigenvalues().iter().zip(want) {
            assert_relative_eq!(*g, w, max_relative = ARITH);
        }
        let p1 = [0.5466407740581399, 0.5241338481154778, 0.34983434967672683, 0.5514376675409828];
        let p2 =
            [-0.08286862363281032, -0.25661216955008154, 0.9266751002236854, -0.26183247369535223];
        for k in 0..4 {
            assert_relative_eq!(m.loadings()[[k, 0]], p1[k], max_relative = 1e-9);
            assert_relative_eq!(m.loadings()[[k, 1]], p2[k], max_relative = 1e-9);
        }
        // the variance-share rule picks A = 2 at 90 % (cumulative 0.933)
        assert_eq!(PcaModel::fit(standardised().view(), 0.9).unwrap().n_components(), 2);
    }

    #[test]
    fn stackloss_t2_and_spe_for_all_rows() {
        let t2 = [
            5.354290758150776,
            4.673947989175659,
            2.7720094599218794,
            0.6862236538468998,
            0.03410922359610079,
            0.08202250581554953,
            1.4375769313675728,
            1.4177887013737487,
            0.006423369848219206,
            1.2414340797414907,
            1.096680245551911,
            1.1078205361780187,
            0.6790725966468091,
            3.087974198589453,
            2.255982540777102,
            1.4298628442077523,
            7.189413035992661,
            2.050333362104646,
            1.5751090389036566,
            0.6560096241416087,
            1.1659153040684826,
        ];
        let spe = [
            0.102422294772236,
            0.09226333713681704,
            0.1819034813085571,
            0.37954265232432105,
            0.030752027676009163,
            0.1768577676433903,
            0.5064441298738163,
            0.46740184948513197,
            0.5030039668569056,
            0.41605566580782355,
            0.2598126525103288,
            0.5439263553294428,
            0.3221019127315342,
            0.01351111272081258,
            0.08906508324704687,
            0.03155756746908089,
            0.02428181825003657,
            0.049135127565219074,
            0.21515274959674338,
            0.011627022015688658,
            0.9528571404065438,
        ];
        let z = standardised();
        let m = model();
        let mut sum = 0.0;
        for i in 0..21 {
            let g = m.t2(z.row(i));
            sum += g;
            assert_relative_eq!(g, t2[i], max_relative = ARITH);
            assert_relative_eq!(m.spe(z.row(i)), spe[i], max_relative = ARITH);
        }
        // invariant: Σ T² = (n - 1) A
        assert_relative_eq!(sum, 40.0, max_relative = ARITH);
    }

    #[test]
    fn stackloss_limits() {
        let m = model();
        let l = m.limits(0.05);
        assert_relative_eq!(l.t2_phase2, 7.767584133607435, max_relative = DIST);
        assert_relative_eq!(l.t2_phase1, 5.392930201202161, max_relative = DIST);
        assert_relative_eq!(l.t2_chi2, 5.991464547107979, max_relative = DIST);
        assert_relative_eq!(l.spe_jm, 0.898181232892319, max_relative = DIST);
        assert_relative_eq!(l.spe_box, 0.898901352359225, max_relative = DIST);
        let l = m.limits(0.01);
        assert_relative_eq!(l.t2_phase2, 13.069607868716073, max_relative = DIST);
        assert_relative_eq!(l.t2_phase1, 7.62887142249636, max_relative = DIST);
        assert_relative_eq!(l.t2_chi2, 9.21034037197618, max_relative = DIST);
        assert_relative_eq!(l.spe_jm, 1.5550301178185804, max_relative = DIST);
        assert_relative_eq!(l.spe_box, 1.4511161461390853, max_relative = DIST);
    }

    #[test]
    fn standalone_limits_catalogue_14_2() {
        let r = [2.0, 1.0, 0.5, 0.25];
        assert_relative_eq!(spe_limit_jm(&r, 0.05), 10.383556505837527, max_relative = DIST);
        assert_relative_eq!(spe_limit_jm(&r, 0.01), 16.558054883793464, max_relative = DIST);
        assert_relative_eq!(spe_limit_box(&r, 0.05), 10.19049440201234, max_relative = DIST);
        assert_relative_eq!(spe_limit_box(&r, 0.01), 15.046737591931787, max_relative = DIST);
        // JM for ten unit eigenvalues reduces to Wilson-Hilferty χ²₁₀; Box is exact χ²₁₀
        let ten = [1.0; 10];
        assert_relative_eq!(spe_limit_jm(&ten, 0.01), 23.239351217867934, max_relative = DIST);
        assert_relative_eq!(spe_limit_box(&ten, 0.01), 23.209251158954356, max_relative = DIST);
        assert_relative_eq!(t2_limit_phase2(3, 50, 0.05), 8.940109257528933, max_relative = DIST);
        assert_relative_eq!(t2_limit_phase1(3, 50, 0.05), 7.430174694731959, max_relative = DIST);
        assert_relative_eq!(t2_limit_chi2(3, 0.05), 7.814727903251179, max_relative = DIST);
        assert_relative_eq!(t2_limit_phase2(3, 50, 0.01), 13.48790231457784, max_relative = DIST);
        assert_relative_eq!(t2_limit_phase1(3, 50, 0.01), 10.398897329027822, max_relative = DIST);
        assert_relative_eq!(t2_limit_chi2(3, 0.01), 11.344866730144373, max_relative = DIST);
    }

    #[test]
    fn stackloss_rbc_isolates_the_biased_sensor() {
        let m = model();
        let mut z = standardised().row(0).to_owned();
        // +4 sd bias on sensor 1 (WATERTEMP), catalogue §14.4
        z[1] += 4.0;
        let zf = [2.1346919636208503, 5.868139468135224, 0.5065316095759903, 2.40632115667725];
        for k in 0..4 {
            assert_relative_eq!(z[k], zf[k], max_relative = ARITH);
        }
        assert_relative_eq!(m.spe(z.view()), 8.615807971253169, max_relative = ARITH);
        assert_relative_eq!(m.t2(z.view()), 15.646923949497578, max_relative = ARITH);
        let (mut rs, mut rt) = ([0.0; 4], [0.0; 4]);
        m.rbc(z.view(), &mut rs, &mut rt);
        let want_s = [1.9362482070176157, 8.611756927645644, 2.210859599510311, 2.471933396169881];
        let want_t =
            [14.469734918144244, 14.99894369419938, 2.2663361249948255, 15.091056398777857];
        let fhat =
            [-1.6699432883426661, 3.6137678144718635, 10.818672036363875, -1.9849971241048519];
        let spe = m.spe(z.view());
        for k in 0..4 {
            assert_relative_eq!(rs[k], want_s[k], max_relative = ARITH);
            assert_relative_eq!(rt[k], want_t[k], max_relative = ARITH);
            let rec = m.reconstruct(z.view(), k);
            assert_relative_eq!(rec.fault, fhat[k], max_relative = ARITH);
            // RBC equals the SPE drop after reconstruction
            assert_relative_eq!(spe - rec.spe_after, rs[k], max_relative = ARITH);
        }
        let argmax = (0..4).max_by(|&a, &b| rs[a].total_cmp(&rs[b])).unwrap();
        assert_eq!(argmax, 1);
        // unfaulted row
        m.rbc(standardised().row(0), &mut rs, &mut rt);
        let clean =
            [0.007392410381693128, 0.09837125116472008, 0.009489550015496478, 0.05139157739347531];
        for k in 0..4 {
            assert_relative_eq!(rs[k], clean[k], max_relative = ARITH);
        }
    }

    #[test]
    fn degenerate_inputs_give_none() {
        assert!(PcaModel::fit(Array2::<f64>::zeros((10, 3)).view(), 0.9).is_none());
        assert!(PcaModel::fit(Array2::<f64>::ones((2, 3)).view(), 0.9).is_none());
        assert!(PcaModel::fit(Array2::<f64>::ones((10, 1)).view(), 0.9).is_none());
    }
}

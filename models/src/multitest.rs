//! Multiple-testing control across many simultaneous tests (assets ×
//! sensors × channels): Benjamini–Hochberg and Benjamini–Yekutieli
//! adjusted p-values and rejection sets.
//!
//! # Dependence
//!
//! BH controls the false discovery rate at `q` for independent p-values and,
//! more usefully here, under positive regression dependence (PRDS; Benjamini &
//! Yekutieli 2001), which covers the common case of assets sharing weather,
//! supply or a common operating point: shared context pushes their statistics
//! the same way. Where dependence may be negative or arbitrary, use BY, which
//! controls the FDR under any dependence at the cost of a factor
//! `Σ_{i=1}^{m} 1/i` (≈ ln m + 0.58). Autocorrelation *within* a series does
//! not enter here: it must already be accounted for in each p-value.

/// Errors from the multiple-testing procedures.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum MultitestError {
    /// A p-value is NaN or outside `[0, 1]`.
    #[error(
        "p-value at index {index} must be in [0, 1], got {value}; drop or fix that test's result"
    )]
    PValue {
        /// Position in the input.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// The FDR level is not in `(0, 1)`.
    #[error("fdr level q must be in (0, 1), got {0}; 0.05 or 0.1 are usual")]
    Q(f64),
}

/// Adjusted p-values and the rejection set at level `q`, in input order.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct FdrResult {
    /// Adjusted p-value per test (same order as the input).
    pub adjusted: Vec<f64>,
    /// `adjusted[i] <= q`: test `i` is a discovery.
    pub rejected: Vec<bool>,
    /// Number of discoveries.
    pub n_rejected: usize,
    /// The FDR level used.
    pub q: f64,
}

fn check(p: &[f64], q: f64) -> Result<(), MultitestError> {
    if !(q > 0.0 && q < 1.0) {
        return Err(MultitestError::Q(q));
    }
    match p.iter().position(|v| !(0.0..=1.0).contains(v)) {
        Some(index) => Err(MultitestError::PValue { index, value: p[index] }),
        None => Ok(()),
    }
}

/// Step-up adjustment with multiplier `c` (1 for BH, Σ1/i for BY).
fn step_up(p: &[f64], c: f64) -> Vec<f64> {
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut adjusted = vec![0.0; m];
    let mut running = f64::INFINITY;
    for (rank0, &i) in order.iter().enumerate().rev() {
        let v = (c * m as f64 / (rank0 + 1) as f64 * p[i]).min(1.0);
        running = running.min(v);
        adjusted[i] = running;
    }
    adjusted
}

fn finish(adjusted: Vec<f64>, q: f64) -> FdrResult {
    let rejected: Vec<bool> = adjusted.iter().map(|&a| a <= q).collect();
    let n_rejected = rejected.iter().filter(|&&r| r).count();
    FdrResult { adjusted, rejected, n_rejected, q }
}

/// Benjamini–Hochberg step-up procedure.
///
/// ```text
/// sort p_(1) ≤ … ≤ p_(m);   p̃_(i) = min_{j ≥ i} min(1, m / j · p_(j));   reject p̃ ≤ q
/// ```
///
/// Equivalent to rejecting the `k` smallest p-values with `k` the largest `i`
/// such that `p_(i) ≤ i q / m`. Input may be in any order; output is in input
/// order. Ties keep their positions.
///
/// | Parameter | Default | Units       | Range  | Purpose                                  |
/// |-----------|---------|-------------|--------|------------------------------------------|
/// | `q`       | —       | probability | (0, 1) | expected share of false discoveries      |
///
/// # Errors
/// [`MultitestError::PValue`] naming the first p-value outside `[0, 1]` (or
/// NaN); [`MultitestError::Q`] for `q` outside `(0, 1)`.
///
/// # References
/// Y. Benjamini and Y. Hochberg (1995), "Controlling the false discovery rate:
/// a practical and powerful approach to multiple testing", Journal of the
/// Royal Statistical Society B 57(1), 289-300.
pub fn benjamini_hochberg(p: &[f64], q: f64) -> Result<FdrResult, MultitestError> {
    check(p, q)?;
    Ok(finish(step_up(p, 1.0), q))
}

/// Benjamini–Yekutieli step-up procedure: BH with `m` replaced by
/// `m · Σ_{i=1}^{m} 1/i`, valid under arbitrary dependence.
///
/// ```text
/// p̃_(i) = min_{j ≥ i} min(1, c_m · m / j · p_(j)),   c_m = Σ_{i=1}^{m} 1/i
/// ```
///
/// # Errors
/// As [`benjamini_hochberg`].
///
/// # References
/// Y. Benjamini and D. Yekutieli (2001), "The control of the false discovery
/// rate in multiple testing under dependency", Annals of Statistics 29(4),
/// 1165-1188.
pub fn benjamini_yekutieli(p: &[f64], q: f64) -> Result<FdrResult, MultitestError> {
    check(p, q)?;
    let c: f64 = (1..=p.len()).map(|i| 1.0 / i as f64).sum();
    Ok(finish(step_up(p, c), q))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Benjamini & Hochberg (1995) §4 example, 15 p-values (catalogue §13).
    const BH95: [f64; 15] = [
        0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262,
        0.5719, 0.6528, 0.7590, 1.000,
    ];

    #[test]
    fn bh95_example_rejects_four_and_matches_statsmodels() {
        // published: four discoveries at q = 0.05 (Benjamini & Hochberg 1995 §4);
        // adjusted values: statsmodels 0.15.0 multipletests(p, 0.05, "fdr_bh"), catalogue §13
        let want = [
            0.0015,
            0.003,
            0.0095,
            0.035625,
            0.0603,
            0.06385714285714286,
            0.06385714285714286,
            0.0645,
            0.0765,
            0.486,
            0.5811818181818182,
            0.714875,
            0.7532307692307693,
            0.8132142857142857,
            1.0,
        ];
        let r = benjamini_hochberg(&BH95, 0.05).unwrap();
        assert_eq!(r.n_rejected, 4);
        assert_eq!(&r.rejected[..5], &[true, true, true, true, false]);
        for (g, w) in r.adjusted.iter().zip(want) {
            assert_relative_eq!(*g, w, max_relative = 1e-10);
        }
    }

    #[test]
    fn unsorted_input_keeps_index_mapping() {
        // statsmodels 0.15.0 multipletests fdr_bh, catalogue §13
        let p = [0.04, 0.001, 0.03, 0.2, 0.012, 0.5];
        let r = benjamini_hochberg(&p, 0.05).unwrap();
        for (g, w) in r.adjusted.iter().zip([0.06, 0.006, 0.06, 0.24, 0.036, 0.5]) {
            assert_relative_eq!(*g, w, max_relative = 1e-10);
        }
        assert_eq!(r.rejected, vec![false, true, false, false, true, false]);
    }

    #[test]
    fn by_matches_statsmodels_fdr_by() {
        // statsmodels 0.15.0 multipletests(p, 0.05, "fdr_by"), catalogue §13
        let r = benjamini_yekutieli(&BH95, 0.05).unwrap();
        assert_eq!(r.n_rejected, 3);
        let want =
            [0.004977343489843491, 0.009954686979686982, 0.03152317543567544, 0.11821190788378289];
        for (g, w) in r.adjusted.iter().zip(want) {
            assert_relative_eq!(*g, w, max_relative = 1e-10);
        }
    }

    #[test]
    fn p_value_outside_unit_interval_is_rejected_with_its_index() {
        assert_eq!(
            benjamini_hochberg(&[0.1, 1.2], 0.05),
            Err(MultitestError::PValue { index: 1, value: 1.2 })
        );
        assert!(matches!(
            benjamini_hochberg(&[f64::NAN], 0.05),
            Err(MultitestError::PValue { index: 0, .. })
        ));
    }

    #[test]
    fn q_must_be_inside_unit_interval() {
        assert_eq!(benjamini_hochberg(&[0.1], 0.0), Err(MultitestError::Q(0.0)));
        assert_eq!(benjamini_yekutieli(&[0.1], 1.0), Err(MultitestError::Q(1.0)));
    }

    #[test]
    fn empty_input_gives_empty_result() {
        let r = benjamini_hochberg(&[], 0.05).unwrap();
        assert_eq!(r.n_rejected, 0);
        assert!(r.adjusted.is_empty());
    }
}

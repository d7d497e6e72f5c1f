//! Two-sample (and k-sample) tests: has the level, the distribution or the
//! spread of a sensor changed between a reference window and a test window?
//!
//! | Test                   | Question                         | Statistic              |
//! |------------------------|----------------------------------|------------------------|
//! | [`MannWhitney`]        | shifted location?                | rank sum `U`           |
//! | [`KolmogorovSmirnov`]  | any change in distribution?      | max ECDF gap `D`       |
//! | [`BrownForsythe`]      | changed spread (k groups)?       | ANOVA on \|x - median\| |
//!
//! ```text
//!   reference window            test window
//! ├──────── x (n values) ────────┼──────── y (m values) ────────┤──▶ t
//! ```
//!
//! # Serial correlation
//!
//! All three classical tests assume independent observations. By default each
//! test estimates the AR(1) coefficient within the samples and shrinks the
//! sample sizes to their effective values ([`Adjustment`]); on a clean AR(1)
//! series with `φ = 0.9` split into two halves, this brings the false-alarm
//! rate at `α = 0.01` from around one half (naive) back close to nominal —
//! see the seeded test `tests::ar1_false_alarm_rates` and its printed table.
//! Set [`Adjustment::None`] for independent data (for example one value per
//! pump start, or block means).
//!
//! ```
//! use telltale_models::twosample::{Adjustment, MannWhitney};
//! use linfa::ParamGuard;
//! let before = [4.1, 4.3, 4.0, 4.2, 4.4];
//! let after = [4.9, 5.1, 4.8, 5.3];
//! let r = MannWhitney::params().adjustment(Adjustment::None).check()?.test(&before, &after)?;
//! assert_eq!(r.u_x, 0.0);
//! assert!(r.exact && (r.p_two_sided - 2.0 / 126.0).abs() < 1e-12);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod adjust;
mod brown_forsythe;
mod ks;
mod mann_whitney;

pub use adjust::Adjustment;
pub use brown_forsythe::{
    BrownForsythe, BrownForsytheError, BrownForsytheParams, BrownForsytheParamsError,
    BrownForsytheValidParams, Center, brown_forsythe,
};
pub use ks::{
    KolmogorovSmirnov, KolmogorovSmirnovError, KolmogorovSmirnovParams,
    KolmogorovSmirnovParamsError, KolmogorovSmirnovValidParams, KsMethod, ks_2sample,
};
pub use mann_whitney::{
    MannWhitney, MannWhitneyError, MannWhitneyParams, MannWhitneyParamsError,
    MannWhitneyValidParams, UMethod, mann_whitney,
};

/// Sizes (> 1) of groups of equal values in an ascending slice.
fn tie_groups(sorted: &[f64]) -> Vec<u64> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < sorted.len() {
        let mut j = i + 1;
        while j < sorted.len() && sorted[j] == sorted[i] {
            j += 1;
        }
        if j - i > 1 {
            out.push((j - i) as u64);
        }
        i = j;
    }
    out
}

/// Median (mean of the middle two for even length); `v` must be non-empty.
fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    let n = s.len();
    let (lo_part, hi, _) = s.select_nth_unstable_by(n / 2, f64::total_cmp);
    let hi = *hi;
    if n % 2 == 1 {
        hi
    } else {
        let lo = lo_part.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lo + hi)
    }
}

//! Parameters of PELT.

use linfa::ParamGuard;

use super::error::PeltParamsError;

/// Segment cost.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Cost {
    /// Change in mean, known common variance: within-segment sum of squared
    /// deviations, data units squared (ruptures `CostL2`, model `"l2"`).
    L2,
    /// Change in mean and variance: `len * ln(var + floor)` with the ML
    /// (ddof 0) variance, dimensionless (ruptures 1.1.10 `CostNormal`, model
    /// `"normal"`, whose `add_small_diag=True` adds 1e-6). This is -2 log-likelihood
    /// at the segment MLE minus `len (1 + ln 2 pi)`.
    Normal,
}

/// Penalty per change point.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Penalty {
    /// An explicit beta in cost units (data units squared for `L2`).
    Value(f64),
    /// Schwarz's BIC with p + 1 parameters per change (the location plus p
    /// segment parameters): `L2`: beta = 2 s^2 ln n; `Normal`: beta = 3 ln n.
    #[default]
    Bic,
    /// Zhang & Siegmund's modified BIC: beta = 3 s^2 ln n per change plus
    /// s^2 sum_i ln(n_i / n) over the segments (s^2 = 1 for `Normal`).
    Mbic,
}

/// Pruning rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Pruning {
    /// Killick et al.'s rule, applied only to ends at least `min_size`
    /// after the pruning time, which keeps the result the exact optimum for
    /// any `min_size` (project default).
    #[default]
    Exact,
    /// ruptures 1.1.10 `Pelt._seg`: prune as soon as the rule fires. With
    /// `min_size > 1` this can drop the optimum (seen on small penalties);
    /// kept to reproduce ruptures' output exactly.
    RupturesCompatible,
}

/// Whether the BIC/MBIC penalty allows for autocorrelated noise.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Autocorrelation {
    /// Independent noise.
    Ignore,
    /// AR(1) noise (project default): the penalty is multiplied by the
    /// long-run variance ratio (1 + phi) / (1 - phi) and, for `L2`, the
    /// estimated sigma is the marginal one, sigma_d / sqrt(1 - phi). phi is a
    /// lag-1 autocorrelation clamped to [0, 0.99]. Real level changes
    /// inflate it, so it is first computed with the single best split's
    /// segment means removed, and while a pass finds changes it is
    /// re-estimated within the segments found and the search repeated (at
    /// most 4 more passes, stopping once phi no longer drops).
    #[default]
    Ar1,
}

/// Checked PELT parameters; build them with [`PeltParams`].
///
/// | Parameter         | Default    | Units            | Range     | Purpose |
/// |-------------------|------------|------------------|-----------|---------|
/// | `cost`            | —          | —                | enum      | `L2` (mean) or `Normal` (mean and variance) |
/// | `penalty`         | `Bic`      | cost units       | >= 0      | price of one change |
/// | `min_size`        | 2          | observations     | >= 1 (`L2`), >= 2 (`Normal`) | shortest segment |
/// | `pruning`         | `Exact`    | —                | enum      | exact optimum or ruptures' output |
/// | `autocorrelation` | `Ar1`      | —                | enum      | long-run variance scaling of BIC/MBIC |
/// | `noise_sigma`     | estimated  | data units       | (0, inf)  | marginal sigma for `L2` BIC/MBIC; default MAD(diff)/sqrt 2, AR(1)-corrected |
/// | `variance_floor`  | 1e-6       | data units^2     | (0, inf)  | added to segment variances of the `Normal` cost |
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PeltValidParams {
    pub(crate) cost: Cost,
    pub(crate) penalty: Penalty,
    pub(crate) min_size: usize,
    pub(crate) pruning: Pruning,
    pub(crate) autocorrelation: Autocorrelation,
    pub(crate) noise_sigma: Option<f64>,
    pub(crate) variance_floor: f64,
}

impl PeltValidParams {
    /// The segment cost.
    pub fn cost(&self) -> Cost {
        self.cost
    }
    /// The penalty rule.
    pub fn penalty(&self) -> Penalty {
        self.penalty
    }
    /// Minimum segment length.
    pub fn min_size(&self) -> usize {
        self.min_size
    }
    /// The pruning rule.
    pub fn pruning(&self) -> Pruning {
        self.pruning
    }
    /// The autocorrelation handling.
    pub fn autocorrelation(&self) -> Autocorrelation {
        self.autocorrelation
    }
}

/// Unchecked PELT parameters (see [`PeltValidParams`] for the table).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PeltParams(pub(crate) PeltValidParams);

impl PeltParams {
    /// Defaults for `cost`.
    pub fn new(cost: Cost) -> Self {
        Self(PeltValidParams {
            cost,
            penalty: Penalty::Bic,
            min_size: 2,
            pruning: Pruning::Exact,
            autocorrelation: Autocorrelation::Ar1,
            noise_sigma: None,
            variance_floor: 1e-6,
        })
    }
    /// Penalty rule.
    pub fn penalty(mut self, penalty: Penalty) -> Self {
        self.0.penalty = penalty;
        self
    }
    /// Minimum segment length.
    pub fn min_size(mut self, min_size: usize) -> Self {
        self.0.min_size = min_size;
        self
    }
    /// Pruning rule.
    pub fn pruning(mut self, pruning: Pruning) -> Self {
        self.0.pruning = pruning;
        self
    }
    /// Autocorrelation handling of BIC/MBIC.
    pub fn autocorrelation(mut self, a: Autocorrelation) -> Self {
        self.0.autocorrelation = a;
        self
    }
    /// Known marginal noise sigma for the `L2` BIC/MBIC (data units).
    pub fn noise_sigma(mut self, sigma: f64) -> Self {
        self.0.noise_sigma = Some(sigma);
        self
    }
    /// Variance floor of the `Normal` cost (data units squared).
    pub fn variance_floor(mut self, floor: f64) -> Self {
        self.0.variance_floor = floor;
        self
    }
}

impl ParamGuard for PeltParams {
    type Checked = PeltValidParams;
    type Error = PeltParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        let p = &self.0;
        if let Penalty::Value(b) = p.penalty
            && !(b.is_finite() && b >= 0.0)
        {
            return Err(PeltParamsError::Penalty(b));
        }
        let min = match p.cost {
            Cost::L2 => 1,
            Cost::Normal => 2,
        };
        if p.min_size < min {
            return Err(PeltParamsError::MinSize { min, got: p.min_size });
        }
        if !(p.variance_floor.is_finite() && p.variance_floor > 0.0) {
            return Err(PeltParamsError::VarianceFloor(p.variance_floor));
        }
        if let Some(s) = p.noise_sigma
            && !(s.is_finite() && s > 0.0)
        {
            return Err(PeltParamsError::NoiseSigma(s));
        }
        Ok(p)
    }

    fn check(self) -> Result<Self::Checked, Self::Error> {
        self.check_ref()?;
        Ok(self.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn penalty_cannot_be_negative() {
        let r = PeltParams::new(Cost::L2).penalty(Penalty::Value(-1.0)).check();
        assert!(matches!(r, Err(PeltParamsError::Penalty(_))));
    }
    #[test]
    fn normal_cost_needs_two_points() {
        let r = PeltParams::new(Cost::Normal).min_size(1).check();
        assert!(matches!(r, Err(PeltParamsError::MinSize { min: 2, got: 1 })));
        assert!(PeltParams::new(Cost::L2).min_size(1).check().is_ok());
        assert!(PeltParams::new(Cost::L2).min_size(0).check().is_err());
    }
    #[test]
    fn variance_floor_must_be_positive() {
        let r = PeltParams::new(Cost::Normal).variance_floor(0.0).check();
        assert!(matches!(r, Err(PeltParamsError::VarianceFloor(_))));
    }
    #[test]
    fn noise_sigma_must_be_positive() {
        let r = PeltParams::new(Cost::L2).noise_sigma(-2.0).check();
        assert!(matches!(r, Err(PeltParamsError::NoiseSigma(_))));
    }
}

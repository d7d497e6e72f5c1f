//! The fitted per-asset baseline, its parameters, and the scoring side.

use linfa::ParamGuard;
use ndarray::{Array1, Array2, ArrayView2};

use super::align::{
    AlignedFrame, Reduce, SensorRole, SensorSeries, SensorSpec, align, median_sampling_step_ms,
};
use super::error::{BaselineError, BaselineParamsError};
use super::pca::{PcaLimits, PcaModel};
use super::regime::{RegimeKnobs, RegimeModel, STOPPED};
use super::regression::{ConditionRegression, fit_regression};
use super::sensor::{SensorBaseline, fit_sensor_regime};
use crate::signatures::estimate_resolution;

/// Format version of [`AssetBaseline`]; bumped when its meaning changes.
pub const BASELINE_VERSION: u32 = 1;

/// Checked parameters of [`AssetBaseline`]; see [`AssetBaselineParams`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct AssetBaselineValidParams {
    step_ms: Option<i64>,
    reduce: Reduce,
    max_running_regimes: usize,
    min_regime_share: f64,
    min_silhouette: f64,
    rest_fraction: f64,
    min_stop_share: f64,
    pca_variance_share: f64,
    alpha: f64,
    huber_k: f64,
    min_rows: usize,
}

/// Unchecked parameters of the per-asset baseline.
///
/// | Parameter             | Default | Units   | Range       | Purpose |
/// |-----------------------|---------|---------|-------------|---------|
/// | `step_ms`             | median  | ms      | (0, inf)    | grid step; `None` = median over sensors of their median sampling interval |
/// | `reduce`              | `Last`  | —       | Last/Median | readings in one step → one value |
/// | `max_running_regimes` | 4       | count   | 1..=8       | largest k tried by k-means |
/// | `min_regime_share`    | 0.05    | share   | [0, 0.5)    | smallest running regime, share of running rows |
/// | `min_silhouette`      | 0.7     | —       | [-1, 1]     | accept k ≥ 2 only at this mean silhouette (Kaufman & Rousseeuw 1990) |
/// | `rest_fraction`       | 0.05    | share   | (0, 0.25]   | "at rest" = bottom share of a sensor's scale |
/// | `min_stop_share`      | 0.005   | share   | (0, 0.5)    | low mode must hold this share of rows to be a rest mode |
/// | `pca_variance_share`  | 0.9     | share   | (0, 1]      | PCA keeps components up to this cumulative variance (common practice, no source) |
/// | `alpha`               | 0.01    | prob.   | (0, 0.5)    | false-alarm probability of the stored T²/SPE limits |
/// | `huber_k`             | 1.345   | σ       | (0, inf)    | Huber clipping constant of the regression |
/// | `min_rows`            | 30      | rows    | [8, inf)    | fewest grid rows for any per-regime estimate |
///
/// ```
/// use linfa::ParamGuard;
/// use telltale_models::baseline::AssetBaseline;
/// let p = AssetBaseline::params().step_ms(Some(60_000)).alpha(0.001).check()?;
/// assert_eq!(p.alpha(), 0.001);
/// assert!(AssetBaseline::params().max_running_regimes(0).check().is_err());
/// # Ok::<(), telltale_models::baseline::BaselineParamsError>(())
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AssetBaselineParams(AssetBaselineValidParams);

impl Default for AssetBaselineParams {
    fn default() -> Self {
        Self(AssetBaselineValidParams {
            step_ms: None,
            reduce: Reduce::Last,
            max_running_regimes: 4,
            min_regime_share: 0.05,
            min_silhouette: 0.7,
            rest_fraction: 0.05,
            min_stop_share: 0.005,
            pca_variance_share: 0.9,
            alpha: 0.01,
            huber_k: 1.345,
            min_rows: 30,
        })
    }
}

impl AssetBaselineParams {
    /// Grid step in ms (`None` = median sampling interval).
    pub fn step_ms(mut self, v: Option<i64>) -> Self {
        self.0.step_ms = v;
        self
    }
    /// Reduction of several readings in one step.
    pub fn reduce(mut self, v: Reduce) -> Self {
        self.0.reduce = v;
        self
    }
    /// Largest number of running regimes.
    pub fn max_running_regimes(mut self, v: usize) -> Self {
        self.0.max_running_regimes = v;
        self
    }
    /// Smallest running regime, share of running rows.
    pub fn min_regime_share(mut self, v: f64) -> Self {
        self.0.min_regime_share = v;
        self
    }
    /// Mean silhouette needed to accept two or more running regimes.
    pub fn min_silhouette(mut self, v: f64) -> Self {
        self.0.min_silhouette = v;
        self
    }
    /// Bottom share of a sensor's scale that counts as at rest.
    pub fn rest_fraction(mut self, v: f64) -> Self {
        self.0.rest_fraction = v;
        self
    }
    /// Share of rows the low mode needs to count as a rest mode.
    pub fn min_stop_share(mut self, v: f64) -> Self {
        self.0.min_stop_share = v;
        self
    }
    /// Cumulative variance share kept by PCA.
    pub fn pca_variance_share(mut self, v: f64) -> Self {
        self.0.pca_variance_share = v;
        self
    }
    /// False-alarm probability of the stored T² and SPE limits.
    pub fn alpha(mut self, v: f64) -> Self {
        self.0.alpha = v;
        self
    }
    /// Huber constant of the regressions (residual σ units).
    pub fn huber_k(mut self, v: f64) -> Self {
        self.0.huber_k = v;
        self
    }
    /// Fewest grid rows for any per-regime estimate.
    pub fn min_rows(mut self, v: usize) -> Self {
        self.0.min_rows = v;
        self
    }
}

impl AssetBaselineValidParams {
    /// Grid step in ms (`None` = median sampling interval).
    pub fn step_ms(&self) -> Option<i64> {
        self.step_ms
    }
    /// Reduction of several readings in one step.
    pub fn reduce(&self) -> Reduce {
        self.reduce
    }
    /// Largest number of running regimes.
    pub fn max_running_regimes(&self) -> usize {
        self.max_running_regimes
    }
    /// Smallest running regime share.
    pub fn min_regime_share(&self) -> f64 {
        self.min_regime_share
    }
    /// Mean silhouette needed for k ≥ 2.
    pub fn min_silhouette(&self) -> f64 {
        self.min_silhouette
    }
    /// Rest fraction of the scale.
    pub fn rest_fraction(&self) -> f64 {
        self.rest_fraction
    }
    /// Share needed for a rest mode.
    pub fn min_stop_share(&self) -> f64 {
        self.min_stop_share
    }
    /// PCA variance share.
    pub fn pca_variance_share(&self) -> f64 {
        self.pca_variance_share
    }
    /// False-alarm probability of the limits.
    pub fn alpha(&self) -> f64 {
        self.alpha
    }
    /// Huber constant.
    pub fn huber_k(&self) -> f64 {
        self.huber_k
    }
    /// Fewest rows per estimate.
    pub fn min_rows(&self) -> usize {
        self.min_rows
    }
}

fn share(
    name: &'static str,
    range: &'static str,
    value: f64,
    default: f64,
    ok: bool,
) -> Result<(), BaselineParamsError> {
    if ok && value.is_finite() {
        Ok(())
    } else {
        Err(BaselineParamsError::Share { name, range, value, default })
    }
}

impl ParamGuard for AssetBaselineParams {
    type Checked = AssetBaselineValidParams;
    type Error = BaselineParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        let p = &self.0;
        if let Some(s) = p.step_ms
            && s <= 0
        {
            return Err(BaselineParamsError::Step(s));
        }
        if !(1..=8).contains(&p.max_running_regimes) {
            return Err(BaselineParamsError::MaxRegimes(p.max_running_regimes));
        }
        share(
            "min_regime_share",
            "[0, 0.5)",
            p.min_regime_share,
            0.05,
            (0.0..0.5).contains(&p.min_regime_share),
        )?;
        share(
            "min_silhouette",
            "[-1, 1]",
            p.min_silhouette,
            0.7,
            (-1.0..=1.0).contains(&p.min_silhouette),
        )?;
        share(
            "rest_fraction",
            "(0, 0.25]",
            p.rest_fraction,
            0.05,
            p.rest_fraction > 0.0 && p.rest_fraction <= 0.25,
        )?;
        share(
            "min_stop_share",
            "(0, 0.5)",
            p.min_stop_share,
            0.005,
            p.min_stop_share > 0.0 && p.min_stop_share < 0.5,
        )?;
        share(
            "pca_variance_share",
            "(0, 1]",
            p.pca_variance_share,
            0.9,
            p.pca_variance_share > 0.0 && p.pca_variance_share <= 1.0,
        )?;
        share("alpha", "(0, 0.5)", p.alpha, 0.01, p.alpha > 0.0 && p.alpha < 0.5)?;
        if !(p.huber_k.is_finite() && p.huber_k > 0.0) {
            return Err(BaselineParamsError::HuberK(p.huber_k));
        }
        if p.min_rows < 8 {
            return Err(BaselineParamsError::MinRows(p.min_rows));
        }
        Ok(p)
    }

    fn check(self) -> Result<Self::Checked, Self::Error> {
        self.check_ref()?;
        Ok(self.0)
    }
}

/// PCA monitoring part of an [`AssetBaseline`]: which sensors it covers and
/// the fitted model on rows standardised against each sensor's running-regime
/// baseline (`z = (x - location) / scale` of the row's regime).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PcaMonitor {
    /// Sensor positions, in model column order.
    pub sensors: Vec<usize>,
    /// The fitted model.
    pub model: PcaModel,
    /// Limits at the fit's `alpha`.
    pub limits: PcaLimits,
}

/// A fitted per-asset baseline. Serialisable behind the `serde` feature.
///
/// `sensor_baselines[s][g]` is sensor `s` in regime `g` (0 = stopped,
/// `1..` running); `None` where the regime had fewer than `min_rows` rows
/// with a value. `regressions[s]` is set for condition sensors when the asset
/// has context sensors. All times are epoch milliseconds UTC.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct AssetBaseline {
    /// [`BASELINE_VERSION`] at fit time.
    pub version: u32,
    /// Parameters used.
    pub params: AssetBaselineValidParams,
    /// Grid step, ms.
    pub step_ms: i64,
    /// Start of the first fit row, ms.
    pub fit_start_ms: i64,
    /// End (exclusive) of the last fit row, ms.
    pub fit_end_ms: i64,
    /// Grid rows in the fit span.
    pub n_rows: usize,
    /// Rows with at least one value.
    pub n_rows_with_data: usize,
    /// Good usable raw readings per sensor.
    pub n_readings: Vec<usize>,
    /// Sensor descriptions, in asset order.
    pub sensors: Vec<SensorSpec>,
    /// Regime model.
    pub regimes: RegimeModel,
    /// Per sensor, per regime baselines.
    pub sensor_baselines: Vec<Vec<Option<SensorBaseline>>>,
    /// Per sensor regression on the context (condition sensors only).
    pub regressions: Vec<Option<ConditionRegression>>,
    /// PCA monitor over running rows.
    pub pca: Option<PcaMonitor>,
}

impl AssetBaseline {
    /// Default parameters.
    pub fn params() -> AssetBaselineParams {
        AssetBaselineParams::default()
    }

    /// Aligns new data for scoring onto this baseline's grid step and reduction.
    ///
    /// # Errors
    /// As [`align`], plus [`BaselineError::SensorCount`].
    pub fn align(
        &self,
        series: &[SensorSeries<'_>],
        from_ms: Option<i64>,
        to_ms: Option<i64>,
    ) -> Result<AlignedFrame, BaselineError> {
        if series.len() != self.sensors.len() {
            return Err(BaselineError::SensorCount { got: series.len(), want: self.sensors.len() });
        }
        align(series, self.step_ms, from_ms, to_ms, self.params.reduce)
    }

    /// Baseline a row in `regime` is judged against for sensor `s`: the
    /// regime's own, else (for a running regime) the most occupied running
    /// regime that has one. A stopped row is never judged against a running
    /// baseline.
    pub fn baseline_for(&self, s: usize, regime: usize) -> Option<&SensorBaseline> {
        let b = &self.sensor_baselines[s];
        if let Some(Some(x)) = b.get(regime) {
            return Some(x);
        }
        if regime == STOPPED {
            return None;
        }
        let occ = self.regimes.occupancy();
        (1..b.len())
            .filter(|&g| b[g].is_some())
            .max_by(|&a, &c| occ.get(a).unwrap_or(&0.0).total_cmp(occ.get(c).unwrap_or(&0.0)))
            .and_then(|g| b[g].as_ref())
    }
}

/// What [`AssetBaseline::relearn_sensor`] changed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RelearnReport {
    /// Regimes whose baseline of the sensor was learnt again from the new span.
    pub relearnt_regimes: Vec<usize>,
    /// Regimes the new span has too few rows of; their previous baseline is kept.
    pub kept_regimes: Vec<usize>,
    /// Whether the sensor's regression on the context was learnt again
    /// (`false`: kept, or the sensor has none).
    pub regression_relearnt: bool,
    /// Whether the PCA monitor was learnt again on the new span (`false`: kept).
    pub pca_relearnt: bool,
    /// Grid rows of the new span with a value of the sensor.
    pub rows: usize,
}

impl AssetBaseline {
    /// A copy of this baseline with condition sensor `sensor` learnt again
    /// from the series over `[from_ms, to_ms)`, keeping the operating
    /// regimes and every other sensor's baselines: the re-baseline after an
    /// accepted process change on one sensor.
    ///
    /// The new span's rows are put into regimes by this baseline's regime
    /// model; each regime with at least `min_rows` rows of the sensor gets a
    /// new baseline of the sensor (the others keep the old one and are
    /// listed in the report), the sensor's regression on the context is
    /// fitted again when the span allows, and so is the PCA monitor (whose
    /// standardised space the sensor is part of). A context sensor defines
    /// the regimes themselves, so it cannot be re-learnt alone: re-fit the
    /// whole asset instead; so does a sensor whose readings tell when the
    /// asset is at rest (a rest rule, found when no sensor is registered
    /// as context).
    ///
    /// # Errors
    /// [`BaselineError::SensorCount`] for a wrong number of series; input
    /// errors of [`align`]; [`BaselineError::TooFewRows`] when no regime has
    /// `min_rows` rows of the sensor; [`BaselineError::ContextSensor`] for a
    /// context sensor, a sensor with a rest rule, or a position out of range.
    pub fn relearn_sensor(
        &self,
        series: &[SensorSeries<'_>],
        sensor: usize,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<(AssetBaseline, RelearnReport), BaselineError> {
        if sensor >= self.sensors.len()
            || self.sensors[sensor].role != SensorRole::Condition
            || self.regimes.rest_rules().iter().any(|r| r.sensor == sensor)
        {
            return Err(BaselineError::ContextSensor(sensor));
        }
        let frame = self.align(series, Some(from_ms), Some(to_ms))?;
        let values = frame.values.view();
        let labels: Vec<Option<usize>> =
            values
                .rows()
                .into_iter()
                .map(|row| {
                    if row.iter().all(|v| !v.is_finite()) {
                        None
                    } else {
                        self.regimes.classify(row)
                    }
                })
                .collect();
        let s = &series[sensor];
        let raw: Vec<f64> = s.usable().map(|(_, v)| v).collect();
        let resolution = estimate_resolution(&raw).map(|r| r.step);
        let interval = s.median_interval_ms();
        let min_rows = self.params.min_rows;
        let mut out = self.clone();
        let mut report = RelearnReport {
            relearnt_regimes: Vec::new(),
            kept_regimes: Vec::new(),
            regression_relearnt: false,
            pca_relearnt: false,
            rows: values.column(sensor).iter().filter(|v| v.is_finite()).count(),
        };
        for g in 0..self.regimes.n_regimes() {
            let col = values.column(sensor);
            match fit_sensor_regime(col, &labels, g, resolution, interval, min_rows) {
                Some(b) => {
                    out.sensor_baselines[sensor][g] = Some(b);
                    report.relearnt_regimes.push(g);
                }
                None => report.kept_regimes.push(g),
            }
        }
        if report.relearnt_regimes.is_empty() {
            let got = labels
                .iter()
                .zip(values.column(sensor))
                .filter(|(l, v)| l.is_some() && v.is_finite())
                .count();
            return Err(BaselineError::TooFewRows { got, need: min_rows });
        }
        if let Some(r) = fit_regression(
            values,
            &labels,
            &self.regimes,
            sensor,
            resolution,
            self.params.huber_k,
            min_rows,
        ) {
            out.regressions[sensor] = Some(r);
            report.regression_relearnt = true;
        }
        out.n_readings[sensor] = raw.len();
        if let Some(p) = fit_pca(&out, values, &labels, &self.params) {
            out.pca = Some(p);
            report.pca_relearnt = true;
        }
        Ok((out, report))
    }
}

impl AssetBaselineValidParams {
    fn knobs(&self) -> RegimeKnobs {
        RegimeKnobs {
            max_running: self.max_running_regimes,
            min_regime_share: self.min_regime_share,
            min_silhouette: self.min_silhouette,
            rest_fraction: self.rest_fraction,
            min_stop_share: self.min_stop_share,
            min_rows: self.min_rows,
        }
    }

    /// Fits the baseline of one asset from its sensors' raw series over
    /// `[from_ms, to_ms)` (`None` = span of the data).
    ///
    /// # Errors
    /// Input errors of [`align`]; [`BaselineError::TooFewRows`] when fewer
    /// than `min_rows` grid rows have data; [`BaselineError::Clustering`].
    pub fn fit(
        &self,
        series: &[SensorSeries<'_>],
        from_ms: Option<i64>,
        to_ms: Option<i64>,
    ) -> Result<AssetBaseline, BaselineError> {
        if series.is_empty() {
            return Err(BaselineError::NoSensors);
        }
        for (i, s) in series.iter().enumerate() {
            s.validate(i)?;
        }
        let step = match self.step_ms {
            Some(s) => s,
            None => median_sampling_step_ms(series).ok_or(BaselineError::NoReadings)?,
        };
        let frame = align(series, step, from_ms, to_ms, self.reduce)?;
        let specs: Vec<SensorSpec> = series.iter().map(|s| s.spec).collect();
        let values = frame.values.view();
        let with_data =
            values.rows().into_iter().filter(|r| r.iter().any(|v| v.is_finite())).count();
        if with_data < self.min_rows {
            return Err(BaselineError::TooFewRows { got: with_data, need: self.min_rows });
        }
        let (regimes, labels) = RegimeModel::fit(values, &specs, &self.knobs())?;
        let p = series.len();
        let mut sensor_baselines = Vec::with_capacity(p);
        let mut regressions = Vec::with_capacity(p);
        let mut n_readings = Vec::with_capacity(p);
        for (j, s) in series.iter().enumerate() {
            let raw: Vec<f64> = s.usable().map(|(_, v)| v).collect();
            n_readings.push(raw.len());
            let resolution = estimate_resolution(&raw).map(|r| r.step);
            let interval = s.median_interval_ms();
            let per: Vec<Option<SensorBaseline>> = (0..regimes.n_regimes())
                .map(|g| {
                    fit_sensor_regime(
                        values.column(j),
                        &labels,
                        g,
                        resolution,
                        interval,
                        self.min_rows,
                    )
                })
                .collect();
            sensor_baselines.push(per);
            regressions.push(if s.spec.role == SensorRole::Condition {
                fit_regression(
                    values,
                    &labels,
                    &regimes,
                    j,
                    resolution,
                    self.huber_k,
                    self.min_rows,
                )
            } else {
                None
            });
        }
        let mut out = AssetBaseline {
            version: BASELINE_VERSION,
            params: *self,
            step_ms: step,
            fit_start_ms: frame.origin_ms,
            fit_end_ms: frame.origin_ms + frame.n_rows() as i64 * step,
            n_rows: frame.n_rows(),
            n_rows_with_data: with_data,
            n_readings,
            sensors: specs,
            regimes,
            sensor_baselines,
            regressions,
            pca: None,
        };
        out.pca = fit_pca(&out, values, &labels, self);
        Ok(out)
    }
}

fn standardise_row(
    b: &AssetBaseline,
    sensors: &[usize],
    row: ndarray::ArrayView1<'_, f64>,
    regime: usize,
    out: &mut [f64],
) -> bool {
    for (o, &s) in out.iter_mut().zip(sensors) {
        match b.baseline_for(s, regime) {
            Some(sb) if row[s].is_finite() => *o = sb.z(row[s]),
            _ => return false,
        }
    }
    true
}

fn fit_pca(
    b: &AssetBaseline,
    values: ArrayView2<'_, f64>,
    labels: &[Option<usize>],
    p: &AssetBaselineValidParams,
) -> Option<PcaMonitor> {
    let running: Vec<usize> =
        (0..values.nrows()).filter(|&r| labels[r].is_some_and(|g| g >= 1)).collect();
    if running.is_empty() {
        return None;
    }
    // sensors with a running baseline and values in at least half the running rows
    let sensors: Vec<usize> = (0..b.sensors.len())
        .filter(|&s| {
            b.baseline_for(s, 1).is_some()
                && 2 * running.iter().filter(|&&r| values[[r, s]].is_finite()).count()
                    >= running.len()
        })
        .collect();
    let q = sensors.len();
    if q < 2 {
        return None;
    }
    let mut z = Vec::with_capacity(running.len() * q);
    let mut buf = vec![0.0; q];
    let mut n = 0;
    for &r in &running {
        let g = labels[r].unwrap_or(1);
        if standardise_row(b, &sensors, values.row(r), g, &mut buf) {
            z.extend_from_slice(&buf);
            n += 1;
        }
    }
    if n < p.min_rows.max(2 * q) {
        return None;
    }
    let z = Array2::from_shape_vec((n, q), z).ok()?;
    let model = PcaModel::fit(z.view(), p.pca_variance_share)?;
    let limits = model.limits(p.alpha);
    Some(PcaMonitor { sensors, model, limits })
}

/// Per-row scores of an aligned window against an [`AssetBaseline`],
/// in preallocated arrays (`rows × sensors` where two-dimensional).
///
/// | field        | meaning | units |
/// |--------------|---------|-------|
/// | `regime`     | regime of the row (`None`: cannot tell) | index |
/// | `z`          | `(x - location)/scale` against the sensor's baseline for the row's regime | robust σ |
/// | `residual_z` | condition sensors: regression residual / residual scale (running rows) | residual σ |
/// | `t2`, `spe`  | PCA statistics on the standardised row (running rows with every PCA sensor) | — |
/// | `rbc_spe`    | reconstruction-based contribution of each PCA sensor to SPE | — |
///
/// NaN marks "not available" (missing value, no baseline, stopped row for
/// regression/PCA, sensor not in the PCA).
#[derive(Debug, Clone, PartialEq)]
pub struct RowScores {
    /// Regime per row.
    pub regime: Vec<Option<usize>>,
    /// Robust z per row and sensor.
    pub z: Array2<f64>,
    /// Regression residual z per row and sensor.
    pub residual_z: Array2<f64>,
    /// Hotelling T² per row.
    pub t2: Array1<f64>,
    /// SPE per row.
    pub spe: Array1<f64>,
    /// RBC to SPE per row and sensor.
    pub rbc_spe: Array2<f64>,
}

impl RowScores {
    /// Output buffers for `rows × sensors`.
    pub fn new(rows: usize, sensors: usize) -> Self {
        Self {
            regime: vec![None; rows],
            z: Array2::from_elem((rows, sensors), f64::NAN),
            residual_z: Array2::from_elem((rows, sensors), f64::NAN),
            t2: Array1::from_elem(rows, f64::NAN),
            spe: Array1::from_elem(rows, f64::NAN),
            rbc_spe: Array2::from_elem((rows, sensors), f64::NAN),
        }
    }
}

/// Scores every row of `values` (`rows × sensors`, aligned, NaN = missing)
/// against `baseline`, writing into `out` (overwritten).
///
/// # Errors
/// [`BaselineError::SensorCount`] when `values` or `out` do not have the
/// baseline's number of sensors or `out` has a different number of rows.
pub fn score_rows(
    baseline: &AssetBaseline,
    values: ArrayView2<'_, f64>,
    out: &mut RowScores,
) -> Result<(), BaselineError> {
    let p = baseline.sensors.len();
    let (n, got) = values.dim();
    if got != p || out.z.dim() != (n, p) || out.regime.len() != n {
        return Err(BaselineError::SensorCount { got, want: p });
    }
    out.z.fill(f64::NAN);
    out.residual_z.fill(f64::NAN);
    out.t2.fill(f64::NAN);
    out.spe.fill(f64::NAN);
    out.rbc_spe.fill(f64::NAN);
    let pca = baseline.pca.as_ref();
    let q = pca.map_or(0, |m| m.sensors.len());
    let mut zbuf = vec![0.0; q];
    let mut rs = vec![0.0; q];
    let mut rt = vec![0.0; q];
    for r in 0..n {
        let row = values.row(r);
        let regime =
            if row.iter().all(|v| !v.is_finite()) { None } else { baseline.regimes.classify(row) };
        out.regime[r] = regime;
        let Some(g) = regime else { continue };
        for s in 0..p {
            if let Some(b) = baseline.baseline_for(s, g) {
                out.z[[r, s]] = b.z(row[s]);
            }
            if g != STOPPED
                && let Some(reg) = &baseline.regressions[s]
            {
                out.residual_z[[r, s]] = reg.residual_z(&baseline.regimes, row, g);
            }
        }
        if let Some(m) = pca
            && g != STOPPED
            && standardise_row(baseline, &m.sensors, row, g, &mut zbuf)
        {
            let zv = ndarray::ArrayView1::from(&zbuf[..]);
            out.t2[r] = m.model.t2(zv);
            out.spe[r] = m.model.spe(zv);
            m.model.rbc(zv, &mut rs, &mut rt);
            for (k, &s) in m.sensors.iter().enumerate() {
                out.rbc_spe[[r, s]] = rs[k];
            }
        }
    }
    Ok(())
}

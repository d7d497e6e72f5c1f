//! Tabular CUSUM: streaming state and batch run.

use super::error::CusumError;
use super::params::{CusumParams, CusumValidParams};

/// Which sum signalled.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Side {
    /// Upper sum C+ (the mean went up).
    Upper,
    /// Lower sum C- (the mean went down).
    Lower,
}

/// A CUSUM signal.
///
/// ```text
/// index            ... last_in_control  [ run_length periods with C > 0 ... index ]
/// shift_estimate = mu_0 + sigma (k + C+/N+)        (upper, plain chart)
///                = mu_0 - sigma (k + C-/N-)        (lower)
///                = mu_0 +/- sigma_e (k + C/N) / (1 - phi)   (residual chart, phi != 0)
/// ```
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Alarm {
    /// 0-based position of the signalling observation (gaps included).
    pub index: usize,
    /// Which sum crossed the decision interval.
    pub side: Side,
    /// The sum at the signal, sigma units.
    pub statistic: f64,
    /// N: consecutive periods the signalling sum has been > 0.
    pub run_length: usize,
    /// Onset estimate: 0-based position of the last in-control observation,
    /// the one just before the signalling run began (`index - run_length`
    /// when there are no gaps; gaps inside the run do not move it), `None`
    /// when the sum was positive since the start.
    pub last_in_control: Option<usize>,
    /// Estimated new process mean, data units.
    pub shift_estimate: f64,
}

/// Two-sided tabular CUSUM (Page 1954, in Montgomery's tabular form).
///
/// ```text
/// z_i  = (x_i - mu_0) / sigma                                    (phi = 0)
/// z_i  = ((x_i - mu_0) - phi (x_{i-1} - mu_0)) / (sigma sqrt(1 - phi^2))   (phi != 0; z_1 plain)
/// C+_i = max(0, C+_{i-1} + z_i - k)      N+_i = N+_{i-1} + 1 if C+_i > 0 else 0
/// C-_i = max(0, C-_{i-1} - z_i - k)      N-_i likewise
/// signal when C+_i > h or C-_i > h;      C+_0 = C-_0 = 0
/// ```
///
/// Sums are kept in sigma units (Montgomery's standardised form; multiply by
/// sigma for his K/H form). See [`CusumValidParams`] for the parameter table.
/// A non-finite observation is a gap: the sums are left unchanged, the AR(1)
/// lag is forgotten, and the position still counts.
///
/// # Errors
/// [`CusumParams`] checking fails for the cases listed in
/// [`CusumParamsError`](super::CusumParamsError).
///
/// # Panics
/// Never.
///
/// # References
/// E. S. Page (1954), "Continuous inspection schemes", Biometrika 41(1/2), 100-115.
/// D. C. Montgomery, *Introduction to Statistical Quality Control*, Wiley, ch. 9 (tabular CUSUM,
/// shift estimate mu_0 + K + C+/N+).
/// L. C. Alwan, H. V. Roberts (1988), "Time-series modeling for statistical process control",
/// Journal of Business & Economic Statistics 6(1), 87-95 (residual chart).
///
/// ```
/// use linfa::ParamGuard;
/// use telltale_models::changepoint::{Cusum, Side};
/// // raw-water pump flow (m3/h): in control at 10 with sigma 1
/// let mut c = Cusum::new(Cusum::params(10.0, 1.0).check()?);
/// let alarm = [10.2, 11.8, 12.1, 11.9, 12.4].iter().find_map(|&x| c.update(x)).unwrap();
/// assert_eq!((alarm.index, alarm.side), (4, Side::Upper));
/// # Ok::<(), telltale_models::changepoint::CusumParamsError>(())
/// ```
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Cusum {
    params: CusumValidParams,
    upper: f64,
    lower: f64,
    n_upper: usize,
    n_lower: usize,
    // Index of the first observation of the current positive run of each sum.
    // Kept separately from `n_*` because gaps (non-finite values) advance
    // `seen` without extending a run, so `index - n` would place the onset late.
    upper_start: usize,
    lower_start: usize,
    seen: usize,
    prev: Option<f64>,
}

impl Cusum {
    /// Unchecked parameters for in-control mean `target` and sigma `sigma` (data units).
    pub fn params(target: f64, sigma: f64) -> CusumParams {
        CusumParams::new(target, sigma)
    }

    /// A fresh chart (all sums 0).
    pub fn new(params: CusumValidParams) -> Self {
        Self {
            params,
            upper: 0.0,
            lower: 0.0,
            n_upper: 0,
            n_lower: 0,
            upper_start: 0,
            lower_start: 0,
            seen: 0,
            prev: None,
        }
    }

    /// The parameters.
    pub fn parameters(&self) -> &CusumValidParams {
        &self.params
    }
    /// Current upper sum C+, sigma units.
    pub fn upper(&self) -> f64 {
        self.upper
    }
    /// Current lower sum C-, sigma units.
    pub fn lower(&self) -> f64 {
        self.lower
    }
    /// Consecutive periods with C+ > 0.
    pub fn n_upper(&self) -> usize {
        self.n_upper
    }
    /// Consecutive periods with C- > 0.
    pub fn n_lower(&self) -> usize {
        self.n_lower
    }
    /// Observations seen so far (gaps included).
    pub fn seen(&self) -> usize {
        self.seen
    }

    /// Restart both sums at 0 (the AR(1) lag and position are kept).
    pub fn reset(&mut self) {
        self.upper = 0.0;
        self.lower = 0.0;
        self.n_upper = 0;
        self.n_lower = 0;
    }

    fn standardise(&mut self, x: f64) -> f64 {
        let p = &self.params;
        let d = x - p.target;
        let z = match (p.ar1 != 0.0, self.prev) {
            (true, Some(prev)) => {
                (d - p.ar1 * (prev - p.target)) / (p.sigma * (1.0 - p.ar1 * p.ar1).sqrt())
            }
            _ => d / p.sigma,
        };
        self.prev = Some(x);
        z
    }

    /// Feed the already standardised value `z` (sigma units), bypassing the
    /// target/sigma/AR(1) step; resets after a signal when configured.
    pub(crate) fn update_standardised(&mut self, z: f64) -> Option<Alarm> {
        let alarm = self.step(z);
        if alarm.is_some() && self.params.reset_after_alarm {
            self.reset();
        }
        alarm
    }

    /// Update the sums with `z` and report a crossing, without resetting.
    fn step(&mut self, z: f64) -> Option<Alarm> {
        let index = self.seen;
        self.seen += 1;
        let k = self.params.drift;
        self.upper = (self.upper + z - k).max(0.0);
        self.lower = (self.lower - z - k).max(0.0);
        if self.upper > 0.0 && self.n_upper == 0 {
            self.upper_start = index;
        }
        if self.lower > 0.0 && self.n_lower == 0 {
            self.lower_start = index;
        }
        self.n_upper = if self.upper > 0.0 { self.n_upper + 1 } else { 0 };
        self.n_lower = if self.lower > 0.0 { self.n_lower + 1 } else { 0 };
        let h = self.params.threshold;
        let side = match (self.upper > h, self.lower > h) {
            (false, false) => return None,
            (true, false) => Side::Upper,
            (false, true) => Side::Lower,
            (true, true) if self.upper >= self.lower => Side::Upper,
            (true, true) => Side::Lower,
        };
        let (stat, n, start, sign) = match side {
            Side::Upper => (self.upper, self.n_upper, self.upper_start, 1.0),
            Side::Lower => (self.lower, self.n_lower, self.lower_start, -1.0),
        };
        let p = &self.params;
        let scale = if p.ar1 != 0.0 {
            p.sigma * (1.0 - p.ar1 * p.ar1).sqrt() / (1.0 - p.ar1)
        } else {
            p.sigma
        };
        // n >= 1 here because stat > h > 0
        Some(Alarm {
            index,
            side,
            statistic: stat,
            run_length: n,
            last_in_control: start.checked_sub(1),
            shift_estimate: p.target + sign * scale * (k + stat / n as f64),
        })
    }

    /// Feed one observation (data units); returns the signal, if any.
    /// A non-finite `x` is a gap (see the type docs) and never signals.
    pub fn update(&mut self, x: f64) -> Option<Alarm> {
        if !x.is_finite() {
            self.seen += 1;
            self.prev = None;
            return None;
        }
        let z = self.standardise(x);
        self.update_standardised(z)
    }
}

/// The full record of a batch CUSUM run: one entry per observation.
///
/// Sums are recorded after the update and before any reset, so the entry at
/// an alarm shows the value that crossed `h`.
#[derive(Debug, Clone, PartialEq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CusumTrace {
    /// C+ per observation, sigma units.
    pub upper: Vec<f64>,
    /// C- per observation, sigma units.
    pub lower: Vec<f64>,
    /// N+ per observation.
    pub n_upper: Vec<usize>,
    /// N- per observation.
    pub n_lower: Vec<usize>,
    /// Every signal in order.
    pub alarms: Vec<Alarm>,
}

impl CusumTrace {
    /// The first signal, if any.
    pub fn first_alarm(&self) -> Option<&Alarm> {
        self.alarms.first()
    }
}

/// Run the tabular CUSUM over `x` (data units) from zero sums.
///
/// # Errors
/// [`CusumError::NonFinite`] naming the first NaN/infinite observation (the
/// streaming [`Cusum::update`] treats those as gaps instead).
///
/// # Panics
/// Never.
pub fn cusum(x: &[f64], params: &CusumValidParams) -> Result<CusumTrace, CusumError> {
    if let Some((index, &value)) = x.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        return Err(CusumError::NonFinite { index, value });
    }
    let mut c = Cusum::new(params.clone());
    let mut t = CusumTrace {
        upper: Vec::with_capacity(x.len()),
        lower: Vec::with_capacity(x.len()),
        n_upper: Vec::with_capacity(x.len()),
        n_lower: Vec::with_capacity(x.len()),
        alarms: Vec::new(),
    };
    for &v in x {
        let z = c.standardise(v);
        let alarm = c.step(z);
        t.upper.push(c.upper);
        t.lower.push(c.lower);
        t.n_upper.push(c.n_upper);
        t.n_lower.push(c.n_lower);
        if alarm.is_some() && params.reset_after_alarm {
            c.reset();
        }
        t.alarms.extend(alarm);
    }
    Ok(t)
}

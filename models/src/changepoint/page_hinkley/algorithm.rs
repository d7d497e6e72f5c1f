//! Page–Hinkley test: streaming state and batch run.

use super::error::PageHinkleyError;
use super::params::{Direction, PageHinkleyParams, PageHinkleyValidParams, PhReference};

/// A Page–Hinkley signal.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PhAlarm {
    /// 0-based position of the signalling observation (gaps included).
    pub index: usize,
    /// PH_T at the signal, data units.
    pub statistic: f64,
    /// Onset estimate, as for the CUSUM: the 0-based position of the last
    /// in-control observation, where m_t last reached its minimum M_T (the
    /// change begins at the next observation); `None` when the minimum is the
    /// initial M_0 = 0 of Variant B, i.e. the change began at position 0.
    pub last_in_control: Option<usize>,
}

/// Page–Hinkley test for a change in the mean, both published variants.
///
/// ```text
/// Variant A (PhReference::RunningMean, project default):
///     xbar_T = mean(x_1..x_T)
///     m_T = m_{T-1} + (x_T - xbar_T - delta),   m_0 = 0
///     M_T = min(m_1..m_T)
/// Variant B (PhReference::KnownMean(mu_0)):
///     m_T = sum_{t<=T} (x_t - mu_0 - delta)
///     M_T = min(0, m_1..m_T)                    => PH_T == C+_T of the tabular CUSUM with K = delta
/// PH_T = m_T - M_T,  alarm when PH_T > lambda
/// Direction::Decrease uses -(x_T - reference) in place of (x_T - reference).
/// ```
///
/// Units: `delta`, `lambda` and PH are in data units. Non-finite values are
/// gaps (skipped, position counted). See [`PageHinkleyValidParams`] for the table.
///
/// # Errors
/// Parameter checking fails as listed in [`PageHinkleyParamsError`](super::PageHinkleyParamsError).
///
/// # Panics
/// Never.
///
/// # References
/// E. S. Page (1954), "Continuous inspection schemes", Biometrika 41(1/2), 100-115.
/// D. V. Hinkley (1971), "Inference about the change-point from cumulative sum tests",
/// Biometrika 58(3), 509-523.
/// J. Gama, I. Žliobaitė, A. Bifet, M. Pechenizkiy, A. Bouchachia (2014), "A survey on concept
/// drift adaptation", ACM Computing Surveys 46(4), article 44 (running-mean form; from memory).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PageHinkley {
    params: PageHinkleyValidParams,
    n: usize,
    mean: f64,
    m: f64,
    min_m: f64,
    argmin: Option<usize>,
    seen: usize,
}

impl PageHinkley {
    /// Unchecked parameters with the defaults.
    pub fn params() -> PageHinkleyParams {
        PageHinkleyParams::default()
    }

    /// A fresh test.
    pub fn new(params: PageHinkleyValidParams) -> Self {
        let mut s = Self { params, n: 0, mean: 0.0, m: 0.0, min_m: 0.0, argmin: None, seen: 0 };
        s.reset();
        s
    }

    /// The parameters.
    pub fn parameters(&self) -> &PageHinkleyValidParams {
        &self.params
    }
    /// Current m_T.
    pub fn m(&self) -> f64 {
        self.m
    }
    /// Current M_T.
    pub fn min_m(&self) -> f64 {
        self.min_m
    }
    /// Current PH_T = m_T - M_T (0 before the first observation).
    pub fn statistic(&self) -> f64 {
        if self.min_m.is_finite() { self.m - self.min_m } else { 0.0 }
    }
    /// Running mean (Variant A), 0 before any observation.
    pub fn running_mean(&self) -> f64 {
        self.mean
    }

    /// Restart the sums (and the running mean); the position counter is kept.
    pub fn reset(&mut self) {
        self.n = 0;
        self.mean = 0.0;
        self.m = 0.0;
        self.argmin = None;
        self.min_m = match self.params.reference {
            PhReference::RunningMean => f64::INFINITY, // min over m_1..m_T only
            PhReference::KnownMean(_) => 0.0,          // M_0 = 0 included
        };
    }

    fn step(&mut self, x: f64) -> Option<PhAlarm> {
        let index = self.seen;
        self.seen += 1;
        if !x.is_finite() {
            return None;
        }
        self.n += 1;
        self.mean += (x - self.mean) / self.n as f64;
        let reference = match self.params.reference {
            PhReference::RunningMean => self.mean,
            PhReference::KnownMean(mu) => mu,
        };
        let dev = match self.params.direction {
            Direction::Increase => x - reference,
            Direction::Decrease => reference - x,
        };
        self.m += dev - self.params.delta;
        if self.m <= self.min_m {
            self.min_m = self.m;
            self.argmin = Some(index);
        }
        let ph = self.m - self.min_m;
        (ph > self.params.lambda).then_some(PhAlarm {
            index,
            statistic: ph,
            last_in_control: self.argmin,
        })
    }

    /// Feed one observation; returns the signal, if any.
    pub fn update(&mut self, x: f64) -> Option<PhAlarm> {
        let a = self.step(x);
        if a.is_some() && self.params.reset_after_alarm {
            self.reset();
        }
        a
    }
}

/// The record of a batch Page–Hinkley run (values before any reset).
#[derive(Debug, Clone, PartialEq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PhTrace {
    /// Reference used at each step (running mean, or mu_0).
    pub reference: Vec<f64>,
    /// m_T per observation.
    pub m: Vec<f64>,
    /// M_T per observation.
    pub min_m: Vec<f64>,
    /// PH_T per observation.
    pub ph: Vec<f64>,
    /// Every signal in order.
    pub alarms: Vec<PhAlarm>,
}

/// Run Page–Hinkley over `x` from a fresh state.
///
/// # Errors
/// [`PageHinkleyError::NonFinite`] naming the first NaN/infinite observation.
///
/// # Panics
/// Never.
pub fn page_hinkley(
    x: &[f64],
    params: &PageHinkleyValidParams,
) -> Result<PhTrace, PageHinkleyError> {
    if let Some((index, &value)) = x.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        return Err(PageHinkleyError::NonFinite { index, value });
    }
    let mut s = PageHinkley::new(params.clone());
    let mut t = PhTrace::default();
    for &v in x {
        let a = s.step(v);
        t.reference.push(match params.reference {
            PhReference::RunningMean => s.mean,
            PhReference::KnownMean(mu) => mu,
        });
        t.m.push(s.m);
        t.min_m.push(s.min_m);
        t.ph.push(s.m - s.min_m);
        if a.is_some() && params.reset_after_alarm {
            s.reset();
        }
        t.alarms.extend(a);
    }
    Ok(t)
}

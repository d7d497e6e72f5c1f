//! Self-starting CUSUM for location (Hawkins 1987).

use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

use super::algorithm::{Alarm, Cusum, Side};
use super::error::CusumParamsError;
use super::params::CusumParams;
use linfa::ParamGuard;

/// Self-starting CUSUM: no baseline needed; each new observation is scored
/// against the running mean and sd of the observations before it.
///
/// ```text
/// n-th observation (n >= 3), previous mean xbar_{n-1}, sd s_{n-1} (ddof 1):
/// T_n = (x_n - xbar_{n-1}) / s_{n-1} * sqrt((n - 1) / n)     ~ Student t, n - 2 d.f.
/// U_n = Phi^-1( F_t(T_n; n - 2) )                            ~ N(0, 1), independent
/// then the tabular CUSUM on U_n with target 0, sigma 1, drift k, threshold h
/// ```
///
/// | Parameter            | Default | Units | Range    | Purpose |
/// |----------------------|---------|-------|----------|---------|
/// | `drift` (k)          | 0.5     | sigma | [0, inf) | half the shift to detect |
/// | `threshold` (h)      | 5.0     | sigma | (0, inf) | decision interval |
/// | `restart_after_alarm`| true    | —     | bool     | forget the running estimates after a signal (the new regime becomes the reference) |
///
/// The first two observations (and any further ones while the running sd is
/// still 0) only build the estimates and are not scored. Non-finite values
/// are gaps (skipped, position counted). Alarm statistics and the shift
/// estimate are in U (normal-score) units.
///
/// # Errors
/// [`SelfStartingCusum::new`] returns [`CusumParamsError`] for a bad k or h.
///
/// # Panics
/// Never.
///
/// # References
/// D. M. Hawkins (1987), "Self-starting cusum charts for location and scale",
/// Journal of the Royal Statistical Society Series D (The Statistician) 36(4), 299-316.
#[derive(Debug, Clone)]
pub struct SelfStartingCusum {
    chart: Cusum,
    restart: bool,
    n: usize,
    mean: f64,
    m2: f64,
    seen: usize,
    last_score: Option<f64>,
    // Stream positions where the chart's current upper / lower runs began:
    // the inner chart counts scored points only, so its own indices are not
    // stream positions.
    upper_start: usize,
    lower_start: usize,
}

impl SelfStartingCusum {
    /// A chart with reference value `drift` and decision interval `threshold` (sigma units).
    pub fn new(
        drift: f64,
        threshold: f64,
        restart_after_alarm: bool,
    ) -> Result<Self, CusumParamsError> {
        let p = CusumParams::new(0.0, 1.0).drift(drift).threshold(threshold).check()?;
        Ok(Self {
            chart: Cusum::new(p),
            restart: restart_after_alarm,
            n: 0,
            mean: 0.0,
            m2: 0.0,
            seen: 0,
            last_score: None,
            upper_start: 0,
            lower_start: 0,
        })
    }

    /// Normal score U of the last scored observation, if it was scored.
    pub fn last_score(&self) -> Option<f64> {
        self.last_score
    }
    /// The inner chart on the normal scores.
    pub fn chart(&self) -> &Cusum {
        &self.chart
    }

    /// Hawkins' normal score of `x` against the current running estimates,
    /// `None` while fewer than 2 previous points or their sd is 0.
    fn score(&self, x: f64) -> Option<f64> {
        if self.n < 2 || self.m2 <= 0.0 {
            return None;
        }
        let n_new = (self.n + 1) as f64;
        let sd = (self.m2 / (self.n as f64 - 1.0)).sqrt();
        let t = (x - self.mean) / sd * ((n_new - 1.0) / n_new).sqrt();
        let dist = StudentsT::new(0.0, 1.0, n_new - 2.0).ok()?;
        // evaluate in the lower tail and mirror, so large |T| keeps precision
        let p = dist.cdf(-t.abs()).max(f64::MIN_POSITIVE);
        let u = Normal::standard().inverse_cdf(p);
        Some(if t > 0.0 { -u } else { u })
    }

    /// Feed one observation; returns the signal, if any. The alarm `index`
    /// is the 0-based position in the stream.
    pub fn update(&mut self, x: f64) -> Option<Alarm> {
        let index = self.seen;
        self.seen += 1;
        self.last_score = None;
        if !x.is_finite() {
            return None;
        }
        let alarm = self.score(x).and_then(|u| {
            self.last_score = Some(u);
            let alarm = self.chart.update_standardised(u);
            if self.chart.n_upper() == 1 {
                self.upper_start = index;
            }
            if self.chart.n_lower() == 1 {
                self.lower_start = index;
            }
            alarm.map(|mut a| {
                let start = match (a.run_length, a.side) {
                    // a run that began and signalled at this point (the chart may have reset)
                    (1, _) => index,
                    (_, Side::Upper) => self.upper_start,
                    (_, Side::Lower) => self.lower_start,
                };
                a.index = index;
                a.last_in_control = start.checked_sub(1);
                a
            })
        });
        if alarm.is_some() && self.restart {
            self.n = 0;
            self.mean = 0.0;
            self.m2 = 0.0;
            return alarm;
        }
        // Welford update with x
        self.n += 1;
        let d = x - self.mean;
        self.mean += d / self.n as f64;
        self.m2 += d * (x - self.mean);
        alarm
    }
}

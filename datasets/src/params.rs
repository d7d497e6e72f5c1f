//! Fleet parameters: an unchecked builder ([`FleetParams`]) that turns into a
//! checked set ([`FleetValidParams`]) through [`FleetParams::check`], after
//! linfa's `ParamGuard` convention.
//!
//! | Parameter           | `demo()`     | `small()`   | `benchmark()` | Units   | Range                        |
//! |---------------------|--------------|-------------|---------------|---------|------------------------------|
//! | `seed`              | 2026         | 7           | 1000          | -       | any `u64`                    |
//! | `sites`             | 3            | 3           | 100           | -       | 1..=1000                     |
//! | `pumps_per_site`    | 10           | 8           | 10            | -       | 1..=99                       |
//! | `days`              | 84           | 5           | 7             | days    | >= 2                         |
//! | `fit_days`          | 28           | 2           | 3             | days    | 1..days                      |
//! | `sample_interval_s` | 60           | 300         | 60            | seconds | 1..=3600, divides 86400      |
//! | `noise_multiplier`  | 1.0          | 1.0         | 1.0           | -       | 0..=20 (0 = quantization only) |
//! | `fault_mix`         | `Catalogue`  | `Catalogue` | `Share(0.3)`  | -       | share in 0..=1               |
//! | `start`             | 2026-05-04   | 2026-05-04  | 2026-05-04    | UTC     | midnight UTC                 |

use crate::error::FleetParamsError;
use chrono::{DateTime, NaiveDate, Timelike, Utc};

/// Which cases are injected into the fleet.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub enum FaultMix {
    /// Every scripted case once (spread over the sites in a seeded order), the
    /// remaining assets clean; the heatwave at the second site and the
    /// raw-water supply change at the first. With 19 or more assets every
    /// class and mode of DESIGN.md section 3 appears.
    Catalogue,
    /// Each asset gets a randomly drawn scripted case with this probability;
    /// each site gets a heatwave or a supply change with a third of it.
    Share(f64),
    /// No injected case at all: a clean fleet (duty cycles and weather only).
    None,
}

/// Checked fleet parameters; build them with [`FleetParams`].
#[derive(Debug, Clone, PartialEq)]
pub struct FleetValidParams {
    pub(crate) seed: u64,
    pub(crate) sites: usize,
    pub(crate) pumps_per_site: usize,
    pub(crate) days: u32,
    pub(crate) fit_days: u32,
    pub(crate) sample_interval_s: u32,
    pub(crate) noise_multiplier: f64,
    pub(crate) fault_mix: FaultMix,
    pub(crate) start: DateTime<Utc>,
}

/// Unchecked fleet parameters (a builder); [`FleetParams::check`] validates them.
///
/// ```
/// use telltale_datasets::FleetParams;
/// let p = FleetParams::small().seed(11).days(4).check()?;
/// assert_eq!(p.asset_count(), 24);
/// # Ok::<(), telltale_datasets::FleetParamsError>(())
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct FleetParams(FleetValidParams);

fn default_start() -> DateTime<Utc> {
    // A Monday in early summer, so the heatwave of the scan weeks is plausible.
    NaiveDate::from_ymd_opt(2026, 5, 4)
        .and_then(|d| d.and_hms_opt(0, 0, 0))
        .map(|d| d.and_utc())
        .unwrap_or_default()
}

impl Default for FleetParams {
    fn default() -> Self {
        Self::demo()
    }
}

impl FleetParams {
    /// The demo fleet: 3 stations x 10 pumps (6 booster, 4 raw-water), 10
    /// sensors each, 12 weeks at 1-minute samples (about 36 million rows),
    /// the first 4 weeks clean for fitting.
    pub fn demo() -> Self {
        Self(FleetValidParams {
            seed: 2026,
            sites: 3,
            pumps_per_site: 10,
            days: 84,
            fit_days: 28,
            sample_interval_s: 60,
            noise_multiplier: 1.0,
            fault_mix: FaultMix::Catalogue,
            start: default_start(),
        })
    }

    /// A small fleet for tests: 3 stations x 8 pumps, 5 days at 5-minute
    /// samples (2 days to fit), the full catalogue of cases (about 0.35 million rows).
    pub fn small() -> Self {
        Self(FleetValidParams {
            seed: 7,
            sites: 3,
            pumps_per_site: 8,
            days: 5,
            fit_days: 2,
            sample_interval_s: 300,
            noise_multiplier: 1.0,
            fault_mix: FaultMix::Catalogue,
            start: default_start(),
        })
    }

    /// The benchmark fleet: 100 stations x 10 pumps = 1,000 assets, 1 week at
    /// 1-minute samples (about 100 million rows), 30% of the assets with a case.
    pub fn benchmark() -> Self {
        Self(FleetValidParams {
            seed: 1000,
            sites: 100,
            pumps_per_site: 10,
            days: 7,
            fit_days: 3,
            sample_interval_s: 60,
            noise_multiplier: 1.0,
            fault_mix: FaultMix::Share(0.3),
            start: default_start(),
        })
    }

    /// Seed of every random stream of the fleet.
    pub fn seed(mut self, seed: u64) -> Self {
        self.0.seed = seed;
        self
    }
    /// Number of pumping stations (sites).
    pub fn sites(mut self, sites: usize) -> Self {
        self.0.sites = sites;
        self
    }
    /// Pumps per station; 40% (rounded) are raw-water pumps, the rest boosters.
    pub fn pumps_per_site(mut self, pumps: usize) -> Self {
        self.0.pumps_per_site = pumps;
        self
    }
    /// Length of the generated history in days.
    pub fn days(mut self, days: u32) -> Self {
        self.0.days = days;
        self
    }
    /// Length of the clean fit span at the start, in days.
    pub fn fit_days(mut self, fit_days: u32) -> Self {
        self.0.fit_days = fit_days;
        self
    }
    /// Sampling interval of every sensor, in seconds.
    pub fn sample_interval_s(mut self, s: u32) -> Self {
        self.0.sample_interval_s = s;
        self
    }
    /// Multiplier on every sensor's measurement noise (1.0 = calibrated).
    pub fn noise_multiplier(mut self, m: f64) -> Self {
        self.0.noise_multiplier = m;
        self
    }
    /// Which cases are injected.
    pub fn fault_mix(mut self, mix: FaultMix) -> Self {
        self.0.fault_mix = mix;
        self
    }
    /// First timestamp (midnight UTC).
    pub fn start(mut self, start: DateTime<Utc>) -> Self {
        self.0.start = start;
        self
    }

    /// Validate every parameter.
    ///
    /// # Errors
    /// The first [`FleetParamsError`] found, naming the parameter and its value.
    pub fn check(self) -> Result<FleetValidParams, FleetParamsError> {
        let p = self.0;
        if !(1..=1000).contains(&p.sites) {
            return Err(FleetParamsError::Sites(p.sites));
        }
        if !(1..=99).contains(&p.pumps_per_site) {
            return Err(FleetParamsError::PumpsPerSite(p.pumps_per_site));
        }
        if p.days < 2 {
            return Err(FleetParamsError::Days(p.days));
        }
        if p.fit_days < 1 || p.fit_days >= p.days {
            return Err(FleetParamsError::FitDays { fit_days: p.fit_days, days: p.days });
        }
        if !(1..=3600).contains(&p.sample_interval_s) || 86_400 % p.sample_interval_s != 0 {
            return Err(FleetParamsError::SampleInterval(p.sample_interval_s));
        }
        if !p.noise_multiplier.is_finite() || !(0.0..=20.0).contains(&p.noise_multiplier) {
            return Err(FleetParamsError::NoiseMultiplier(p.noise_multiplier));
        }
        if let FaultMix::Share(s) = p.fault_mix
            && (!s.is_finite() || !(0.0..=1.0).contains(&s))
        {
            return Err(FleetParamsError::FaultShare(s));
        }
        if p.start.num_seconds_from_midnight() != 0 || p.start.timestamp_subsec_nanos() != 0 {
            return Err(FleetParamsError::Start(p.start.to_rfc3339()));
        }
        Ok(p)
    }
}

impl FleetValidParams {
    /// Seed of every random stream.
    pub fn seed(&self) -> u64 {
        self.seed
    }
    /// Number of sites.
    pub fn sites(&self) -> usize {
        self.sites
    }
    /// Pumps per site.
    pub fn pumps_per_site(&self) -> usize {
        self.pumps_per_site
    }
    /// Days of history.
    pub fn days(&self) -> u32 {
        self.days
    }
    /// Days of the clean fit span.
    pub fn fit_days(&self) -> u32 {
        self.fit_days
    }
    /// Sampling interval in seconds.
    pub fn sample_interval_s(&self) -> u32 {
        self.sample_interval_s
    }
    /// Noise multiplier.
    pub fn noise_multiplier(&self) -> f64 {
        self.noise_multiplier
    }
    /// Fault mix.
    pub fn fault_mix(&self) -> FaultMix {
        self.fault_mix
    }
    /// First timestamp.
    pub fn start(&self) -> DateTime<Utc> {
        self.start
    }
    /// Number of assets (`sites * pumps_per_site`).
    pub fn asset_count(&self) -> usize {
        self.sites * self.pumps_per_site
    }
    /// Samples per sensor on the full grid (before dropouts and outages).
    pub fn samples_per_sensor(&self) -> usize {
        (u64::from(self.days) * 86_400 / u64::from(self.sample_interval_s)) as usize
    }
    /// Rows on the full grid for the whole fleet (an upper bound on the rows written).
    pub fn grid_rows(&self) -> u64 {
        (self.asset_count() * crate::layout::SENSORS.len()) as u64
            * self.samples_per_sensor() as u64
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn presets_are_valid() {
        for p in [FleetParams::demo(), FleetParams::small(), FleetParams::benchmark()] {
            p.check().unwrap();
        }
        assert_eq!(FleetParams::benchmark().check().unwrap().asset_count(), 1000);
    }

    #[test]
    fn sites_cannot_be_zero() {
        assert_eq!(FleetParams::small().sites(0).check(), Err(FleetParamsError::Sites(0)));
    }

    #[test]
    fn pumps_per_site_cannot_be_zero() {
        assert!(matches!(
            FleetParams::small().pumps_per_site(0).check(),
            Err(FleetParamsError::PumpsPerSite(0))
        ));
    }

    #[test]
    fn days_need_fit_and_scan() {
        assert!(matches!(FleetParams::small().days(1).check(), Err(FleetParamsError::Days(1))));
        assert!(matches!(
            FleetParams::small().days(5).fit_days(5).check(),
            Err(FleetParamsError::FitDays { .. })
        ));
        assert!(matches!(
            FleetParams::small().fit_days(0).check(),
            Err(FleetParamsError::FitDays { .. })
        ));
    }

    #[test]
    fn sample_interval_must_divide_a_day() {
        assert!(FleetParams::small().sample_interval_s(7).check().is_err());
        assert!(FleetParams::small().sample_interval_s(0).check().is_err());
        assert!(FleetParams::small().sample_interval_s(7200).check().is_err());
        assert!(FleetParams::small().sample_interval_s(120).check().is_ok());
    }

    #[test]
    fn noise_multiplier_must_be_finite_and_bounded() {
        assert!(FleetParams::small().noise_multiplier(f64::NAN).check().is_err());
        assert!(FleetParams::small().noise_multiplier(-0.1).check().is_err());
        assert!(FleetParams::small().noise_multiplier(0.0).check().is_ok());
    }

    #[test]
    fn fault_share_must_be_a_probability() {
        assert!(FleetParams::small().fault_mix(FaultMix::Share(1.5)).check().is_err());
        assert!(FleetParams::small().fault_mix(FaultMix::Share(0.5)).check().is_ok());
    }

    #[test]
    fn start_must_be_midnight() {
        let t = default_start() + chrono::Duration::hours(3);
        assert!(matches!(FleetParams::small().start(t).check(), Err(FleetParamsError::Start(_))));
    }
}

//! The records that cross file and wire boundaries: verdict vocabulary
//! (DESIGN.md section 3), archived events (4.3) and suspicions (4.4).

use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// Top-level class of a verdict or of an archived event.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Class {
    /// The instrument or its signal path is wrong; the machine is not.
    SensorFault,
    /// The machine really behaves differently, explained by context or shared by peers.
    ProcessChange,
    /// The machine's condition changed.
    EquipmentFault,
    /// An archived functional failure (events only, never a verdict).
    Failure,
    /// Archived maintenance work (events only, never a verdict).
    Maintenance,
}

impl Class {
    /// Every class, verdicts first.
    pub const ALL: [Class; 5] = [
        Class::SensorFault,
        Class::ProcessChange,
        Class::EquipmentFault,
        Class::Failure,
        Class::Maintenance,
    ];

    /// The snake_case name used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Class::SensorFault => "sensor_fault",
            Class::ProcessChange => "process_change",
            Class::EquipmentFault => "equipment_fault",
            Class::Failure => "failure",
            Class::Maintenance => "maintenance",
        }
    }

    /// Whether this class is a verdict (the first three) rather than an event.
    pub fn is_verdict(self) -> bool {
        matches!(self, Class::SensorFault | Class::ProcessChange | Class::EquipmentFault)
    }

    /// The modes allowed under this class (empty for `failure` / `maintenance`).
    pub fn modes(self) -> &'static [Mode] {
        use Mode::*;
        match self {
            Class::SensorFault => &[Bias, Drift, Stuck, Spikes, Noise, Dropout, OutOfRange],
            Class::ProcessChange => &[LevelShift, RegimeChange, CommonMode],
            Class::EquipmentFault => &[Degradation, StepChange],
            Class::Failure | Class::Maintenance => &[],
        }
    }
}

impl fmt::Display for Class {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Class {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Class::ALL.into_iter().find(|c| c.as_str() == s).ok_or_else(|| {
            format!(
                "unknown class {s:?}; expected one of sensor_fault, process_change, \
                 equipment_fault, failure, maintenance"
            )
        })
    }
}

/// Mode of a verdict, within its class (DESIGN.md section 3).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// Sensor: constant offset.
    Bias,
    /// Sensor: slowly growing offset.
    Drift,
    /// Sensor: frozen at one value.
    Stuck,
    /// Sensor: isolated outliers.
    Spikes,
    /// Sensor: spread up, level unchanged.
    Noise,
    /// Sensor: silent while its neighbours report.
    Dropout,
    /// Sensor: readings outside the instrument range.
    OutOfRange,
    /// Process: level change explained by context.
    LevelShift,
    /// Process: operating-regime occupancy changed.
    RegimeChange,
    /// Process: shared by most peers at the site.
    CommonMode,
    /// Equipment: slow deterioration.
    Degradation,
    /// Equipment: abrupt change in condition.
    StepChange,
}

impl Mode {
    /// Every mode.
    pub const ALL: [Mode; 12] = [
        Mode::Bias,
        Mode::Drift,
        Mode::Stuck,
        Mode::Spikes,
        Mode::Noise,
        Mode::Dropout,
        Mode::OutOfRange,
        Mode::LevelShift,
        Mode::RegimeChange,
        Mode::CommonMode,
        Mode::Degradation,
        Mode::StepChange,
    ];

    /// The snake_case name used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Mode::Bias => "bias",
            Mode::Drift => "drift",
            Mode::Stuck => "stuck",
            Mode::Spikes => "spikes",
            Mode::Noise => "noise",
            Mode::Dropout => "dropout",
            Mode::OutOfRange => "out_of_range",
            Mode::LevelShift => "level_shift",
            Mode::RegimeChange => "regime_change",
            Mode::CommonMode => "common_mode",
            Mode::Degradation => "degradation",
            Mode::StepChange => "step_change",
        }
    }

    /// The class this mode belongs to.
    pub fn class(self) -> Class {
        [Class::SensorFault, Class::ProcessChange, Class::EquipmentFault]
            .into_iter()
            .find(|c| c.modes().contains(&self))
            .unwrap_or(Class::SensorFault)
    }
}

impl fmt::Display for Mode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Mode {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Mode::ALL.into_iter().find(|m| m.as_str() == s).ok_or_else(|| {
            let all: Vec<&str> = Mode::ALL.iter().map(|m| m.as_str()).collect();
            format!("unknown mode {s:?}; expected one of {}", all.join(", "))
        })
    }
}

/// One archived event or ground-truth label (DESIGN.md 4.3).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Event {
    /// Asset id.
    pub asset: String,
    /// Sensor id; `None` for asset-level events.
    pub sensor: Option<String>,
    /// Class (verdict classes or `failure` / `maintenance`).
    pub class: Class,
    /// Mode; `None` for `failure` / `maintenance`.
    pub mode: Option<Mode>,
    /// Start (UTC).
    pub start: DateTime<Utc>,
    /// End (UTC); `None` for point events and open-ended changes.
    pub end: Option<DateTime<Utc>>,
    /// Free text.
    pub note: String,
}

/// One piece of evidence behind a verdict.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Evidence {
    /// Name of the test or channel, e.g. `cusum_up`, `peer_robust_z`.
    pub test: String,
    /// The test statistic.
    pub statistic: f64,
    /// The threshold it was compared against.
    pub threshold: f64,
    /// Tail probability, where the test gives one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub p_value: Option<f64>,
    /// Human-readable detail (which baseline, which neighbours or peers).
    pub detail: String,
}

/// One suspicion: a lasting change, reported once with its onset (DESIGN.md 4.4).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Suspicion {
    /// Stable hash of asset, sensor, class, mode and onset; see [`suspicion_id`].
    pub id: String,
    /// 1 = look first, over the whole output.
    pub rank: u32,
    /// Asset id.
    pub asset: String,
    /// Sensor id; `None` for asset-level suspicions.
    pub sensor: Option<String>,
    /// Verdict class.
    pub class: Class,
    /// Verdict mode.
    pub mode: Mode,
    /// Confidence that the verdict is right and matters, 0..1.
    pub score: f64,
    /// Size of the change in robust-sigma units of the baseline it was judged against.
    pub magnitude: f64,
    /// Estimated start of the change.
    pub onset: DateTime<Utc>,
    /// End of the earliest evaluation step whose evidence crossed the threshold.
    pub detected: DateTime<Utc>,
    /// One sentence a reliability engineer can act on.
    pub summary: String,
    /// The evidence behind the verdict.
    pub evidence: Vec<Evidence>,
}

/// Stable id of a suspicion: the first 16 hex digits of SHA-256 over
/// `asset \x1f sensor \x1f class \x1f mode \x1f onset-epoch-ms`.
///
/// Re-scanning the same data gives the same onset and so the same id.
pub fn suspicion_id(
    asset: &str,
    sensor: Option<&str>,
    class: Class,
    mode: Mode,
    onset: DateTime<Utc>,
) -> String {
    use sha2::{Digest, Sha256};
    let mut h = Sha256::new();
    h.update(asset.as_bytes());
    h.update([0x1f]);
    h.update(sensor.unwrap_or("").as_bytes());
    h.update([0x1f]);
    h.update(class.as_str().as_bytes());
    h.update([0x1f]);
    h.update(mode.as_str().as_bytes());
    h.update([0x1f]);
    h.update(onset.timestamp_millis().to_string().as_bytes());
    let digest = h.finalize();
    digest[..8].iter().map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_mode_has_one_class() {
        for m in Mode::ALL {
            let owners: Vec<_> = Class::ALL.iter().filter(|c| c.modes().contains(&m)).collect();
            assert_eq!(owners.len(), 1, "{m}");
            assert_eq!(*owners[0], m.class());
        }
    }

    #[test]
    fn names_round_trip() {
        for c in Class::ALL {
            assert_eq!(c.as_str().parse::<Class>().unwrap(), c);
            assert_eq!(serde_json::to_string(&c).unwrap(), format!("\"{c}\""));
        }
        for m in Mode::ALL {
            assert_eq!(m.as_str().parse::<Mode>().unwrap(), m);
        }
        assert!("bogus".parse::<Mode>().unwrap_err().contains("out_of_range"));
    }

    #[test]
    fn id_is_stable_and_sensitive() {
        let t = DateTime::parse_from_rfc3339("2026-03-02T10:00:00Z").unwrap().to_utc();
        let a = suspicion_id("north-b1", Some("bearing_de"), Class::SensorFault, Mode::Bias, t);
        let b = suspicion_id("north-b1", Some("bearing_de"), Class::SensorFault, Mode::Bias, t);
        let c = suspicion_id("north-b1", Some("bearing_de"), Class::SensorFault, Mode::Drift, t);
        assert_eq!(a, b);
        assert_ne!(a, c);
        assert_eq!(a.len(), 16);
    }
}

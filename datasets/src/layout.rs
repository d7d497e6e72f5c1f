//! The fleet's layout: stations (sites), pump groups, the ten sensors of every
//! pump with their roles, instrument ranges and resolutions, and the fleet
//! registry written in the TOML form of DESIGN.md 4.2.

use std::fmt::Write as _;

/// Role of a sensor (DESIGN.md 4.2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Role {
    /// Sets the operating point (speed, flow, suction pressure, ambient).
    Context,
    /// Reflects the machine's health.
    Condition,
}

impl Role {
    /// The name used in the registry.
    pub fn as_str(self) -> &'static str {
        match self {
            Role::Context => "context",
            Role::Condition => "condition",
        }
    }
}

/// A pump group: assets expected to behave alike.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum PumpGroup {
    /// Treated-water booster pumps: 2-pole motors on variable-speed drives.
    Booster,
    /// Raw-water intake pumps: 4-pole motors on variable-speed drives.
    RawWater,
}

impl PumpGroup {
    /// The group id used in the registry.
    pub fn id(self) -> &'static str {
        match self {
            PumpGroup::Booster => "booster",
            PumpGroup::RawWater => "raw_water",
        }
    }

    /// Rated point of the group's pumps (before the per-pump spread).
    pub(crate) fn rating(self) -> Rating {
        match self {
            PumpGroup::Booster => Rating {
                speed_rpm: 2950.0,
                flow_m3h: 160.0,
                head_bar: 5.5,
                current_a: 95.0,
                suction_bar: 1.8,
            },
            PumpGroup::RawWater => Rating {
                speed_rpm: 1480.0,
                flow_m3h: 420.0,
                head_bar: 3.2,
                current_a: 160.0,
                suction_bar: 0.45,
            },
        }
    }
}

/// Rated (best-efficiency) point of a pump group.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Rating {
    pub(crate) speed_rpm: f64,
    pub(crate) flow_m3h: f64,
    pub(crate) head_bar: f64,
    pub(crate) current_a: f64,
    pub(crate) suction_bar: f64,
}

/// Static description of one sensor kind.
#[derive(Debug, Clone, Copy)]
pub(crate) struct SensorDef {
    pub(crate) id: &'static str,
    pub(crate) unit: &'static str,
    pub(crate) role: Role,
    /// Reading resolution (quantization step), in the sensor's unit.
    pub(crate) resolution: f64,
}

/// Sensor indices, in the byte order of their ids (the order rows are written).
pub(crate) mod sid {
    pub(crate) const AMBIENT: usize = 0;
    pub(crate) const BEARING_DE: usize = 1;
    pub(crate) const BEARING_NDE: usize = 2;
    pub(crate) const DISCHARGE: usize = 3;
    pub(crate) const FLOW: usize = 4;
    pub(crate) const CURRENT: usize = 5;
    pub(crate) const SPEED: usize = 6;
    pub(crate) const SUCTION: usize = 7;
    pub(crate) const VIBRATION: usize = 8;
    pub(crate) const WINDING: usize = 9;
}

/// The ten sensors of every pump, sorted by id.
pub(crate) const SENSORS: [SensorDef; 10] = [
    SensorDef { id: "ambient_temp", unit: "degC", role: Role::Context, resolution: 0.1 },
    SensorDef { id: "bearing_de_temp", unit: "degC", role: Role::Condition, resolution: 0.1 },
    SensorDef { id: "bearing_nde_temp", unit: "degC", role: Role::Condition, resolution: 0.1 },
    SensorDef { id: "discharge_pressure", unit: "bar", role: Role::Condition, resolution: 0.01 },
    SensorDef { id: "flow", unit: "m3/h", role: Role::Context, resolution: 0.1 },
    SensorDef { id: "motor_current", unit: "A", role: Role::Condition, resolution: 0.1 },
    SensorDef { id: "speed", unit: "rpm", role: Role::Context, resolution: 1.0 },
    SensorDef { id: "suction_pressure", unit: "bar", role: Role::Context, resolution: 0.01 },
    SensorDef { id: "vibration", unit: "mm/s", role: Role::Condition, resolution: 0.01 },
    SensorDef { id: "winding_temp", unit: "degC", role: Role::Condition, resolution: 0.5 },
];

/// One sensor as the registry describes it for a group.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorInfo {
    /// Sensor id, unique within an asset.
    pub id: &'static str,
    /// Unit of the readings.
    pub unit: &'static str,
    /// Context or condition.
    pub role: Role,
    /// Instrument measuring range, bounds included.
    pub range: (f64, f64),
    /// Normal operating band, where one is meaningful.
    pub band: Option<(f64, f64)>,
    /// Reading resolution (quantization step).
    pub resolution: f64,
}

/// The sensors of a group's pumps, in id order, with their ranges.
pub fn sensor_infos(group: PumpGroup) -> Vec<SensorInfo> {
    let booster = group == PumpGroup::Booster;
    SENSORS
        .iter()
        .enumerate()
        .map(|(i, d)| {
            let (range, band) = match i {
                sid::AMBIENT => ((-30.0, 60.0), None),
                sid::BEARING_DE | sid::BEARING_NDE => ((-20.0, 150.0), Some((5.0, 85.0))),
                sid::DISCHARGE => {
                    if booster {
                        ((0.0, 16.0), Some((3.0, 8.5)))
                    } else {
                        ((0.0, 10.0), Some((1.5, 4.5)))
                    }
                }
                sid::FLOW => ((0.0, if booster { 300.0 } else { 800.0 }), None),
                sid::CURRENT => ((0.0, if booster { 200.0 } else { 300.0 }), None),
                sid::SPEED => ((0.0, if booster { 3600.0 } else { 1800.0 }), None),
                sid::SUCTION => ((-1.0, 6.0), None),
                // 4.5 mm/s: zone B/C boundary for medium machines on rigid
                // foundations in ISO 10816-3 (from memory).
                sid::VIBRATION => ((0.0, 50.0), Some((0.0, 4.5))),
                _ => ((-20.0, 200.0), Some((5.0, 130.0))),
            };
            SensorInfo {
                id: d.id,
                unit: d.unit,
                role: d.role,
                range,
                band,
                resolution: d.resolution,
            }
        })
        .collect()
}

/// One pump of the fleet.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AssetInfo {
    /// Asset id, e.g. `hillcrest-b3`.
    pub id: String,
    /// Site (station) id.
    pub site: String,
    /// Pump group.
    pub group: PumpGroup,
    /// Criticality 1..=5 (boosters 4: they feed customers directly; raw-water 3).
    pub criticality: u8,
    /// Index in the fleet (`site_index * pumps_per_site + slot`).
    pub index: usize,
    /// Index of the site.
    pub site_index: usize,
    /// Position within its group at the site (0-based), which sets its duty rotation.
    pub slot: usize,
    /// Number of pumps in its group at the site.
    pub group_size: usize,
}

const SITE_NAMES: [&str; 8] = [
    "hillcrest",
    "riverside",
    "northgate",
    "eastbrook",
    "millbank",
    "oakridge",
    "stonyford",
    "westmere",
];

/// Id of site `i`: a coined name for the first eight, `station-NNN` after.
pub fn site_name(i: usize) -> String {
    SITE_NAMES.get(i).map_or_else(|| format!("station-{:03}", i + 1), |s| (*s).to_string())
}

/// Raw-water pumps at a station of `p` pumps: 40%, rounded.
pub(crate) fn raw_count(p: usize) -> usize {
    ((p as f64) * 0.4).round() as usize
}

/// Every asset of a fleet, in index order.
pub(crate) fn assets(sites: usize, pumps_per_site: usize) -> Vec<AssetInfo> {
    let raw = raw_count(pumps_per_site);
    let booster = pumps_per_site - raw;
    let width = |n: usize| if n >= 10 { 2 } else { 1 };
    let mut out = Vec::with_capacity(sites * pumps_per_site);
    for s in 0..sites {
        let site = site_name(s);
        for slot in 0..pumps_per_site {
            let (group, letter, local, size) = if slot < booster {
                (PumpGroup::Booster, 'b', slot, booster)
            } else {
                (PumpGroup::RawWater, 'r', slot - booster, raw)
            };
            let id = format!("{site}-{letter}{:0w$}", local + 1, w = width(size));
            out.push(AssetInfo {
                id,
                site: site.clone(),
                group,
                criticality: if group == PumpGroup::Booster { 4 } else { 3 },
                index: s * pumps_per_site + slot,
                site_index: s,
                slot: local,
                group_size: size,
            });
        }
    }
    out
}

fn num(x: f64) -> String {
    // `{:?}` keeps a decimal point (`-30.0`), so every bound reads as a float.
    format!("{x:?}")
}

/// The fleet registry in the TOML form of DESIGN.md 4.2.
pub(crate) fn registry_toml(assets: &[AssetInfo]) -> String {
    let mut s = String::new();
    s.push_str(
        "# telltale demo fleet: a water utility's pumping stations (invented scenario).\n\
         # Generated by telltale-datasets; ranges are the instruments' measuring ranges.\n\n",
    );
    let mut groups: Vec<PumpGroup> = assets.iter().map(|a| a.group).collect();
    groups.sort();
    groups.dedup();
    for g in groups {
        let _ = writeln!(s, "[group.{}]\nsensors = [", g.id());
        for si in sensor_infos(g) {
            let _ = write!(
                s,
                "  {{ id = \"{}\", unit = \"{}\", role = \"{}\", range = [{}, {}]",
                si.id,
                si.unit,
                si.role.as_str(),
                num(si.range.0),
                num(si.range.1)
            );
            if let Some((lo, hi)) = si.band {
                let _ = write!(s, ", band = [{}, {}]", num(lo), num(hi));
            }
            s.push_str(" },\n");
        }
        s.push_str("]\n\n");
    }
    let mut sorted: Vec<&AssetInfo> = assets.iter().collect();
    sorted.sort_by(|a, b| a.id.cmp(&b.id));
    for a in sorted {
        let _ = writeln!(
            s,
            "[[asset]]\nid = \"{}\"\ngroup = \"{}\"\nsite = \"{}\"\ncriticality = {}\n",
            a.id,
            a.group.id(),
            a.site,
            a.criticality
        );
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sensors_are_sorted_by_id() {
        assert!(SENSORS.windows(2).all(|w| w[0].id < w[1].id));
        assert_eq!(SENSORS[sid::WINDING].id, "winding_temp");
        assert_eq!(SENSORS[sid::SPEED].id, "speed");
    }

    #[test]
    fn station_split_and_ids() {
        let a = assets(3, 10);
        assert_eq!(a.len(), 30);
        assert_eq!(a.iter().filter(|x| x.group == PumpGroup::RawWater).count(), 12);
        assert_eq!(a[0].id, "hillcrest-b1");
        assert_eq!(a[6].id, "hillcrest-r1");
        let mut ids: Vec<_> = a.iter().map(|x| x.id.clone()).collect();
        ids.sort();
        ids.dedup();
        assert_eq!(ids.len(), 30);
        let wide = assets(1, 17);
        assert_eq!(wide[0].id, "hillcrest-b01");
        assert_eq!(wide[9].id, "hillcrest-b10");
        assert_eq!(site_name(20), "station-021");
    }
}

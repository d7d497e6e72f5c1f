//! The optional fleet registry (DESIGN.md 4.2): groups of peer assets with
//! their sensors' roles, ranges and bands, and each asset's group, site and
//! criticality.
//!
//! ```toml
//! [group.booster]
//! sensors = [
//!   { id = "speed",      unit = "rpm",  role = "context",   range = [0, 3000] },
//!   { id = "bearing_de", unit = "degC", role = "condition", range = [-20, 150], band = [20, 80] },
//! ]
//!
//! [[asset]]
//! id = "north-b1"
//! group = "booster"
//! site = "north"
//! criticality = 3
//! ```
//!
//! Without a registry every asset is its own group and every sensor a
//! condition sensor with no range; [`resolve`] applies these defaults and
//! says, once per sensor, where the data holds something the registry does
//! not describe.

use crate::error::{Error, Result};
use crate::io::Inventory;
use serde::Deserialize;
use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// What a sensor tells about its asset.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum Role {
    /// Sets the operating point: load, speed, setpoint, ambient.
    Context,
    /// Reflects health (the default).
    #[default]
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

/// One sensor of a group.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorSpec {
    /// Sensor id, unique within the group.
    pub id: String,
    /// Engineering unit, free text.
    pub unit: Option<String>,
    /// Context or condition.
    pub role: Role,
    /// Measuring range `[lo, hi]`, bounds included; outside is `sensor_fault/out_of_range`.
    pub range: Option<(f64, f64)>,
    /// Normal operating band `[lo, hi]` for time-in-band figures.
    pub band: Option<(f64, f64)>,
}

impl SensorSpec {
    /// A condition sensor with no unit, range or band (the default for unknown sensors).
    pub fn default_for(id: &str) -> Self {
        SensorSpec { id: id.to_owned(), unit: None, role: Role::Condition, range: None, band: None }
    }
}

/// Assets expected to behave alike (peers), with their sensors.
#[derive(Debug, Clone, PartialEq)]
pub struct Group {
    /// Group id.
    pub id: String,
    /// Sensors in file order.
    pub sensors: Vec<SensorSpec>,
}

/// One registered asset.
#[derive(Debug, Clone, PartialEq)]
pub struct AssetSpec {
    /// Asset id.
    pub id: String,
    /// Group id.
    pub group: String,
    /// Site: assets sharing supply, weather, environment.
    pub site: Option<String>,
    /// 1 (low) .. 5 (high); default 3.
    pub criticality: u8,
}

/// A validated fleet registry.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Registry {
    /// Groups by id.
    pub groups: BTreeMap<String, Group>,
    /// Assets in file order.
    pub assets: Vec<AssetSpec>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRegistry {
    #[serde(default)]
    group: BTreeMap<String, Spanned<RawGroup>>,
    #[serde(default)]
    asset: Vec<Spanned<RawAsset>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGroup {
    #[serde(default)]
    sensors: Vec<Spanned<RawSensor>>,
}

#[derive(Deserialize)]
#[serde(untagged)]
enum Num {
    I(i64),
    F(f64),
}

impl Num {
    fn get(&self) -> f64 {
        match *self {
            Num::I(i) => i as f64,
            Num::F(f) => f,
        }
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSensor {
    id: String,
    unit: Option<String>,
    role: Option<Spanned<String>>,
    range: Option<Spanned<Vec<Num>>>,
    band: Option<Spanned<Vec<Num>>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAsset {
    id: String,
    group: Spanned<String>,
    site: Option<String>,
    criticality: Option<Spanned<i64>>,
}

fn line_of(text: &str, offset: usize) -> usize {
    text.as_bytes()[..offset.min(text.len())].iter().filter(|&&b| b == b'\n').count() + 1
}

impl Registry {
    /// Read and validate a registry file.
    ///
    /// # Errors
    /// [`Error::Io`] if unreadable, [`Error::BadInput`] listing every problem with its line.
    pub fn load(path: impl AsRef<Path>) -> Result<Self> {
        let path = path.as_ref();
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::from_toml_str(&text, path)
    }

    /// Parse and validate registry text; `path` only names the source in errors.
    ///
    /// # Errors
    /// [`Error::BadInput`]: TOML syntax errors, unknown keys, unknown groups,
    /// duplicate asset or sensor ids, `range`/`band` with lo > hi, criticality
    /// outside 1..5, unknown roles. Each problem names the group, asset or
    /// sensor and the line.
    pub fn from_toml_str(text: &str, path: impl Into<PathBuf>) -> Result<Self> {
        let path = path.into();
        let raw: RawRegistry = toml::from_str(text).map_err(|e| {
            let line = e.span().map(|s| line_of(text, s.start));
            let msg = e.message().trim_end_matches('.').to_owned();
            Error::bad_input(
                &path,
                match line {
                    Some(l) => {
                        format!(
                            "line {l}: {msg}; see 'Fleet registry' in the README for the format"
                        )
                    }
                    None => format!("{msg}; see 'Fleet registry' in the README for the format"),
                },
            )
        })?;
        let mut problems: Vec<String> = Vec::new();
        let mut reg = Registry::default();
        let pair = |v: &Spanned<Vec<Num>>,
                    what: &str,
                    sensor: &str,
                    group: &str,
                    problems: &mut Vec<String>| {
            let line = line_of(text, v.span().start);
            let vals: Vec<f64> = v.get_ref().iter().map(Num::get).collect();
            match vals.as_slice() {
                [lo, hi] if lo.is_finite() && hi.is_finite() && lo <= hi => Some((*lo, *hi)),
                [lo, hi] if lo.is_finite() && hi.is_finite() => {
                    problems.push(format!(
                        "line {line}: group {group:?}, sensor {sensor:?}: {what} = [{lo}, {hi}] has \
                         lo > hi; write it as [{hi}, {lo}]"
                    ));
                    None
                }
                _ => {
                    problems.push(format!(
                        "line {line}: group {group:?}, sensor {sensor:?}: {what} must be two finite \
                         numbers [lo, hi], got {} values",
                        vals.len()
                    ));
                    None
                }
            }
        };
        for (gid, g) in &raw.group {
            let mut seen = BTreeSet::new();
            let mut sensors = Vec::new();
            for s in &g.get_ref().sensors {
                let line = line_of(text, s.span().start);
                let s = s.get_ref();
                if !seen.insert(s.id.clone()) {
                    problems.push(format!(
                        "line {line}: group {gid:?}: sensor id {:?} appears twice; sensor ids are \
                         unique within a group",
                        s.id
                    ));
                    continue;
                }
                let role = match &s.role {
                    None => Role::Condition,
                    Some(r) => match r.get_ref().as_str() {
                        "context" => Role::Context,
                        "condition" => Role::Condition,
                        other => {
                            problems.push(format!(
                                "line {}: group {gid:?}, sensor {:?}: unknown role {other:?}; use \
                                 \"context\" or \"condition\"",
                                line_of(text, r.span().start),
                                s.id
                            ));
                            Role::Condition
                        }
                    },
                };
                let range =
                    s.range.as_ref().and_then(|v| pair(v, "range", &s.id, gid, &mut problems));
                let band = s.band.as_ref().and_then(|v| pair(v, "band", &s.id, gid, &mut problems));
                sensors.push(SensorSpec {
                    id: s.id.clone(),
                    unit: s.unit.clone(),
                    role,
                    range,
                    band,
                });
            }
            reg.groups.insert(gid.clone(), Group { id: gid.clone(), sensors });
        }
        let mut ids: BTreeMap<String, usize> = BTreeMap::new();
        for a in &raw.asset {
            let line = line_of(text, a.span().start);
            let a = a.get_ref();
            if let Some(first) = ids.insert(a.id.clone(), line) {
                problems.push(format!(
                    "line {line}: asset {:?} is registered twice (first at line {first}); asset ids \
                     are unique",
                    a.id
                ));
                continue;
            }
            let group = a.group.get_ref();
            if !reg.groups.contains_key(group) {
                let known: Vec<&str> = reg.groups.keys().map(String::as_str).collect();
                problems.push(format!(
                    "line {}: asset {:?}: unknown group {group:?}; define [group.{group}] or use one \
                     of: {}",
                    line_of(text, a.group.span().start),
                    a.id,
                    if known.is_empty() { "(no groups defined)".to_owned() } else { known.join(", ") }
                ));
            }
            let criticality = match &a.criticality {
                None => 3,
                Some(c) => match u8::try_from(*c.get_ref()) {
                    Ok(v @ 1..=5) => v,
                    _ => {
                        problems.push(format!(
                            "line {}: asset {:?}: criticality {} is outside 1..5 (1 low, 5 high)",
                            line_of(text, c.span().start),
                            a.id,
                            c.get_ref()
                        ));
                        3
                    }
                },
            };
            reg.assets.push(AssetSpec {
                id: a.id.clone(),
                group: group.clone(),
                site: a.site.clone(),
                criticality,
            });
        }
        if !problems.is_empty() {
            return Err(Error::bad_input(&path, problems.join("\n")));
        }
        Ok(reg)
    }

    /// The registered asset `id`.
    pub fn asset(&self, id: &str) -> Option<&AssetSpec> {
        self.assets.iter().find(|a| a.id == id)
    }

    /// The registry as TOML in the DESIGN.md 4.2 layout; [`Registry::from_toml_str`] reads it back.
    pub fn to_toml_string(&self) -> String {
        fn q(s: &str) -> String {
            toml::Value::String(s.to_owned()).to_string()
        }
        fn num(x: f64) -> String {
            if x.fract() == 0.0 && x.abs() < 1e15 {
                format!("{}", x as i64)
            } else {
                format!("{x:?}")
            }
        }
        let mut out = String::new();
        for g in self.groups.values() {
            let _ = writeln!(out, "[group.{}]", q(&g.id));
            out.push_str("sensors = [\n");
            for s in &g.sensors {
                let _ = write!(out, "  {{ id = {}", q(&s.id));
                if let Some(u) = &s.unit {
                    let _ = write!(out, ", unit = {}", q(u));
                }
                let _ = write!(out, ", role = {}", q(s.role.as_str()));
                if let Some((lo, hi)) = s.range {
                    let _ = write!(out, ", range = [{}, {}]", num(lo), num(hi));
                }
                if let Some((lo, hi)) = s.band {
                    let _ = write!(out, ", band = [{}, {}]", num(lo), num(hi));
                }
                out.push_str(" },\n");
            }
            out.push_str("]\n\n");
        }
        for a in &self.assets {
            let _ = writeln!(out, "[[asset]]\nid = {}\ngroup = {}", q(&a.id), q(&a.group));
            if let Some(s) = &a.site {
                let _ = writeln!(out, "site = {}", q(s));
            }
            let _ = writeln!(out, "criticality = {}\n", a.criticality);
        }
        out
    }
}

/// One asset with the sensor specs that apply to it.
#[derive(Debug, Clone, PartialEq)]
pub struct ResolvedAsset {
    /// Asset id.
    pub asset: String,
    /// Group id (the asset id itself when unregistered).
    pub group: String,
    /// Site, if registered.
    pub site: Option<String>,
    /// 1..5 (3 when unregistered).
    pub criticality: u8,
    /// Sensors with data plus registered sensors of the group, sorted by id.
    pub sensors: Vec<ResolvedSensor>,
}

/// A sensor spec and whether the history has readings for it.
#[derive(Debug, Clone, PartialEq)]
pub struct ResolvedSensor {
    /// The spec (registered, or the default).
    pub spec: SensorSpec,
    /// Whether the history has rows for this asset and sensor.
    pub has_data: bool,
    /// Whether the registry describes it.
    pub registered: bool,
}

/// The result of [`resolve`].
#[derive(Debug, Clone, PartialEq)]
pub struct Resolution {
    /// Assets of the history and of the registry, sorted by id.
    pub assets: Vec<ResolvedAsset>,
    /// One line per unregistered asset, per (group, sensor) seen in data but
    /// not registered, and per registered asset without data.
    pub warnings: Vec<String>,
}

/// Combine the registry (if any) with what the history holds.
///
/// Without a registry every asset is its own group and every sensor a
/// condition sensor with no range, and there are no warnings.
pub fn resolve(registry: Option<&Registry>, inventory: &Inventory) -> Resolution {
    let mut warnings = Vec::new();
    let mut out: Vec<ResolvedAsset> = Vec::new();
    let mut warned: BTreeSet<(String, String)> = BTreeSet::new();
    let mut unknown_sensors: BTreeMap<(String, String), Vec<String>> = BTreeMap::new();
    for a in &inventory.assets {
        let seen: Vec<&str> = a.sensors.iter().map(|s| s.sensor.as_str()).collect();
        let (spec, group) = match registry {
            None => (None, None),
            Some(r) => match r.asset(&a.asset) {
                Some(s) => (Some(s), r.groups.get(&s.group)),
                None => {
                    warnings.push(format!(
                        "asset {:?} has data but is not in the registry; it is its own group, its \
                         sensors are condition sensors with no range",
                        a.asset
                    ));
                    (None, None)
                }
            },
        };
        let mut sensors: Vec<ResolvedSensor> = Vec::new();
        if let Some(g) = group {
            for s in &g.sensors {
                sensors.push(ResolvedSensor {
                    spec: s.clone(),
                    has_data: seen.contains(&s.id.as_str()),
                    registered: true,
                });
            }
        }
        for s in &seen {
            if sensors.iter().any(|r| r.spec.id == *s) {
                continue;
            }
            if let (Some(spec), Some(_)) = (spec, group) {
                if warned.insert((spec.group.clone(), (*s).to_owned())) {
                    unknown_sensors.insert((spec.group.clone(), (*s).to_owned()), Vec::new());
                }
                if let Some(v) = unknown_sensors.get_mut(&(spec.group.clone(), (*s).to_owned())) {
                    v.push(a.asset.clone());
                }
            }
            sensors.push(ResolvedSensor {
                spec: SensorSpec::default_for(s),
                has_data: true,
                registered: false,
            });
        }
        sensors.sort_by(|x, y| x.spec.id.cmp(&y.spec.id));
        out.push(ResolvedAsset {
            asset: a.asset.clone(),
            group: spec.map_or_else(|| a.asset.clone(), |s| s.group.clone()),
            site: spec.and_then(|s| s.site.clone()),
            criticality: spec.map_or(3, |s| s.criticality),
            sensors,
        });
    }
    for ((g, s), assets) in unknown_sensors {
        warnings.push(format!(
            "sensor {s:?} has data (assets: {}) but group {g:?} does not list it; treated as a \
             condition sensor with no range, add it to [group.{g}] to set its role and range",
            assets.join(", ")
        ));
    }
    if let Some(r) = registry {
        for a in &r.assets {
            if inventory.assets.binary_search_by(|x| x.asset.as_str().cmp(&a.id)).is_err() {
                warnings.push(format!("registered asset {:?} has no data in the history", a.id));
                let sensors = r.groups.get(&a.group).map_or_else(Vec::new, |g| {
                    g.sensors
                        .iter()
                        .map(|s| ResolvedSensor {
                            spec: s.clone(),
                            has_data: false,
                            registered: true,
                        })
                        .collect()
                });
                out.push(ResolvedAsset {
                    asset: a.id.clone(),
                    group: a.group.clone(),
                    site: a.site.clone(),
                    criticality: a.criticality,
                    sensors,
                });
            }
        }
    }
    out.sort_by(|x, y| x.asset.cmp(&y.asset));
    Resolution { assets: out, warnings }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::{AssetInventory, SensorInventory};

    // The example of DESIGN.md 4.2, verbatim.
    const DESIGN: &str = r#"[group.booster]                 # assets expected to behave alike (peers)
sensors = [
  { id = "speed",      unit = "rpm",  role = "context",   range = [0, 3000] },
  { id = "flow",       unit = "m3/h", role = "context",   range = [0, 500] },
  { id = "bearing_de", unit = "degC", role = "condition", range = [-20, 150], band = [20, 80] },
]

[[asset]]
id = "north-b1"
group = "booster"
site = "north"                  # assets sharing supply/weather/environment
criticality = 3                 # 1 (low) .. 5 (high); default 3
"#;

    fn err(text: &str) -> String {
        let e = Registry::from_toml_str(text, "fleet.toml").unwrap_err();
        assert!(e.is_bad_input());
        e.to_string()
    }

    #[test]
    fn design_example_parses() {
        let r = Registry::from_toml_str(DESIGN, "fleet.toml").unwrap();
        let g = &r.groups["booster"];
        assert_eq!(g.sensors.len(), 3);
        assert_eq!(g.sensors[0].role, Role::Context);
        assert_eq!(g.sensors[2].range, Some((-20.0, 150.0)));
        assert_eq!(g.sensors[2].band, Some((20.0, 80.0)));
        assert_eq!(r.assets[0].site.as_deref(), Some("north"));
        assert_eq!(r.assets[0].criticality, 3);
    }

    #[test]
    fn to_toml_round_trips() {
        let r = Registry::from_toml_str(DESIGN, "fleet.toml").unwrap();
        let text = r.to_toml_string();
        assert_eq!(Registry::from_toml_str(&text, "out.toml").unwrap(), r, "{text}");
    }

    #[test]
    fn defaults_role_and_criticality() {
        let r = Registry::from_toml_str(
            "[group.raw]\nsensors = [{ id = \"flow\" }]\n[[asset]]\nid = \"a\"\ngroup = \"raw\"\n",
            "f.toml",
        )
        .unwrap();
        assert_eq!(r.groups["raw"].sensors[0].role, Role::Condition);
        assert_eq!(r.assets[0].criticality, 3);
    }

    #[test]
    fn unknown_group_names_asset_and_line() {
        let m = err(
            "[group.booster]\nsensors = []\n\n[[asset]]\nid = \"north-b1\"\ngroup = \"boster\"\n",
        );
        assert!(m.contains("line 6") && m.contains("north-b1") && m.contains("boster"), "{m}");
        assert!(m.contains("booster"), "lists known groups: {m}");
    }

    #[test]
    fn duplicate_asset_names_both_lines() {
        let m = err(
            "[group.g]\nsensors = []\n[[asset]]\nid = \"a\"\ngroup = \"g\"\n[[asset]]\nid = \"a\"\ngroup = \"g\"\n",
        );
        assert!(m.contains("line 6") && m.contains("first at line 3"), "{m}");
    }

    #[test]
    fn duplicate_sensor_in_group() {
        let m = err("[group.g]\nsensors = [\n { id = \"t\" },\n { id = \"t\" },\n]\n");
        assert!(m.contains("line 4") && m.contains("\"t\"") && m.contains("group \"g\""), "{m}");
    }

    #[test]
    fn range_lo_above_hi() {
        let m = err("[group.g]\nsensors = [\n { id = \"t\", range = [150, -20] },\n]\n");
        assert!(m.contains("line 3") && m.contains("lo > hi") && m.contains("[-20, 150]"), "{m}");
    }

    #[test]
    fn criticality_out_of_range() {
        let m =
            err("[group.g]\nsensors = []\n[[asset]]\nid = \"a\"\ngroup = \"g\"\ncriticality = 7\n");
        assert!(m.contains("line 6") && m.contains("1..5"), "{m}");
    }

    #[test]
    fn unknown_key_and_role() {
        let m = err("[group.g]\nsensors = [{ id = \"t\", rnage = [0, 1] }]\n");
        assert!(m.contains("line 2") && m.contains("rnage"), "{m}");
        let m = err("[group.g]\nsensors = [{ id = \"t\", role = \"load\" }]\n");
        assert!(m.contains("line 2") && m.contains("context"), "{m}");
        let m = err("[[asset]]\nid = \"a\"\ngroup = \"g\"\ncolour = 1\n");
        assert!(m.contains("line 4") && m.contains("colour"), "{m}");
    }

    #[test]
    fn syntax_error_has_line() {
        let m = err("[group.g]\nsensors = [\n { id = \"t\" \n");
        assert!(m.contains("line "), "{m}");
    }

    fn inv(assets: &[(&str, &[&str])]) -> Inventory {
        Inventory {
            assets: assets
                .iter()
                .map(|(a, ss)| AssetInventory {
                    asset: (*a).to_owned(),
                    sensors: ss
                        .iter()
                        .map(|s| SensorInventory {
                            sensor: (*s).to_owned(),
                            rows: 1,
                            first_ms: 0,
                            last_ms: 0,
                        })
                        .collect(),
                })
                .collect(),
            rows: 0,
            first_ms: None,
            last_ms: None,
            files: 1,
            bad_files: vec![],
        }
    }

    #[test]
    fn without_registry_every_asset_is_its_own_group() {
        let r = resolve(None, &inv(&[("a", &["x", "y"]), ("b", &["x"])]));
        assert!(r.warnings.is_empty());
        assert_eq!(r.assets[0].group, "a");
        assert!(
            r.assets[0]
                .sensors
                .iter()
                .all(|s| s.spec.role == Role::Condition && s.spec.range.is_none())
        );
    }

    #[test]
    fn unregistered_sensor_warns_once_per_group() {
        let reg = Registry::from_toml_str(
            &(DESIGN.to_owned() + "[[asset]]\nid = \"north-b2\"\ngroup = \"booster\"\n"),
            "f.toml",
        )
        .unwrap();
        let r = resolve(
            Some(&reg),
            &inv(&[("north-b1", &["flow", "vib"]), ("north-b2", &["vib"]), ("x9", &["flow"])]),
        );
        let vib: Vec<&String> = r.warnings.iter().filter(|w| w.contains("\"vib\"")).collect();
        assert_eq!(vib.len(), 1, "{:?}", r.warnings);
        assert!(vib[0].contains("north-b1, north-b2"));
        assert_eq!(r.warnings.iter().filter(|w| w.contains("x9")).count(), 1);
        let b1 = &r.assets[0];
        assert_eq!(b1.sensors.len(), 4); // 3 registered + vib
        let speed = b1.sensors.iter().find(|s| s.spec.id == "speed").unwrap();
        assert!(!speed.has_data && speed.registered);
    }
}

//! The baseline store: a directory of versioned, human-readable JSON files,
//! one per asset, plus a manifest.
//!
//! ```text
//! STORE/
//!   store.json                 manifest: format version, telltale version, when
//!                              written, and per asset its file, fit span and history
//!   baselines/
//!     north-b1.json            one StoredBaseline per asset (pretty JSON)
//!     plant%2Fpump%201.json    ids outside [A-Za-z0-9._-] are percent-encoded
//! ```
//!
//! Every file is written atomically: the bytes go to a temporary file in the
//! same directory, which is flushed to disk (`fsync`) and then renamed over
//! the target, and the directory itself is synced. A reader therefore sees
//! either the old file or the new one, never half of one; a crash between
//! writing a baseline and updating the manifest leaves the baseline in place
//! (the baseline files, not the manifest, are what [`Store::list`] reports).
//!
//! Because each asset has its own file, re-fitting one asset rewrites that
//! file and the manifest entry of that asset only.
//!
//! On a case-insensitive file system, two asset ids that differ only in case
//! share one file; keep asset ids case-distinct there.

use crate::error::{Error, Result};
use crate::registry::Role;
use serde::{Deserialize, Serialize};
use std::io::Write;
use std::path::{Path, PathBuf};
use telltale_models::baseline::{AssetBaseline, BASELINE_VERSION};
use telltale_models::verdict::Calibration;

/// Format version of [`StoredBaseline`] and [`Manifest`]; bumped when their
/// layout changes. Files of another version are refused with a message to re-fit.
pub const STORE_FORMAT_VERSION: u32 = 1;

/// Name of the manifest file in the store directory.
pub const MANIFEST_FILE: &str = "store.json";

/// Name of the folder holding one baseline file per asset.
pub const BASELINES_DIR: &str = "baselines";

/// The telltale version written into the store.
pub const TELLTALE_VERSION: &str = env!("CARGO_PKG_VERSION");

/// A sensor's role, spelled as in the fleet registry (`context` / `condition`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum StoredRole {
    /// Sets the operating point.
    Context,
    /// Reflects health.
    Condition,
}

impl From<Role> for StoredRole {
    fn from(r: Role) -> Self {
        match r {
            Role::Context => StoredRole::Context,
            Role::Condition => StoredRole::Condition,
        }
    }
}

/// One sensor of a stored baseline, in the order of the baseline's sensor
/// positions (`baseline.sensors[i]` describes `sensors[i]`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StoredSensor {
    /// Sensor id.
    pub id: String,
    /// Context or condition.
    pub role: StoredRole,
    /// Engineering unit, if registered.
    pub unit: Option<String>,
    /// Measuring range `[lo, hi]`, sensor units.
    pub range: Option<[f64; 2]>,
    /// Normal operating band `[lo, hi]`, sensor units.
    pub band: Option<[f64; 2]>,
}

/// The artifact of one asset's fit: who the asset is, what its sensors are,
/// the span the baseline was learnt from, and the fitted model itself.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StoredBaseline {
    /// [`STORE_FORMAT_VERSION`] when written.
    pub format_version: u32,
    /// Asset id.
    pub asset: String,
    /// Group id (the asset id itself when unregistered).
    pub group: String,
    /// Site, if registered.
    pub site: Option<String>,
    /// 1 (low) .. 5 (high).
    pub criticality: u8,
    /// Sensors in baseline order.
    pub sensors: Vec<StoredSensor>,
    /// Requested start of the fit span, RFC 3339 (`None`: from the start of the history).
    pub fit_from: Option<String>,
    /// Requested end (exclusive) of the fit span, RFC 3339.
    pub fit_until: String,
    /// The fitted baseline (its `fit_start_ms`/`fit_end_ms` give the grid actually covered).
    pub baseline: AssetBaseline,
    /// The scan's calibration on the held-out end of the fit span (`None` in
    /// stores written before it existed: re-run `telltale fit`).
    #[serde(default)]
    pub calibration: Option<Calibration>,
}

/// One asset's line in the [`Manifest`].
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ManifestEntry {
    /// Asset id.
    pub asset: String,
    /// The baseline file, relative to the store directory, `/`-separated.
    pub file: String,
    /// The history the baseline was fitted on, as given on the command line.
    pub history: String,
    /// Requested start of the fit span, RFC 3339.
    pub fit_from: Option<String>,
    /// Requested end (exclusive) of the fit span, RFC 3339.
    pub fit_until: String,
    /// When the baseline was written, RFC 3339.
    pub written: String,
    /// telltale version that wrote it.
    pub telltale_version: String,
}

/// `STORE/store.json`: what is in the store and where it came from.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Manifest {
    /// [`STORE_FORMAT_VERSION`] when written.
    pub format_version: u32,
    /// telltale version of the last update.
    pub telltale_version: String,
    /// When the manifest was last written, RFC 3339.
    pub written: String,
    /// One entry per asset, sorted by asset id.
    pub assets: Vec<ManifestEntry>,
}

impl Manifest {
    fn empty() -> Self {
        Manifest {
            format_version: STORE_FORMAT_VERSION,
            telltale_version: TELLTALE_VERSION.to_owned(),
            written: String::new(),
            assets: Vec::new(),
        }
    }

    /// The entry of `asset`.
    pub fn entry(&self, asset: &str) -> Option<&ManifestEntry> {
        self.assets.iter().find(|e| e.asset == asset)
    }
}

/// A baseline store directory; see the [module docs](self).
#[derive(Debug, Clone)]
pub struct Store {
    dir: PathBuf,
}

/// The file name (without folder) of `asset`'s baseline: bytes in
/// `[A-Za-z0-9._-]` kept, every other byte of the UTF-8 id written as `%XX`
/// (upper-case hex), then `.json`. The mapping is one-to-one, so
/// [`asset_from_file_name`] inverts it, and no id can name a path outside
/// the folder (`/`, `\` and `%` are always encoded; `.` and `..` become
/// `..json` and `...json`).
pub fn asset_file_name(asset: &str) -> String {
    let mut out = String::with_capacity(asset.len() + 5);
    for &b in asset.as_bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'.' | b'_' | b'-') {
            out.push(char::from(b));
        } else {
            out.push('%');
            out.push_str(&format!("{b:02X}"));
        }
    }
    out.push_str(".json");
    out
}

/// The asset id of a baseline file name made by [`asset_file_name`]; `None`
/// for any other name.
pub fn asset_from_file_name(name: &str) -> Option<String> {
    let stem = name.strip_suffix(".json")?;
    let bytes = stem.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        let b = bytes[i];
        if b == b'%' {
            let hex = stem.get(i + 1..i + 3)?;
            if !hex.bytes().all(|c| c.is_ascii_digit() || (b'A'..=b'F').contains(&c)) {
                return None;
            }
            out.push(u8::from_str_radix(hex, 16).ok()?);
            i += 3;
        } else if b.is_ascii_alphanumeric() || matches!(b, b'.' | b'_' | b'-') {
            out.push(b);
            i += 1;
        } else {
            return None;
        }
    }
    let id = String::from_utf8(out).ok()?;
    // only canonical names: an id that would be encoded differently is not ours
    (asset_file_name(&id) == name).then_some(id)
}

/// Writes `bytes` to `path` atomically: temporary file in the same folder,
/// fsync, rename over `path`, fsync of the folder.
pub(crate) fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = path.parent().unwrap_or_else(|| Path::new("."));
    let mut tmp = tempfile::Builder::new()
        .prefix(".tmp-")
        .suffix(".partial")
        .tempfile_in(dir)
        .map_err(|e| Error::io(dir, e))?;
    tmp.write_all(bytes).map_err(|e| Error::io(tmp.path(), e))?;
    tmp.as_file().sync_all().map_err(|e| Error::io(tmp.path(), e))?;
    tmp.persist(path).map_err(|e| Error::io(path, e.error))?;
    sync_dir(dir)
}

#[cfg(unix)]
fn sync_dir(dir: &Path) -> Result<()> {
    // the rename is durable only once the directory entry is on disk
    std::fs::File::open(dir).and_then(|f| f.sync_all()).map_err(|e| Error::io(dir, e))
}

#[cfg(not(unix))]
fn sync_dir(_dir: &Path) -> Result<()> {
    Ok(())
}

fn to_pretty_json<T: Serialize>(path: &Path, value: &T) -> Result<Vec<u8>> {
    let mut bytes = serde_json::to_vec_pretty(value).map_err(|e| Error::io(path, e.into()))?;
    bytes.push(b'\n');
    Ok(bytes)
}

impl Store {
    /// Opens the store at `dir`, creating it (and its `baselines/` folder) if missing.
    ///
    /// # Errors
    /// [`Error::Io`] when the folders cannot be created (for instance `dir`
    /// is an existing file).
    pub fn open(dir: impl AsRef<Path>) -> Result<Self> {
        let dir = dir.as_ref().to_path_buf();
        if dir.is_file() {
            return Err(Error::bad_input(
                &dir,
                "is a file, not a directory; point --store at a directory (created if missing)",
            ));
        }
        let baselines = dir.join(BASELINES_DIR);
        std::fs::create_dir_all(&baselines).map_err(|e| Error::io(&baselines, e))?;
        Ok(Store { dir })
    }

    /// The store directory.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// Where `asset`'s baseline lives (whether or not it exists).
    pub fn baseline_path(&self, asset: &str) -> PathBuf {
        self.dir.join(BASELINES_DIR).join(asset_file_name(asset))
    }

    /// Writes one asset's baseline atomically, replacing any earlier one,
    /// and returns its path. The manifest is not touched; see [`Store::record`].
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be written.
    pub fn write_baseline(&self, baseline: &StoredBaseline) -> Result<PathBuf> {
        let path = self.baseline_path(&baseline.asset);
        let bytes = to_pretty_json(&path, baseline)?;
        write_atomic(&path, &bytes)?;
        Ok(path)
    }

    /// Reads `asset`'s baseline.
    ///
    /// # Errors
    /// [`Error::BadInput`] when the store has no baseline for it, the file is
    /// not a stored baseline, it is of another format or baseline version, or
    /// it names another asset; [`Error::Io`] when it cannot be read.
    pub fn read_baseline(&self, asset: &str) -> Result<StoredBaseline> {
        let path = self.baseline_path(asset);
        let text = match std::fs::read_to_string(&path) {
            Ok(t) => t,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                return Err(Error::bad_input(
                    &path,
                    format!(
                        "no baseline for asset {asset:?} in the store; run `telltale fit` over a \
                         span that holds its history"
                    ),
                ));
            }
            Err(e) => return Err(Error::io(&path, e)),
        };
        let version: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
            Error::bad_input(
                &path,
                format!("not a telltale baseline file: {e}; re-run `telltale fit`"),
            )
        })?;
        let found = version.get("format_version").and_then(serde_json::Value::as_u64);
        if found != Some(u64::from(STORE_FORMAT_VERSION)) {
            return Err(Error::bad_input(
                &path,
                format!(
                    "baseline format version {} but this telltale reads {STORE_FORMAT_VERSION}; \
                     re-run `telltale fit` to rewrite the store",
                    found.map_or_else(|| "missing".to_owned(), |v| v.to_string())
                ),
            ));
        }
        let b: StoredBaseline = serde_json::from_value(version).map_err(|e| {
            Error::bad_input(&path, format!("damaged baseline file: {e}; re-run `telltale fit`"))
        })?;
        if b.baseline.version != BASELINE_VERSION {
            return Err(Error::bad_input(
                &path,
                format!(
                    "baseline model version {} but this telltale uses {BASELINE_VERSION}; re-run \
                     `telltale fit`",
                    b.baseline.version
                ),
            ));
        }
        if b.asset != asset {
            return Err(Error::bad_input(
                &path,
                format!(
                    "file holds asset {:?}, expected {asset:?}; re-run `telltale fit`",
                    b.asset
                ),
            ));
        }
        if b.sensors.len() != b.baseline.sensors.len() {
            return Err(Error::bad_input(
                &path,
                format!(
                    "lists {} sensors but the baseline has {}; re-run `telltale fit`",
                    b.sensors.len(),
                    b.baseline.sensors.len()
                ),
            ));
        }
        Ok(b)
    }

    /// Asset ids that have a baseline file, sorted. Files that are not
    /// baseline names (temporary files, anything else) are ignored.
    ///
    /// # Errors
    /// [`Error::Io`] when the folder cannot be listed.
    pub fn list(&self) -> Result<Vec<String>> {
        let dir = self.dir.join(BASELINES_DIR);
        let mut out = Vec::new();
        for entry in std::fs::read_dir(&dir).map_err(|e| Error::io(&dir, e))? {
            let entry = entry.map_err(|e| Error::io(&dir, e))?;
            if !entry.file_type().map_err(|e| Error::io(entry.path(), e))?.is_file() {
                continue;
            }
            if let Some(id) = entry.file_name().to_str().and_then(asset_from_file_name) {
                out.push(id);
            }
        }
        out.sort();
        Ok(out)
    }

    /// The manifest; an empty one when the store has none yet.
    ///
    /// # Errors
    /// [`Error::BadInput`] when `store.json` is damaged or of another format
    /// version; [`Error::Io`] when it cannot be read.
    pub fn manifest(&self) -> Result<Manifest> {
        let path = self.dir.join(MANIFEST_FILE);
        let text = match std::fs::read_to_string(&path) {
            Ok(t) => t,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Manifest::empty()),
            Err(e) => return Err(Error::io(&path, e)),
        };
        let m: Manifest = serde_json::from_str(&text).map_err(|e| {
            Error::bad_input(
                &path,
                format!("damaged store manifest: {e}; delete it and re-run `telltale fit`"),
            )
        })?;
        if m.format_version != STORE_FORMAT_VERSION {
            return Err(Error::bad_input(
                &path,
                format!(
                    "store format version {} but this telltale reads {STORE_FORMAT_VERSION}; fit \
                     into a new --store directory",
                    m.format_version
                ),
            ));
        }
        Ok(m)
    }

    /// Adds or replaces the manifest entries of `entries`' assets (others are
    /// kept), stamps the manifest with `written` and this telltale version,
    /// and writes it atomically.
    ///
    /// # Errors
    /// As [`Store::manifest`], and [`Error::Io`] when it cannot be written.
    pub fn record(&self, entries: Vec<ManifestEntry>, written: &str) -> Result<Manifest> {
        let mut m = self.manifest()?;
        for e in entries {
            match m.assets.iter_mut().find(|x| x.asset == e.asset) {
                Some(x) => *x = e,
                None => m.assets.push(e),
            }
        }
        m.assets.sort_by(|a, b| a.asset.cmp(&b.asset));
        m.format_version = STORE_FORMAT_VERSION;
        m.telltale_version = TELLTALE_VERSION.to_owned();
        m.written = written.to_owned();
        let path = self.dir.join(MANIFEST_FILE);
        write_atomic(&path, &to_pretty_json(&path, &m)?)?;
        Ok(m)
    }

    /// The manifest's `file` value for `asset`: relative, `/`-separated.
    pub fn relative_file(asset: &str) -> String {
        format!("{BASELINES_DIR}/{}", asset_file_name(asset))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn file_names_keep_safe_bytes_and_encode_the_rest() {
        assert_eq!(asset_file_name("north-b1"), "north-b1.json");
        assert_eq!(asset_file_name("a/b c"), "a%2Fb%20c.json");
        assert_eq!(asset_file_name(".."), "...json");
        assert_eq!(asset_file_name("x%41"), "x%2541.json");
        assert_eq!(asset_file_name("pompe-é"), "pompe-%C3%A9.json");
    }

    #[test]
    fn file_names_round_trip_and_reject_foreign_names() {
        for id in ["north-b1", "a/b c", "..", ".", "", "x%41", "pompe-é", "C:\\x", "ÄÖ"] {
            let name = asset_file_name(id);
            assert!(!name.contains('/') && !name.contains('\\'), "{name}");
            assert_eq!(asset_from_file_name(&name).as_deref(), Some(id), "{name}");
        }
        for foreign in [".tmp-abc.partial", "notes.txt", "a b.json", "x%2f.json", "x%4.json"] {
            assert_eq!(asset_from_file_name(foreign), None, "{foreign}");
        }
        // a non-canonical spelling of a safe byte is not ours either
        assert_eq!(asset_from_file_name("%41.json"), None);
    }

    #[test]
    fn manifest_record_merges_by_asset() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(dir.path().join("s")).unwrap();
        assert!(store.manifest().unwrap().assets.is_empty());
        let e = |a: &str, w: &str| ManifestEntry {
            asset: a.into(),
            file: Store::relative_file(a),
            history: "h.parquet".into(),
            fit_from: None,
            fit_until: "2026-05-06T00:00:00Z".into(),
            written: w.into(),
            telltale_version: TELLTALE_VERSION.into(),
        };
        store.record(vec![e("b", "t1"), e("a", "t1")], "t1").unwrap();
        let m = store.record(vec![e("b", "t2")], "t2").unwrap();
        assert_eq!(m, store.manifest().unwrap());
        assert_eq!(m.assets.iter().map(|x| x.asset.as_str()).collect::<Vec<_>>(), ["a", "b"]);
        assert_eq!(m.entry("a").unwrap().written, "t1");
        assert_eq!(m.entry("b").unwrap().written, "t2");
        assert_eq!(m.written, "t2");
        // no temporary file is left behind
        let names: Vec<_> = std::fs::read_dir(store.dir())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        assert!(names.iter().all(|n| !n.starts_with(".tmp-")), "{names:?}");
    }

    #[test]
    fn missing_baseline_is_bad_input_naming_the_asset() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(dir.path()).unwrap();
        let e = store.read_baseline("north-b1").unwrap_err();
        assert!(e.is_bad_input() && e.to_string().contains("north-b1"), "{e}");
    }

    #[test]
    fn wrong_format_version_says_refit() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(dir.path()).unwrap();
        std::fs::write(store.baseline_path("a"), r#"{"format_version": 99}"#).unwrap();
        let e = store.read_baseline("a").unwrap_err();
        assert!(e.is_bad_input() && e.to_string().contains("99"), "{e}");
        assert!(e.to_string().contains("telltale fit"), "{e}");
        std::fs::write(dir.path().join(MANIFEST_FILE), "{").unwrap();
        assert!(store.manifest().unwrap_err().is_bad_input());
    }

    #[test]
    fn store_on_a_file_is_bad_input() {
        let dir = tempfile::tempdir().unwrap();
        let f = dir.path().join("f");
        std::fs::write(&f, "x").unwrap();
        assert!(Store::open(&f).unwrap_err().is_bad_input());
    }
}

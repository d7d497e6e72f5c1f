//! Re-baseline requests and baseline versions (migration 3; see the
//! [parent module](super) docs).

use super::{Db, DbError, lock, now_text, time_text};
use rusqlite::{OptionalExtension, Transaction, params};
use serde::Serialize;

/// One re-baseline asked for by an accepted process change.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct RebaselineRow {
    /// Row number (order of acceptance).
    #[serde(skip)]
    pub seq: i64,
    /// The accepted suspicion.
    pub suspicion_id: String,
    /// Its asset.
    pub asset: String,
    /// Its sensor (`None`: an asset-wide change).
    pub sensor: Option<String>,
    /// Its onset, RFC 3339: the new baseline is learnt from here on.
    pub onset: String,
    /// Onset, epoch ms.
    #[serde(skip)]
    pub onset_ms: i64,
    /// `pending`, `done` or `failed`.
    pub state: String,
    /// Attempts so far.
    pub attempts: i64,
    /// What happened last, in words.
    pub detail: String,
    /// The baseline version it made, once done.
    pub version: Option<i64>,
    /// When asked for, RFC 3339.
    pub created: String,
    /// When last changed.
    pub updated: String,
}

/// One version of an asset's baseline (without the baseline itself).
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct BaselineVersion {
    /// Asset.
    pub asset: String,
    /// 1, 2, ... in order.
    pub version: i64,
    /// When recorded, RFC 3339.
    pub created: String,
    /// `fit` (found in the store, written by `telltale fit`) or `process_change_accepted`.
    pub reason: String,
    /// The accepted suspicion behind a re-baseline.
    pub suspicion_id: Option<String>,
    /// The sensor re-learnt (`None`: the whole asset).
    pub sensor: Option<String>,
    /// Start of the span a re-baseline learnt from, RFC 3339.
    pub from: Option<String>,
    /// End (exclusive) of that span.
    pub to: Option<String>,
    /// What was learnt, in words.
    pub detail: String,
    /// SHA-256 of the baseline file's bytes.
    pub sha256: String,
}

/// A re-baseline's new version, to record.
#[derive(Debug, Clone)]
pub struct NewVersion {
    /// The accepted suspicion.
    pub suspicion_id: String,
    /// The sensor re-learnt (`None`: the whole asset).
    pub sensor: Option<String>,
    /// Span learnt from, epoch ms.
    pub from_ms: i64,
    /// End (exclusive).
    pub to_ms: i64,
    /// What was learnt, in words.
    pub detail: String,
    /// SHA-256 of the new file's bytes.
    pub sha256: String,
    /// The new file's text.
    pub baseline: String,
}

const RB_COLUMNS: &str = "seq, suspicion_id, asset, sensor, onset_ms, state, attempts, detail, \
                          version, created, updated";

fn rb_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<RebaselineRow> {
    let onset_ms: i64 = r.get(4)?;
    Ok(RebaselineRow {
        seq: r.get(0)?,
        suspicion_id: r.get(1)?,
        asset: r.get(2)?,
        sensor: r.get(3)?,
        onset: time_text(onset_ms),
        onset_ms,
        state: r.get(5)?,
        attempts: r.get(6)?,
        detail: r.get(7)?,
        version: r.get(8)?,
        created: r.get(9)?,
        updated: r.get(10)?,
    })
}

const V_COLUMNS: &str =
    "asset, version, created, reason, suspicion_id, sensor, from_ms, to_ms, detail, sha256";

fn v_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<BaselineVersion> {
    let t = |ms: Option<i64>| ms.map(time_text);
    Ok(BaselineVersion {
        asset: r.get(0)?,
        version: r.get(1)?,
        created: r.get(2)?,
        reason: r.get(3)?,
        suspicion_id: r.get(4)?,
        sensor: r.get(5)?,
        from: t(r.get(6)?),
        to: t(r.get(7)?),
        detail: r.get(8)?,
        sha256: r.get(9)?,
    })
}

/// Inside a feedback transaction: a pending re-baseline of suspicion `id`
/// (none if one was already asked for).
pub(super) fn ask_rebaseline(
    tx: &Transaction<'_>,
    id: &str,
    feedback_seq: i64,
    now: &str,
) -> rusqlite::Result<()> {
    tx.execute(
        "INSERT OR IGNORE INTO rebaselines (suspicion_id, feedback_seq, asset, sensor, onset_ms,
             state, detail, created, updated)
         SELECT id, ?2, asset, sensor, onset_ms, 'pending',
             'waiting for the re-baseline worker', ?3, ?3 FROM suspicions WHERE id = ?1",
        params![id, feedback_seq, now],
    )?;
    Ok(())
}

/// The latest version number of `asset` and its hash.
fn latest(tx: &Transaction<'_>, asset: &str) -> rusqlite::Result<Option<(i64, String)>> {
    tx.query_row(
        "SELECT version, sha256 FROM baseline_versions WHERE asset = ?1
         ORDER BY version DESC LIMIT 1",
        [asset],
        |r| Ok((r.get(0)?, r.get(1)?)),
    )
    .optional()
}

impl Db {
    /// Pending re-baselines, oldest first.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn pending_rebaselines(&self) -> Result<Vec<RebaselineRow>, DbError> {
        let c = lock(&self.reader);
        let mut st = c
            .prepare(&format!(
                "SELECT {RB_COLUMNS} FROM rebaselines WHERE state = 'pending' ORDER BY seq"
            ))
            .map_err(|e| self.err(e))?;
        let rows = st.query_map([], rb_row).map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))
    }

    /// The re-baseline asked for by accepting suspicion `id`, if any.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn rebaseline_of(&self, id: &str) -> Result<Option<RebaselineRow>, DbError> {
        lock(&self.reader)
            .query_row(
                &format!("SELECT {RB_COLUMNS} FROM rebaselines WHERE suspicion_id = ?1"),
                [id],
                rb_row,
            )
            .optional()
            .map_err(|e| self.err(e))
    }

    /// Records an attempt that left the re-baseline `state` (`pending`:
    /// try again later; `failed`: give up), with what happened.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn rebaseline_attempt(&self, seq: i64, state: &str, detail: &str) -> Result<(), DbError> {
        lock(&self.writer)
            .execute(
                "UPDATE rebaselines SET state = ?2, attempts = attempts + 1, detail = ?3,
                     updated = ?4 WHERE seq = ?1",
                params![seq, state, detail, now_text()],
            )
            .map_err(|e| self.err(e))?;
        Ok(())
    }

    /// Makes sure the baseline file now in the store (hash `sha256`, text
    /// `text`) is recorded as a version of `asset`: when the latest version
    /// has another hash (or there is none), it is added with reason `fit`.
    /// Returns its version number.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn record_store_version(
        &self,
        asset: &str,
        sha256: &str,
        text: &str,
        detail: &str,
    ) -> Result<i64, DbError> {
        let mut c = lock(&self.writer);
        let tx = c.transaction().map_err(|e| self.err(e))?;
        let last = latest(&tx, asset).map_err(|e| self.err(e))?;
        if let Some((v, h)) = &last
            && h == sha256
        {
            return Ok(*v);
        }
        let v = last.map_or(1, |(v, _)| v + 1);
        tx.execute(
            "INSERT INTO baseline_versions (asset, version, created, reason, detail, sha256,
                 baseline) VALUES (?1, ?2, ?3, 'fit', ?4, ?5, ?6)",
            params![asset, v, now_text(), detail, sha256, text],
        )
        .map_err(|e| self.err(e))?;
        tx.commit().map_err(|e| self.err(e))?;
        Ok(v)
    }

    /// Records a re-baseline's new version and marks re-baseline `seq`
    /// done, in one transaction; returns the version number.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn finish_rebaseline(&self, seq: i64, asset: &str, v: &NewVersion) -> Result<i64, DbError> {
        let mut c = lock(&self.writer);
        let tx = c.transaction().map_err(|e| self.err(e))?;
        let next = latest(&tx, asset).map_err(|e| self.err(e))?.map_or(1, |(v, _)| v + 1);
        let now = now_text();
        tx.execute(
            "INSERT INTO baseline_versions (asset, version, created, reason, suspicion_id, sensor,
                 from_ms, to_ms, detail, sha256, baseline)
             VALUES (?1, ?2, ?3, 'process_change_accepted', ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
            params![
                asset,
                next,
                now,
                v.suspicion_id,
                v.sensor,
                v.from_ms,
                v.to_ms,
                v.detail,
                v.sha256,
                v.baseline
            ],
        )
        .map_err(|e| self.err(e))?;
        tx.execute(
            "UPDATE rebaselines SET state = 'done', attempts = attempts + 1, detail = ?2,
                 version = ?3, updated = ?4 WHERE seq = ?1",
            params![seq, v.detail, next, now],
        )
        .map_err(|e| self.err(e))?;
        tx.commit().map_err(|e| self.err(e))?;
        Ok(next)
    }

    /// The recorded versions of `asset`'s baseline, oldest first.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn baseline_versions(&self, asset: &str) -> Result<Vec<BaselineVersion>, DbError> {
        let c = lock(&self.reader);
        let mut st = c
            .prepare(&format!(
                "SELECT {V_COLUMNS} FROM baseline_versions WHERE asset = ?1 ORDER BY version"
            ))
            .map_err(|e| self.err(e))?;
        let rows = st.query_map([asset], v_row).map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))
    }

    /// The text of version `version` of `asset`'s baseline, if recorded.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn baseline_version_text(
        &self,
        asset: &str,
        version: i64,
    ) -> Result<Option<String>, DbError> {
        lock(&self.reader)
            .query_row(
                "SELECT baseline FROM baseline_versions WHERE asset = ?1 AND version = ?2",
                params![asset, version],
                |r| r.get(0),
            )
            .optional()
            .map_err(|e| self.err(e))
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]
    use super::super::{NewFeedback, WindowRecord};
    use super::*;
    use telltale_pipelines::record::{Class, Mode, Suspicion, suspicion_id};
    use telltale_pipelines::time::from_millis;

    #[test]
    fn an_acceptance_asks_for_one_rebaseline_and_versions_follow_the_store_file() {
        let dir = tempfile::tempdir().unwrap();
        let db = Db::open(dir.path().join("t.db")).unwrap();
        let onset = from_millis(3_600_000);
        let s = Suspicion {
            id: suspicion_id("p1", Some("flow"), Class::ProcessChange, Mode::LevelShift, onset),
            rank: 0,
            asset: "p1".into(),
            sensor: Some("flow".into()),
            class: Class::ProcessChange,
            mode: Mode::LevelShift,
            score: 0.9,
            magnitude: 3.0,
            onset,
            detected: from_millis(7_200_000),
            summary: "s.".into(),
            evidence: vec![],
        };
        let w =
            WindowRecord { asset: "p1".into(), from_ms: 0, to_ms: 1, readings: 1, key_id: None };
        db.record_window(&w, &[(s.clone(), 1.0)], None).unwrap();
        let fb = |note: &str| NewFeedback {
            verdict: "process_change_accepted".into(),
            note: note.into(),
            work_order: None,
            idempotency_key: None,
        };
        db.add_feedback(&s.id, &fb("new duty point"), None).unwrap();
        db.add_feedback(&s.id, &fb("confirmed again by the site"), None).unwrap();
        let pending = db.pending_rebaselines().unwrap();
        assert_eq!(pending.len(), 1, "two acceptances, one re-baseline");
        let row = &pending[0];
        assert_eq!((row.asset.as_str(), row.sensor.as_deref()), ("p1", Some("flow")));
        assert_eq!((row.onset_ms, row.onset.as_str()), (3_600_000, "1970-01-01T01:00:00Z"));
        // the store file becomes version 1 once; the same file again adds nothing
        assert_eq!(db.record_store_version("p1", "aa", "{\"v\":1}", "fit").unwrap(), 1);
        assert_eq!(db.record_store_version("p1", "aa", "{\"v\":1}", "fit").unwrap(), 1);
        db.rebaseline_attempt(row.seq, "pending", "12 h of 24 h").unwrap();
        assert_eq!(db.rebaseline_of(&s.id).unwrap().unwrap().attempts, 1);
        let v = NewVersion {
            suspicion_id: s.id.clone(),
            sensor: Some("flow".into()),
            from_ms: 3_600_000,
            to_ms: 90_000_000,
            detail: "flow re-learnt".into(),
            sha256: "bb".into(),
            baseline: "{\"v\":2}".into(),
        };
        assert_eq!(db.finish_rebaseline(row.seq, "p1", &v).unwrap(), 2);
        assert!(db.pending_rebaselines().unwrap().is_empty());
        let done = db.rebaseline_of(&s.id).unwrap().unwrap();
        assert_eq!((done.state.as_str(), done.version, done.attempts), ("done", Some(2), 2));
        // a file changed outside the service (a new `telltale fit`) is the next version
        assert_eq!(db.record_store_version("p1", "cc", "{\"v\":3}", "fit").unwrap(), 3);
        let vs = db.baseline_versions("p1").unwrap();
        let reasons: Vec<&str> = vs.iter().map(|v| v.reason.as_str()).collect();
        assert_eq!(reasons, ["fit", "process_change_accepted", "fit"]);
        assert_eq!(vs[1].from.as_deref(), Some("1970-01-01T01:00:00Z"));
        assert_eq!(db.baseline_version_text("p1", 2).unwrap().as_deref(), Some("{\"v\":2}"));
        assert_eq!(db.baseline_version_text("p1", 4).unwrap(), None);
    }
}

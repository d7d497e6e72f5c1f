//! The service's embedded SQLite database: API keys, scored windows,
//! suspicions merged by episode, and the feedback audit trail.
//!
//! ```text
//!  schema_version(version)                   one row: the last migration applied
//!  api_keys(id, name, scope, hash, created, revoked)
//!  windows(seq, received, key_id, asset, from_ms, to_ms, readings, suspicion_ids)
//!  suspicions(id, asset, sensor, class, mode, score, magnitude, onset_ms,
//!             detected_ms, priority, record, status, first_scored, last_scored, times_scored)
//!  feedback(seq, suspicion_id, received, key_id, verdict, note, work_order, idempotency_key)
//!  outbox(seq, idempotency_key, suspicion_id, event, body, created, attempts, next_attempt_ms, ...)
//!  rebaselines(seq, suspicion_id, feedback_seq, asset, sensor, onset_ms, state, attempts,
//!              detail, version, created, updated)
//!  baseline_versions(asset, version, created, reason, suspicion_id, sensor, from_ms, to_ms,
//!                    detail, sha256, baseline)
//! ```
//!
//! **Re-baselines.** A `process_change_accepted` feedback adds, in its own
//! transaction, a pending re-baseline of the suspicion's asset and sensor
//! from its onset (one per suspicion; a repeated acceptance adds none). The
//! service's re-baseline worker does it ([`super::rebaseline`]) and keeps
//! every baseline an asset has had in `baseline_versions`: version 1 is the
//! fitted one found in the store, each re-baseline adds the next.
//!
//! **Durability.** The database runs in WAL mode with `synchronous=FULL`:
//! every write is committed in a transaction whose commit syncs the WAL to
//! disk before the call returns, and the service answers only after that.
//! Scored windows arriving together share one transaction and one sync
//! (group commit, see [`Db::record_window`]); each call still returns only
//! after the commit holding its own window has returned. An
//! acknowledged window, suspicion, feedback or key therefore survives a
//! crash of the process and, as far as the disk honours `fsync`, a loss of
//! power.
//!
//! **Episodes.** A suspicion's id is the stable hash of asset, sensor,
//! class, mode and onset (DESIGN.md 4.4). Scoring that finds an id already
//! stored updates its record (score, magnitude, summary, evidence; the
//! earliest `detected` is kept) and counts the re-scoring; it never adds a
//! second row. Feedback and status are kept across re-scoring.
//!
//! **Idempotent feedback.** With an `Idempotency-Key`, a repeat carrying the
//! same key and the same content returns the stored record and writes
//! nothing; the same key with other content is a conflict. Without a key, a
//! feedback equal in (suspicion id, verdict, note, work-order reference) to
//! one already stored for that suspicion is a repeat and returns it.
//!
//! **Keys.** A key is `tt_<id>_<secret>`, with a random 8-byte id and a
//! random 24-byte secret from the operating system; only the SHA-256 of the
//! whole key is stored, so a key is shown once, when created.
//!
//! Migrations are numbered SQL scripts in [`MIGRATIONS`], applied in order
//! in one transaction each; `schema_version` says how far a database is.

use rusqlite::{Connection, OptionalExtension, params};
use serde::Serialize;
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, MutexGuard};
use telltale_pipelines::record::Suspicion;
use telltale_pipelines::time::{format_time, from_millis};

mod versions;
pub use versions::{BaselineVersion, NewVersion, RebaselineRow};

/// The schema migrations, in order; entry `i` takes version `i` to `i + 1`.
pub const MIGRATIONS: &[&str] = &[
    // 1: keys, windows, suspicions, feedback
    "CREATE TABLE api_keys (
        id TEXT PRIMARY KEY,
        name TEXT NOT NULL,
        scope TEXT NOT NULL CHECK (scope IN ('read', 'write')),
        hash TEXT NOT NULL UNIQUE,
        created TEXT NOT NULL,
        revoked TEXT
    );
    CREATE TABLE windows (
        seq INTEGER PRIMARY KEY AUTOINCREMENT,
        received TEXT NOT NULL,
        key_id TEXT,
        asset TEXT NOT NULL,
        from_ms INTEGER NOT NULL,
        to_ms INTEGER NOT NULL,
        readings INTEGER NOT NULL,
        suspicion_ids TEXT NOT NULL
    );
    CREATE TABLE suspicions (
        id TEXT PRIMARY KEY,
        asset TEXT NOT NULL,
        sensor TEXT,
        class TEXT NOT NULL,
        mode TEXT NOT NULL,
        score REAL NOT NULL,
        magnitude REAL NOT NULL,
        onset_ms INTEGER NOT NULL,
        detected_ms INTEGER NOT NULL,
        priority REAL NOT NULL,
        record TEXT NOT NULL,
        status TEXT NOT NULL DEFAULT 'open',
        first_scored TEXT NOT NULL,
        last_scored TEXT NOT NULL,
        times_scored INTEGER NOT NULL DEFAULT 1
    );
    CREATE INDEX suspicions_rank ON suspicions (priority DESC, detected_ms, id);
    CREATE INDEX suspicions_asset ON suspicions (asset);
    CREATE TABLE feedback (
        seq INTEGER PRIMARY KEY AUTOINCREMENT,
        suspicion_id TEXT NOT NULL REFERENCES suspicions (id),
        received TEXT NOT NULL,
        key_id TEXT,
        verdict TEXT NOT NULL
            CHECK (verdict IN ('confirmed', 'dismissed', 'process_change_accepted')),
        note TEXT NOT NULL,
        work_order TEXT,
        idempotency_key TEXT UNIQUE
    );
    CREATE INDEX feedback_suspicion ON feedback (suspicion_id, seq);",
    // 2: the webhook outbox
    "CREATE TABLE outbox (
        seq INTEGER PRIMARY KEY AUTOINCREMENT,
        idempotency_key TEXT NOT NULL UNIQUE,
        suspicion_id TEXT NOT NULL,
        event TEXT NOT NULL CHECK (event IN ('new', 'escalated')),
        body TEXT NOT NULL,
        created TEXT NOT NULL,
        attempts INTEGER NOT NULL DEFAULT 0,
        next_attempt_ms INTEGER NOT NULL,
        last_error TEXT,
        delivered TEXT
    );
    CREATE INDEX outbox_due ON outbox (delivered, next_attempt_ms);",
    // 3: re-baselines asked for by accepted process changes, and baseline versions
    "CREATE TABLE rebaselines (
        seq INTEGER PRIMARY KEY AUTOINCREMENT,
        suspicion_id TEXT NOT NULL UNIQUE REFERENCES suspicions (id),
        feedback_seq INTEGER NOT NULL REFERENCES feedback (seq),
        asset TEXT NOT NULL,
        sensor TEXT,
        onset_ms INTEGER NOT NULL,
        state TEXT NOT NULL CHECK (state IN ('pending', 'done', 'failed')),
        attempts INTEGER NOT NULL DEFAULT 0,
        detail TEXT NOT NULL,
        version INTEGER,
        created TEXT NOT NULL,
        updated TEXT NOT NULL
    );
    CREATE INDEX rebaselines_state ON rebaselines (state, seq);
    CREATE TABLE baseline_versions (
        asset TEXT NOT NULL,
        version INTEGER NOT NULL,
        created TEXT NOT NULL,
        reason TEXT NOT NULL CHECK (reason IN ('fit', 'process_change_accepted')),
        suspicion_id TEXT,
        sensor TEXT,
        from_ms INTEGER,
        to_ms INTEGER,
        detail TEXT NOT NULL,
        sha256 TEXT NOT NULL,
        baseline TEXT NOT NULL,
        PRIMARY KEY (asset, version)
    );",
];

/// Errors of the database.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DbError {
    /// SQLite failed on the named file.
    #[error("{path}: {source}")]
    Sqlite {
        /// The database file.
        path: PathBuf,
        /// The SQLite error.
        #[source]
        source: rusqlite::Error,
    },
    /// The database was written by a newer telltale.
    #[error(
        "{path}: schema version {found} is newer than this telltale knows ({known}); use a newer \
         telltale or another --db"
    )]
    TooNew {
        /// The database file.
        path: PathBuf,
        /// Version in the file.
        found: i64,
        /// Latest version known here.
        known: i64,
    },
    /// An idempotency key reused with other content.
    #[error(
        "idempotency key {0:?} was already used for a different feedback; send a new key for a \
         new feedback"
    )]
    Conflict(String),
    /// The named suspicion is not stored.
    #[error("no suspicion {0:?}")]
    NoSuspicion(String),
    /// The operating system gave no randomness for a key.
    #[error("no randomness for a new key: {0}")]
    Random(String),
}

/// The scope of an API key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Scope {
    /// GET routes.
    Read,
    /// GET and POST routes.
    Write,
}

impl Scope {
    /// `read` / `write`.
    pub fn as_str(self) -> &'static str {
        match self {
            Scope::Read => "read",
            Scope::Write => "write",
        }
    }

    /// Whether a key of this scope may use a route needing `need`.
    pub fn allows(self, need: Scope) -> bool {
        self == Scope::Write || need == Scope::Read
    }

    fn parse(s: &str) -> Scope {
        if s == "write" { Scope::Write } else { Scope::Read }
    }
}

/// One API key as listed (never its secret).
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct KeyInfo {
    /// Public id (part of the key).
    pub id: String,
    /// Name given at creation.
    pub name: String,
    /// Scope.
    pub scope: Scope,
    /// Creation time, RFC 3339.
    pub created: String,
    /// Revocation time, if revoked.
    pub revoked: Option<String>,
}

/// A stored suspicion with its review state.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StoredSuspicion {
    /// The record of DESIGN.md 4.4 as last scored (`rank` is filled in per listing).
    #[serde(flatten)]
    pub record: Suspicion,
    /// `open`, or the latest feedback verdict.
    pub status: String,
    /// Ranking priority (scan's policy: score, class, criticality, size).
    pub priority: f64,
    /// When first and last scored, RFC 3339.
    pub first_scored: String,
    /// When last scored.
    pub last_scored: String,
    /// How many scored windows reported it.
    pub times_scored: i64,
}

/// One feedback row of the audit trail.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FeedbackRecord {
    /// Sequence number (order of receipt).
    pub seq: i64,
    /// The suspicion.
    pub suspicion_id: String,
    /// When received, RFC 3339 (UTC, milliseconds).
    pub received: String,
    /// The key that sent it (`None` in open mode).
    pub key_id: Option<String>,
    /// `confirmed`, `dismissed` or `process_change_accepted`.
    pub verdict: String,
    /// Free text.
    pub note: String,
    /// Work-order reference.
    pub work_order: Option<String>,
    /// Idempotency key, if one was sent.
    pub idempotency_key: Option<String>,
}

/// One webhook delivery waiting in the outbox.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OutboxItem {
    /// Row number.
    pub seq: i64,
    /// `SUSPICION_ID:EVENT`, sent as the `Idempotency-Key` header.
    pub idempotency_key: String,
    /// The JSON body.
    pub body: String,
    /// Attempts so far.
    pub attempts: i64,
}

/// New feedback.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NewFeedback {
    /// `confirmed`, `dismissed` or `process_change_accepted` (checked by the caller).
    pub verdict: String,
    /// Free text.
    pub note: String,
    /// Work-order reference.
    pub work_order: Option<String>,
    /// Idempotency key.
    pub idempotency_key: Option<String>,
}

/// One scored window for the audit table.
#[derive(Debug, Clone)]
pub struct WindowRecord {
    /// Asset.
    pub asset: String,
    /// Reported span, epoch ms.
    pub from_ms: i64,
    /// End of the span (exclusive).
    pub to_ms: i64,
    /// Readings received.
    pub readings: usize,
    /// The key that sent it.
    pub key_id: Option<String>,
}

/// Filters of a suspicion listing.
#[derive(Debug, Clone, Default)]
pub struct Filter {
    /// Status.
    pub status: Option<String>,
    /// Asset.
    pub asset: Option<String>,
    /// Class.
    pub class: Option<String>,
    /// Detected at or after, epoch ms.
    pub from_ms: Option<i64>,
    /// Detected before, epoch ms.
    pub to_ms: Option<i64>,
}

/// Where a page starts: just after the item with this ranking key.
#[derive(Debug, Clone, PartialEq)]
pub struct Cursor {
    /// Priority of the last item.
    pub priority: f64,
    /// Its detection time.
    pub detected_ms: i64,
    /// Its id.
    pub id: String,
    /// Its rank.
    pub rank: u32,
}

impl Cursor {
    /// Opaque text form (hex of `priority-bits.detected.rank.id`).
    pub fn encode(&self) -> String {
        let raw = format!(
            "{:016x}.{}.{}.{}",
            self.priority.to_bits(),
            self.detected_ms,
            self.rank,
            self.id
        );
        raw.bytes().map(|b| format!("{b:02x}")).collect()
    }

    /// Parses [`Cursor::encode`]'s form.
    pub fn decode(s: &str) -> Option<Cursor> {
        if !s.len().is_multiple_of(2) || s.len() > 512 {
            return None;
        }
        let bytes: Option<Vec<u8>> = (0..s.len())
            .step_by(2)
            .map(|i| u8::from_str_radix(s.get(i..i + 2)?, 16).ok())
            .collect();
        let raw = String::from_utf8(bytes?).ok()?;
        let mut parts = raw.splitn(4, '.');
        let priority = f64::from_bits(u64::from_str_radix(parts.next()?, 16).ok()?);
        let detected_ms = parts.next()?.parse().ok()?;
        let rank = parts.next()?.parse().ok()?;
        let id = parts.next()?.to_owned();
        Some(Cursor { priority, detected_ms, id, rank })
    }
}

/// A page of a listing.
#[derive(Debug, Clone)]
pub struct Page {
    /// The items, ranked.
    pub items: Vec<StoredSuspicion>,
    /// Cursor of the next page, if there is one.
    pub next: Option<Cursor>,
}

/// The database; see the [module docs](self).
#[derive(Debug)]
pub struct Db {
    path: PathBuf,
    // one connection writes; the other reads (WAL lets it read while the writer commits)
    writer: Mutex<Connection>,
    reader: Mutex<Connection>,
    // scored windows waiting for the next group commit (see record_window)
    queued: Mutex<Vec<QueuedWindow>>,
}

/// What one queued window gets back from the group commit.
type WindowResult = rusqlite::Result<Vec<StoredSuspicion>>;

/// A scored window waiting for the group commit.
#[derive(Debug)]
struct QueuedWindow {
    w: WindowRecord,
    found: Vec<(Suspicion, f64)>,
    notify_at: Option<f64>,
    // filled in only after the commit that holds the window has returned
    done: Arc<Mutex<Option<WindowResult>>>,
}

/// The same SQLite error again, for each window of a failed group commit.
fn copy_error(e: &rusqlite::Error) -> rusqlite::Error {
    match e {
        rusqlite::Error::SqliteFailure(code, msg) => {
            rusqlite::Error::SqliteFailure(*code, msg.clone())
        }
        other => rusqlite::Error::SqliteFailure(
            rusqlite::ffi::Error::new(rusqlite::ffi::SQLITE_ERROR),
            Some(other.to_string()),
        ),
    }
}

/// Time now, RFC 3339 with milliseconds.
fn now_text() -> String {
    chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
}

/// SHA-256 of `bytes`, lower-case hex.
pub(crate) fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes).iter().map(|b| format!("{b:02x}")).collect()
}

fn hash_key(token: &str) -> String {
    sha256_hex(token.as_bytes())
}

fn random_hex(n: usize) -> Result<String, DbError> {
    use rand::TryRngCore;
    let mut buf = vec![0u8; n];
    rand::rngs::OsRng.try_fill_bytes(&mut buf).map_err(|e| DbError::Random(e.to_string()))?;
    Ok(buf.iter().map(|b| format!("{b:02x}")).collect())
}

fn lock<T>(m: &Mutex<T>) -> MutexGuard<'_, T> {
    // a panic while holding a connection's lock leaves no half transaction
    // behind (SQLite rolls it back), so the connection is still usable; a
    // queued window whose commit panicked is answered with an error
    m.lock().unwrap_or_else(std::sync::PoisonError::into_inner)
}

impl Db {
    /// Opens (creating if missing) the database at `path` and applies any
    /// pending migration.
    ///
    /// # Errors
    /// [`DbError::Sqlite`] when the file cannot be opened or migrated,
    /// [`DbError::TooNew`] for a database from a newer telltale.
    pub fn open(path: impl AsRef<Path>) -> Result<Db, DbError> {
        let path = path.as_ref().to_path_buf();
        let e = |source| DbError::Sqlite { path: path.clone(), source };
        let writer = Connection::open(&path).map_err(e)?;
        writer
            .execute_batch(
                "PRAGMA journal_mode = WAL; PRAGMA synchronous = FULL; PRAGMA foreign_keys = ON;
                 PRAGMA busy_timeout = 5000;",
            )
            .map_err(e)?;
        Self::migrate(&path, &writer)?;
        let reader = Connection::open(&path).map_err(e)?;
        reader.execute_batch("PRAGMA busy_timeout = 5000; PRAGMA query_only = ON;").map_err(e)?;
        Ok(Db {
            path,
            writer: Mutex::new(writer),
            reader: Mutex::new(reader),
            queued: Mutex::new(Vec::new()),
        })
    }

    /// The database file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    fn err(&self, source: rusqlite::Error) -> DbError {
        DbError::Sqlite { path: self.path.clone(), source }
    }

    fn migrate(path: &Path, c: &Connection) -> Result<(), DbError> {
        let e = |source| DbError::Sqlite { path: path.to_path_buf(), source };
        c.execute_batch("CREATE TABLE IF NOT EXISTS schema_version (version INTEGER NOT NULL);")
            .map_err(e)?;
        let current: i64 = c
            .query_row("SELECT version FROM schema_version", [], |r| r.get(0))
            .optional()
            .map_err(e)?
            .unwrap_or(0);
        let known = MIGRATIONS.len() as i64;
        if current > known {
            return Err(DbError::TooNew { path: path.to_path_buf(), found: current, known });
        }
        for (i, sql) in MIGRATIONS.iter().enumerate().skip(current as usize) {
            let v = i as i64 + 1;
            let run = || -> rusqlite::Result<()> {
                c.execute_batch("BEGIN IMMEDIATE")?;
                c.execute_batch(sql)?;
                c.execute("DELETE FROM schema_version", [])?;
                c.execute("INSERT INTO schema_version (version) VALUES (?1)", [v])?;
                c.execute_batch("COMMIT")
            };
            if let Err(err) = run() {
                let _ = c.execute_batch("ROLLBACK");
                return Err(e(err));
            }
        }
        Ok(())
    }

    /// The schema version.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn schema_version(&self) -> Result<i64, DbError> {
        lock(&self.reader)
            .query_row("SELECT version FROM schema_version", [], |r| r.get(0))
            .map_err(|e| self.err(e))
    }

    /// Creates a key; returns it with the whole key text, shown only now.
    ///
    /// # Errors
    /// [`DbError::Sqlite`], [`DbError::Random`].
    pub fn add_key(&self, name: &str, scope: Scope) -> Result<(KeyInfo, String), DbError> {
        let id = random_hex(8)?;
        let token = format!("tt_{id}_{}", random_hex(24)?);
        let info = KeyInfo {
            id: id.clone(),
            name: name.to_owned(),
            scope,
            created: now_text(),
            revoked: None,
        };
        lock(&self.writer)
            .execute(
                "INSERT INTO api_keys (id, name, scope, hash, created) VALUES (?1, ?2, ?3, ?4, ?5)",
                params![info.id, info.name, scope.as_str(), hash_key(&token), info.created],
            )
            .map_err(|e| self.err(e))?;
        Ok((info, token))
    }

    /// Every key, revoked ones included, oldest first.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn list_keys(&self) -> Result<Vec<KeyInfo>, DbError> {
        let c = lock(&self.reader);
        let mut st = c
            .prepare("SELECT id, name, scope, created, revoked FROM api_keys ORDER BY created, id")
            .map_err(|e| self.err(e))?;
        let rows = st
            .query_map([], |r| {
                Ok(KeyInfo {
                    id: r.get(0)?,
                    name: r.get(1)?,
                    scope: Scope::parse(&r.get::<_, String>(2)?),
                    created: r.get(3)?,
                    revoked: r.get(4)?,
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))
    }

    /// Revokes the key with this id; `false` when there is no such active key.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn revoke_key(&self, id: &str) -> Result<bool, DbError> {
        let n = lock(&self.writer)
            .execute(
                "UPDATE api_keys SET revoked = ?2 WHERE id = ?1 AND revoked IS NULL",
                params![id, now_text()],
            )
            .map_err(|e| self.err(e))?;
        Ok(n == 1)
    }

    /// Active keys.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn active_keys(&self) -> Result<usize, DbError> {
        lock(&self.reader)
            .query_row("SELECT COUNT(*) FROM api_keys WHERE revoked IS NULL", [], |r| {
                r.get::<_, i64>(0)
            })
            .map(|n| n as usize)
            .map_err(|e| self.err(e))
    }

    /// The active key whose text is `token`.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn key_for(&self, token: &str) -> Result<Option<KeyInfo>, DbError> {
        lock(&self.reader)
            .query_row(
                "SELECT id, name, scope, created FROM api_keys WHERE hash = ?1 AND revoked IS NULL",
                [hash_key(token)],
                |r| {
                    Ok(KeyInfo {
                        id: r.get(0)?,
                        name: r.get(1)?,
                        scope: Scope::parse(&r.get::<_, String>(2)?),
                        created: r.get(3)?,
                        revoked: None,
                    })
                },
            )
            .optional()
            .map_err(|e| self.err(e))
    }

    /// Stores one scored window and merges its suspicions (with their
    /// ranking priorities) into the episodes; returns the stored suspicions
    /// in the given order, once the transaction holding them is committed.
    /// With `notify_at`, a suspicion first stored with a score at or above
    /// it (`new`), or stored before below it and now at or above it
    /// (`escalated`), gets a webhook row in the outbox, in the same
    /// transaction; the idempotency key `ID:EVENT` keeps it to one row.
    ///
    /// **Group commit.** Concurrent calls share a commit: each call queues
    /// its window, and whichever call holds the writer next writes every
    /// queued window, each under its own savepoint (a failing window is
    /// rolled back alone), then commits them in one transaction, so one
    /// WAL sync covers them all. A call returns only after the commit that
    /// holds its window has returned, so what it returns is on disk.
    ///
    /// # Errors
    /// [`DbError::Sqlite`]; when the shared commit fails, every window in it
    /// gets the error and none is stored.
    pub fn record_window(
        &self,
        w: &WindowRecord,
        found: &[(Suspicion, f64)],
        notify_at: Option<f64>,
    ) -> Result<Vec<StoredSuspicion>, DbError> {
        let done: Arc<Mutex<Option<WindowResult>>> = Arc::new(Mutex::new(None));
        lock(&self.queued).push(QueuedWindow {
            w: w.clone(),
            found: found.to_vec(),
            notify_at,
            done: Arc::clone(&done),
        });
        let mut c = lock(&self.writer);
        // the call that held the writer before may have committed this one
        if let Some(r) = lock(&done).take() {
            return r.map_err(|e| self.err(e));
        }
        let batch = std::mem::take(&mut *lock(&self.queued));
        Self::commit_windows(&mut c, &batch);
        drop(c);
        lock(&done)
            .take()
            .unwrap_or_else(|| {
                Err(rusqlite::Error::SqliteFailure(
                    rusqlite::ffi::Error::new(rusqlite::ffi::SQLITE_ABORT),
                    Some("the window was dropped unwritten; send it again".to_owned()),
                ))
            })
            .map_err(|e| self.err(e))
    }

    /// Writes `batch` in one transaction (a savepoint per window) and
    /// commits it; then, and only then, hands every window its result.
    fn commit_windows(c: &mut Connection, batch: &[QueuedWindow]) {
        let fail_all = |batch: &[QueuedWindow], e: &rusqlite::Error| {
            for q in batch {
                *lock(&q.done) = Some(Err(copy_error(e)));
            }
        };
        let mut tx = match c.transaction() {
            Ok(tx) => tx,
            Err(e) => return fail_all(batch, &e),
        };
        let mut results = Vec::with_capacity(batch.len());
        for q in batch {
            let one = tx.savepoint().and_then(|sp| {
                let out = Self::window_rows(&sp, q)?;
                sp.commit()?;
                Ok(out)
            });
            results.push(one);
        }
        match tx.commit() {
            Ok(()) => {
                for (q, r) in batch.iter().zip(results) {
                    *lock(&q.done) = Some(r);
                }
            }
            Err(e) => fail_all(batch, &e),
        }
    }

    /// The rows of one queued window, inside the caller's transaction.
    fn window_rows(c: &Connection, q: &QueuedWindow) -> rusqlite::Result<Vec<StoredSuspicion>> {
        let (w, found, notify_at) = (&q.w, &q.found, q.notify_at);
        let now = now_text();
        let ids: Vec<&str> = found.iter().map(|(s, _)| s.id.as_str()).collect();
        c.execute(
            "INSERT INTO windows (received, key_id, asset, from_ms, to_ms, readings, suspicion_ids)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            params![
                now,
                w.key_id,
                w.asset,
                w.from_ms,
                w.to_ms,
                w.readings as i64,
                serde_json::to_string(&ids).unwrap_or_default()
            ],
        )?;
        for (s, priority) in found {
            let old: Option<(i64, f64)> = c
                .query_row(
                    "SELECT detected_ms, score FROM suspicions WHERE id = ?1",
                    [&s.id],
                    |r| Ok((r.get(0)?, r.get(1)?)),
                )
                .optional()?;
            let mut rec = s.clone();
            rec.rank = 0;
            let detected_ms = match old {
                Some((d, _)) if d < rec.detected.timestamp_millis() => d,
                _ => rec.detected.timestamp_millis(),
            };
            // the outbox row commits with the suspicion or not at all
            let event = match (notify_at, old) {
                (Some(level), None) if rec.score >= level => Some("new"),
                (Some(level), Some((_, was))) if was < level && rec.score >= level => {
                    Some("escalated")
                }
                _ => None,
            };
            if let Some(event) = event {
                let key = format!("{}:{event}", rec.id);
                let body = serde_json::json!({
                    "event": event,
                    "idempotency_key": key,
                    "suspicion": &rec,
                });
                c.execute(
                    "INSERT OR IGNORE INTO outbox (idempotency_key, suspicion_id, event, body,
                         created, next_attempt_ms) VALUES (?1, ?2, ?3, ?4, ?5, 0)",
                    params![key, rec.id, event, body.to_string(), now],
                )?;
            }
            rec.detected = from_millis(detected_ms);
            let json = serde_json::to_string(&rec)
                .map_err(|e| rusqlite::Error::ToSqlConversionFailure(Box::new(e)))?;
            c.execute(
                "INSERT INTO suspicions (id, asset, sensor, class, mode, score, magnitude, onset_ms,
                     detected_ms, priority, record, first_scored, last_scored)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?12)
                 ON CONFLICT (id) DO UPDATE SET score = excluded.score,
                     magnitude = excluded.magnitude, detected_ms = excluded.detected_ms,
                     priority = excluded.priority, record = excluded.record,
                     last_scored = excluded.last_scored, times_scored = times_scored + 1",
                params![
                    rec.id,
                    rec.asset,
                    rec.sensor,
                    rec.class.as_str(),
                    rec.mode.as_str(),
                    rec.score,
                    rec.magnitude,
                    rec.onset.timestamp_millis(),
                    detected_ms,
                    priority,
                    json,
                    now
                ],
            )
            ?;
        }
        let mut out = Vec::with_capacity(found.len());
        for (s, _) in found {
            if let Some(x) = Self::get(c, &s.id)? {
                out.push(x);
            }
        }
        Ok(out)
    }

    const COLUMNS: &'static str =
        "record, status, priority, first_scored, last_scored, times_scored, detected_ms, id";

    fn row(r: &rusqlite::Row<'_>) -> rusqlite::Result<StoredSuspicion> {
        let text: String = r.get(0)?;
        let record: Suspicion = serde_json::from_str(&text).map_err(|e| {
            rusqlite::Error::FromSqlConversionFailure(0, rusqlite::types::Type::Text, Box::new(e))
        })?;
        Ok(StoredSuspicion {
            record,
            status: r.get(1)?,
            priority: r.get(2)?,
            first_scored: r.get(3)?,
            last_scored: r.get(4)?,
            times_scored: r.get(5)?,
        })
    }

    fn get(c: &Connection, id: &str) -> rusqlite::Result<Option<StoredSuspicion>> {
        c.query_row(
            &format!("SELECT {} FROM suspicions WHERE id = ?1", Self::COLUMNS),
            [id],
            Self::row,
        )
        .optional()
    }

    /// One suspicion.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn suspicion(&self, id: &str) -> Result<Option<StoredSuspicion>, DbError> {
        Self::get(&lock(&self.reader), id).map_err(|e| self.err(e))
    }

    /// The rank of `s` over every stored suspicion (1 = look first).
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn rank_of(&self, s: &StoredSuspicion) -> Result<u32, DbError> {
        let ahead: i64 = lock(&self.reader)
            .query_row(
                "SELECT COUNT(*) FROM suspicions WHERE priority > ?1 OR (priority = ?1 AND
                 (detected_ms < ?2 OR (detected_ms = ?2 AND id < ?3)))",
                params![s.priority, s.record.detected.timestamp_millis(), s.record.id],
                |r| r.get(0),
            )
            .map_err(|e| self.err(e))?;
        Ok(u32::try_from(ahead + 1).unwrap_or(u32::MAX))
    }

    /// A page of suspicions matching `f`, ranked by priority (highest
    /// first), then detection time, then id; `rank` counts from 1 over the
    /// whole filtered listing.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn list(&self, f: &Filter, after: Option<&Cursor>, limit: usize) -> Result<Page, DbError> {
        let mut sql = format!("SELECT {} FROM suspicions WHERE 1 = 1", Self::COLUMNS);
        let mut args: Vec<rusqlite::types::Value> = Vec::new();
        let mut push = |sql: &mut String, cond: &str, v: rusqlite::types::Value| {
            args.push(v);
            sql.push_str(&cond.replace('?', &format!("?{}", args.len())));
        };
        use rusqlite::types::Value as V;
        if let Some(s) = &f.status {
            push(&mut sql, " AND status = ?", V::Text(s.clone()));
        }
        if let Some(s) = &f.asset {
            push(&mut sql, " AND asset = ?", V::Text(s.clone()));
        }
        if let Some(s) = &f.class {
            push(&mut sql, " AND class = ?", V::Text(s.clone()));
        }
        if let Some(t) = f.from_ms {
            push(&mut sql, " AND detected_ms >= ?", V::Integer(t));
        }
        if let Some(t) = f.to_ms {
            push(&mut sql, " AND detected_ms < ?", V::Integer(t));
        }
        if let Some(c) = after {
            push(&mut sql, " AND (priority < ?", V::Real(c.priority));
            push(&mut sql, " OR (priority = ?", V::Real(c.priority));
            push(&mut sql, " AND (detected_ms > ?", V::Integer(c.detected_ms));
            push(&mut sql, " OR (detected_ms = ?", V::Integer(c.detected_ms));
            push(&mut sql, " AND id > ?))))", V::Text(c.id.clone()));
        }
        push(
            &mut sql,
            " ORDER BY priority DESC, detected_ms, id LIMIT ?",
            V::Integer(limit as i64 + 1),
        );
        let c = lock(&self.reader);
        let mut st = c.prepare(&sql).map_err(|e| self.err(e))?;
        let rows = st
            .query_map(rusqlite::params_from_iter(args.iter()), Self::row)
            .map_err(|e| self.err(e))?;
        let mut items = rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))?;
        let more = items.len() > limit;
        items.truncate(limit);
        let first = after.map_or(1, |c| c.rank + 1);
        for (i, it) in items.iter_mut().enumerate() {
            it.record.rank = first + i as u32;
        }
        let next = if more {
            items.last().map(|l| Cursor {
                priority: l.priority,
                detected_ms: l.record.detected.timestamp_millis(),
                id: l.record.id.clone(),
                rank: l.record.rank,
            })
        } else {
            None
        };
        Ok(Page { items, next })
    }

    /// Stores feedback on a suspicion (see the module docs for repeats);
    /// returns the record and whether it is new. The suspicion's status
    /// becomes the verdict.
    ///
    /// # Errors
    /// [`DbError::NoSuspicion`], [`DbError::Conflict`], [`DbError::Sqlite`].
    pub fn add_feedback(
        &self,
        id: &str,
        fb: &NewFeedback,
        key_id: Option<&str>,
    ) -> Result<(FeedbackRecord, bool), DbError> {
        let mut c = lock(&self.writer);
        let tx = c.transaction().map_err(|e| self.err(e))?;
        let exists: Option<String> = tx
            .query_row("SELECT id FROM suspicions WHERE id = ?1", [id], |r| r.get(0))
            .optional()
            .map_err(|e| self.err(e))?;
        if exists.is_none() {
            return Err(DbError::NoSuspicion(id.to_owned()));
        }
        let same = |r: &FeedbackRecord| {
            r.suspicion_id == id
                && r.verdict == fb.verdict
                && r.note == fb.note
                && r.work_order == fb.work_order
        };
        if let Some(k) = &fb.idempotency_key {
            let prev = tx
                .query_row(
                    &format!("SELECT {FB_COLUMNS} FROM feedback WHERE idempotency_key = ?1"),
                    [k],
                    fb_row,
                )
                .optional()
                .map_err(|e| self.err(e))?;
            if let Some(p) = prev {
                return if same(&p) { Ok((p, false)) } else { Err(DbError::Conflict(k.clone())) };
            }
        } else {
            let mut st = tx
                .prepare(&format!(
                    "SELECT {FB_COLUMNS} FROM feedback WHERE suspicion_id = ?1 AND verdict = ?2
                     AND note = ?3 AND work_order IS ?4 ORDER BY seq LIMIT 1"
                ))
                .map_err(|e| self.err(e))?;
            let prev = st
                .query_row(params![id, fb.verdict, fb.note, fb.work_order], fb_row)
                .optional()
                .map_err(|e| self.err(e))?;
            drop(st);
            if let Some(p) = prev {
                return Ok((p, false));
            }
        }
        let received = now_text();
        tx.execute(
            "INSERT INTO feedback (suspicion_id, received, key_id, verdict, note, work_order,
                 idempotency_key) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            params![id, received, key_id, fb.verdict, fb.note, fb.work_order, fb.idempotency_key],
        )
        .map_err(|e| self.err(e))?;
        let seq = tx.last_insert_rowid();
        tx.execute("UPDATE suspicions SET status = ?2 WHERE id = ?1", params![id, fb.verdict])
            .map_err(|e| self.err(e))?;
        if fb.verdict == "process_change_accepted" {
            versions::ask_rebaseline(&tx, id, seq, &received).map_err(|e| self.err(e))?;
        }
        tx.commit().map_err(|e| self.err(e))?;
        Ok((
            FeedbackRecord {
                seq,
                suspicion_id: id.to_owned(),
                received,
                key_id: key_id.map(str::to_owned),
                verdict: fb.verdict.clone(),
                note: fb.note.clone(),
                work_order: fb.work_order.clone(),
                idempotency_key: fb.idempotency_key.clone(),
            },
            true,
        ))
    }

    /// The feedback trail of a suspicion, in order of receipt.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn feedback_of(&self, id: &str) -> Result<Vec<FeedbackRecord>, DbError> {
        let c = lock(&self.reader);
        let mut st = c
            .prepare(&format!(
                "SELECT {FB_COLUMNS} FROM feedback WHERE suspicion_id = ?1 ORDER BY seq"
            ))
            .map_err(|e| self.err(e))?;
        let rows = st.query_map([id], fb_row).map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))
    }

    /// Undelivered outbox rows due at `now_ms`, oldest first.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn due_outbox(&self, now_ms: i64, limit: usize) -> Result<Vec<OutboxItem>, DbError> {
        let c = lock(&self.reader);
        let mut st = c
            .prepare(
                "SELECT seq, idempotency_key, body, attempts FROM outbox
                 WHERE delivered IS NULL AND next_attempt_ms <= ?1 ORDER BY seq LIMIT ?2",
            )
            .map_err(|e| self.err(e))?;
        let rows = st
            .query_map(params![now_ms, limit as i64], |r| {
                Ok(OutboxItem {
                    seq: r.get(0)?,
                    idempotency_key: r.get(1)?,
                    body: r.get(2)?,
                    attempts: r.get(3)?,
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))
    }

    /// Records one delivery attempt of outbox row `seq`: delivered, or
    /// failed with `error` and due again at `retry_at_ms`.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn outbox_attempt(&self, seq: i64, result: Result<(), (&str, i64)>) -> Result<(), DbError> {
        let c = lock(&self.writer);
        let r = match result {
            Ok(()) => c.execute(
                "UPDATE outbox SET attempts = attempts + 1, delivered = ?2, last_error = NULL
                 WHERE seq = ?1",
                params![seq, now_text()],
            ),
            Err((error, retry_at_ms)) => c.execute(
                "UPDATE outbox SET attempts = attempts + 1, last_error = ?2, next_attempt_ms = ?3
                 WHERE seq = ?1",
                params![seq, error, retry_at_ms],
            ),
        };
        r.map(|_| ()).map_err(|e| self.err(e))
    }

    /// Outbox rows (pending, delivered), for the metrics.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn outbox_counts(&self) -> Result<(i64, i64), DbError> {
        lock(&self.reader)
            .query_row(
                "SELECT COALESCE(SUM(delivered IS NULL), 0), COALESCE(SUM(delivered IS NOT NULL), 0)
                 FROM outbox",
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .map_err(|e| self.err(e))
    }

    /// Stored suspicions by (class, status), for the metrics.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn counts(&self) -> Result<Vec<(String, String, i64)>, DbError> {
        let c = lock(&self.reader);
        let mut st = c
            .prepare("SELECT class, status, COUNT(*) FROM suspicions GROUP BY class, status ORDER BY 1, 2")
            .map_err(|e| self.err(e))?;
        let rows =
            st.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?))).map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(|e| self.err(e))
    }

    /// Scored windows stored.
    ///
    /// # Errors
    /// [`DbError::Sqlite`].
    pub fn windows(&self) -> Result<i64, DbError> {
        lock(&self.reader)
            .query_row("SELECT COUNT(*) FROM windows", [], |r| r.get(0))
            .map_err(|e| self.err(e))
    }
}

const FB_COLUMNS: &str =
    "seq, suspicion_id, received, key_id, verdict, note, work_order, idempotency_key";

fn fb_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<FeedbackRecord> {
    Ok(FeedbackRecord {
        seq: r.get(0)?,
        suspicion_id: r.get(1)?,
        received: r.get(2)?,
        key_id: r.get(3)?,
        verdict: r.get(4)?,
        note: r.get(5)?,
        work_order: r.get(6)?,
        idempotency_key: r.get(7)?,
    })
}

/// Formats epoch ms as RFC 3339.
pub fn time_text(ms: i64) -> String {
    format_time(from_millis(ms))
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]
    use super::*;
    use telltale_pipelines::record::{Class, Mode, suspicion_id};

    fn sus(asset: &str, onset_ms: i64, detected_ms: i64, score: f64) -> Suspicion {
        let onset = from_millis(onset_ms);
        Suspicion {
            id: suspicion_id(asset, Some("flow"), Class::SensorFault, Mode::Bias, onset),
            rank: 0,
            asset: asset.into(),
            sensor: Some("flow".into()),
            class: Class::SensorFault,
            mode: Mode::Bias,
            score,
            magnitude: 3.0,
            onset,
            detected: from_millis(detected_ms),
            summary: "s.".into(),
            evidence: vec![],
        }
    }

    fn window(asset: &str) -> WindowRecord {
        WindowRecord { asset: asset.into(), from_ms: 0, to_ms: 1, readings: 1, key_id: None }
    }

    #[test]
    fn migrations_apply_once_and_reopen() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.db");
        let db = Db::open(&p).unwrap();
        assert_eq!(db.schema_version().unwrap(), MIGRATIONS.len() as i64);
        drop(db);
        let db = Db::open(&p).unwrap();
        assert_eq!(db.schema_version().unwrap(), MIGRATIONS.len() as i64);
        let c = Connection::open(&p).unwrap();
        c.execute("UPDATE schema_version SET version = 99", []).unwrap();
        drop(db);
        assert!(matches!(Db::open(&p), Err(DbError::TooNew { found: 99, .. })));
    }

    #[test]
    fn rescoring_updates_the_episode_and_keeps_the_first_detection() {
        let dir = tempfile::tempdir().unwrap();
        let db = Db::open(dir.path().join("t.db")).unwrap();
        let a = sus("p1", 1_000, 5_000, 0.5);
        db.record_window(&window("p1"), &[(a.clone(), 0.4)], None).unwrap();
        let mut again = a.clone();
        again.detected = from_millis(9_000);
        again.score = 0.9;
        let got = db.record_window(&window("p1"), &[(again, 0.7)], None).unwrap();
        assert_eq!(got.len(), 1);
        assert_eq!(got[0].times_scored, 2);
        assert_eq!(got[0].record.score, 0.9);
        assert_eq!(got[0].record.detected, from_millis(5_000));
        let page = db.list(&Filter::default(), None, 10).unwrap();
        assert_eq!(page.items.len(), 1);
        assert_eq!(db.windows().unwrap(), 2);
    }

    #[test]
    fn concurrent_windows_share_commits_and_each_gets_its_own_result() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.db");
        let db = Db::open(&p).unwrap();
        let a = sus("p1", 1_000, 5_000, 0.5);
        // 8 threads x 25 windows: half re-score one episode, half bring their own
        std::thread::scope(|sc| {
            for t in 0..8i64 {
                let (db, a) = (&db, &a);
                sc.spawn(move || {
                    for i in 0..25i64 {
                        let s =
                            if t % 2 == 0 { a.clone() } else { sus("p2", t * 100 + i, 9_000, 0.6) };
                        let got =
                            db.record_window(&window("p"), &[(s.clone(), 0.5)], None).unwrap();
                        assert_eq!(got.len(), 1);
                        assert_eq!(got[0].record.id, s.id);
                    }
                });
            }
        });
        assert_eq!(db.windows().unwrap(), 200);
        // 4 threads x 25 re-scorings of one episode, counted exactly once each
        assert_eq!(db.suspicion(&a.id).unwrap().unwrap().times_scored, 100);
        assert_eq!(db.list(&Filter::default(), None, 500).unwrap().items.len(), 1 + 100);
        // and all of it is in the file, read by a fresh connection
        drop(db);
        let c = Connection::open(&p).unwrap();
        let n: i64 = c.query_row("SELECT COUNT(*) FROM windows", [], |r| r.get(0)).unwrap();
        assert_eq!(n, 200);
    }

    #[test]
    fn listing_ranks_and_pages_without_gaps_or_repeats() {
        let dir = tempfile::tempdir().unwrap();
        let db = Db::open(dir.path().join("t.db")).unwrap();
        // equal priorities for some, to exercise the tie-breaks
        let found: Vec<(Suspicion, f64)> = (0..7)
            .map(|i| {
                (sus(&format!("p{i}"), i * 1000, i * 1000 + 10, 0.5), f64::from((i % 3) as i32))
            })
            .collect();
        db.record_window(&window("p"), &found, None).unwrap();
        let all = db.list(&Filter::default(), None, 100).unwrap().items;
        let mut seen = Vec::new();
        let mut cursor = None;
        loop {
            let page = db.list(&Filter::default(), cursor.as_ref(), 3).unwrap();
            seen.extend(page.items.iter().map(|s| (s.record.id.clone(), s.record.rank)));
            match page.next {
                Some(c) => cursor = Some(Cursor::decode(&c.encode()).unwrap()),
                None => break,
            }
        }
        let want: Vec<(String, u32)> =
            all.iter().map(|s| (s.record.id.clone(), s.record.rank)).collect();
        assert_eq!(seen, want);
        assert_eq!(want.iter().map(|w| w.1).collect::<Vec<_>>(), (1..=7).collect::<Vec<_>>());
        // priority descending
        assert!(all.windows(2).all(|w| w[0].priority >= w[1].priority));
    }

    #[test]
    fn feedback_repeats_are_not_duplicated_and_conflicts_refused() {
        let dir = tempfile::tempdir().unwrap();
        let db = Db::open(dir.path().join("t.db")).unwrap();
        let a = sus("p1", 1_000, 5_000, 0.5);
        db.record_window(&window("p1"), &[(a.clone(), 0.4)], None).unwrap();
        let fb = NewFeedback {
            verdict: "confirmed".into(),
            note: "bearing noise on site".into(),
            work_order: Some("WO-1".into()),
            idempotency_key: None,
        };
        let (r1, new1) = db.add_feedback(&a.id, &fb, Some("k")).unwrap();
        let (r2, new2) = db.add_feedback(&a.id, &fb, Some("k")).unwrap();
        assert!(new1 && !new2);
        assert_eq!(r1, r2);
        let keyed = NewFeedback { idempotency_key: Some("x1".into()), ..fb.clone() };
        let (_, new3) = db.add_feedback(&a.id, &keyed, None).unwrap();
        assert!(new3);
        let other = NewFeedback { note: "other".into(), ..keyed };
        assert!(matches!(db.add_feedback(&a.id, &other, None), Err(DbError::Conflict(_))));
        assert!(matches!(db.add_feedback("nope", &fb, None), Err(DbError::NoSuspicion(_))));
        assert_eq!(db.feedback_of(&a.id).unwrap().len(), 2);
        assert_eq!(db.suspicion(&a.id).unwrap().unwrap().status, "confirmed");
    }

    #[test]
    fn keys_are_stored_hashed_and_revocable() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.db");
        let db = Db::open(&p).unwrap();
        let (info, token) = db.add_key("wo-system", Scope::Write).unwrap();
        assert!(token.starts_with(&format!("tt_{}_", info.id)));
        assert_eq!(db.key_for(&token).unwrap().unwrap().id, info.id);
        assert!(db.key_for("tt_wrong").unwrap().is_none());
        // the secret is nowhere in the file's table
        let c = Connection::open(&p).unwrap();
        let hash: String = c.query_row("SELECT hash FROM api_keys", [], |r| r.get(0)).unwrap();
        assert!(!hash.contains(&token[12..]));
        assert_eq!(hash, hash_key(&token));
        assert!(db.revoke_key(&info.id).unwrap());
        assert!(!db.revoke_key(&info.id).unwrap());
        assert!(db.key_for(&token).unwrap().is_none());
        assert_eq!(db.active_keys().unwrap(), 0);
        assert!(Scope::Write.allows(Scope::Read) && !Scope::Read.allows(Scope::Write));
    }
}

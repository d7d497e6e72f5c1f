//! The HTTP service (`telltale serve`, DESIGN.md section 6): scores
//! windows of one asset's readings with the batch scan's own evaluation and
//! decision code, keeps the suspicions and the engineers' feedback in an
//! embedded SQLite database, and serves them to a work-order system.
//!
//! ```text
//!  request ─ problem layer (every 4xx/5xx as application/problem+json, instance = path)
//!          ─ metrics (count and latency by route pattern)
//!          ─ timeout (503 past --request-timeout-s)
//!          ─ route (from ROUTES) ─ auth (bearer key with the route's scope)
//!          ─ handler ─ spawn_blocking: parse, score (pipelines::jobs::scan_asset),
//!                      SQLite transaction committed ─ response
//! ```
//!
//! Every route the router serves comes from [`ROUTES`], and the OpenAPI
//! document is generated from the same table ([`openapi`]), so the two
//! cannot drift apart.

pub mod arrow;
pub mod db;
pub mod error;
pub mod metrics;
mod openapi;
pub mod rebaseline;
pub mod webhook;
pub mod window;

pub use openapi::openapi;

use axum::body::{Body, HttpBody};
use axum::extract::{MatchedPath, Path as UrlPath, Query, Request, State};
use axum::http::{HeaderMap, HeaderValue, Method, StatusCode, header};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Response};
use axum::routing::{MethodRouter, get, post};
use axum::{Json, Router};
use db::{Cursor, Db, DbError, Filter, NewFeedback, Scope, WindowRecord};
use error::{ApiError, ProblemMarker, problem_response};
use metrics::Metrics;
use serde_json::{Value, json};
use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant, SystemTime};
use telltale_pipelines::io::{AssetHistory, SensorSeries};
use telltale_pipelines::jobs::scan::priority;
use telltale_pipelines::jobs::{ScanSettings, Store, StoredBaseline, scan_asset};
use telltale_pipelines::time::{format_time, from_millis};
use window::{Window, WindowLimits};

/// Media type of an Arrow IPC stream.
pub const ARROW_STREAM: &str = "application/vnd.apache.arrow.stream";

/// Limits of the service.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Largest request body, bytes.
    pub body_bytes: usize,
    /// Limits of one window.
    pub window: WindowLimits,
    /// Longest time a request may take.
    pub request_timeout: Duration,
    /// Largest page of a listing.
    pub page_max: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            body_bytes: 16 << 20,
            window: WindowLimits {
                max_readings: 200_000,
                max_span_ms: 7 * 86_400_000,
                warmup_ms: 3 * 86_400_000,
            },
            request_timeout: Duration::from_secs(30),
            page_max: 500,
        }
    }
}

struct Shared {
    store: Store,
    db: Db,
    limits: Limits,
    metrics: Metrics,
    open: bool,
    notify_at: Option<f64>,
    baselines: Mutex<HashMap<String, (SystemTime, Arc<StoredBaseline>)>>,
    rebaseline_wake: Arc<tokio::sync::Notify>,
}

/// State shared by the handlers.
#[derive(Clone)]
pub struct AppState {
    inner: Arc<Shared>,
}

impl AppState {
    /// State over a baseline store and an opened database. `open`: no key
    /// is needed (the caller checks that the address is loopback).
    /// `notify_at`: the webhook's score level, if one is configured.
    pub fn new(store: Store, db: Db, limits: Limits, open: bool, notify_at: Option<f64>) -> Self {
        AppState {
            inner: Arc::new(Shared {
                store,
                db,
                limits,
                metrics: Metrics::default(),
                open,
                notify_at,
                baselines: Mutex::new(HashMap::new()),
                rebaseline_wake: Arc::new(tokio::sync::Notify::new()),
            }),
        }
    }

    /// The database.
    pub fn db(&self) -> &Db {
        &self.inner.db
    }

    /// Wakes the re-baseline worker (see [`rebaseline`]).
    pub fn rebaseline_wake(&self) -> Arc<tokio::sync::Notify> {
        Arc::clone(&self.inner.rebaseline_wake)
    }

    /// The asset's stored baseline, cached while its file is unchanged;
    /// `None` when the store has none.
    fn baseline(&self, asset: &str) -> Result<Option<Arc<StoredBaseline>>, ApiError> {
        let path = self.inner.store.baseline_path(asset);
        let Ok(meta) = std::fs::metadata(&path) else { return Ok(None) };
        let mtime = meta.modified().unwrap_or(SystemTime::UNIX_EPOCH);
        let mut cache =
            self.inner.baselines.lock().unwrap_or_else(std::sync::PoisonError::into_inner);
        if let Some((t, b)) = cache.get(asset)
            && *t == mtime
        {
            return Ok(Some(Arc::clone(b)));
        }
        let b = Arc::new(self.inner.store.read_baseline(asset).map_err(ApiError::internal)?);
        cache.insert(asset.to_owned(), (mtime, Arc::clone(&b)));
        Ok(Some(b))
    }
}

/// Who sent a request (`None` in open mode or on a public route).
#[derive(Debug, Clone, Default)]
struct Caller {
    key_id: Option<String>,
}

/// One route: what the router serves and what the OpenAPI document says.
pub struct RouteSpec {
    /// `GET` or `POST`.
    pub method: Method,
    /// Path with `{param}` segments (the same syntax in axum and OpenAPI).
    pub path: &'static str,
    /// Scope a key needs; `None`: public.
    pub scope: Option<Scope>,
    /// OpenAPI operationId.
    pub operation_id: &'static str,
    /// One line.
    pub summary: &'static str,
    /// Query parameters: (name, schema type, description).
    pub query: &'static [(&'static str, &'static str, &'static str)],
    /// Request body: (media types, schema name).
    pub body: Option<(&'static [&'static str], &'static str)>,
    /// Success: (status, media type, schema name or "" for text).
    pub ok: &'static [(u16, &'static str, &'static str)],
    /// Error statuses it may answer (problem+json).
    pub errors: &'static [u16],
    make: fn() -> MethodRouter<AppState>,
}

/// Every route of the service.
pub static ROUTES: &[RouteSpec] = &[
    RouteSpec {
        method: Method::POST,
        path: "/v1/windows/score",
        scope: Some(Scope::Write),
        operation_id: "scoreWindow",
        summary: "Score one asset's readings for a window; returns and stores its suspicions",
        query: &[
            ("asset", "string", "Arrow bodies only: the asset of the readings"),
            ("from", "string", "Arrow bodies only: start of the window (RFC 3339)"),
            ("to", "string", "Arrow bodies only: end of the window, exclusive (RFC 3339)"),
        ],
        body: Some((&["application/json", ARROW_STREAM], "Window")),
        ok: &[(200, "application/json", "ScoreResult")],
        errors: &[400, 401, 403, 404, 413, 415, 422, 503],
        make: || post(score_window),
    },
    RouteSpec {
        method: Method::GET,
        path: "/v1/suspicions",
        scope: Some(Scope::Read),
        operation_id: "listSuspicions",
        summary: "Stored suspicions, ranked (priority, then detection time), paged by cursor",
        query: &[
            ("status", "string", "open, confirmed, dismissed or process_change_accepted"),
            ("asset", "string", "asset id"),
            ("class", "string", "sensor_fault, process_change or equipment_fault"),
            ("from", "string", "detected at or after (RFC 3339)"),
            ("to", "string", "detected before (RFC 3339)"),
            ("limit", "integer", "page size, 1..500 (default 50)"),
            ("cursor", "string", "the next_cursor of the previous page"),
        ],
        body: None,
        ok: &[(200, "application/json", "SuspicionPage")],
        errors: &[400, 401, 403, 422],
        make: || get(list_suspicions),
    },
    RouteSpec {
        method: Method::GET,
        path: "/v1/suspicions/{id}",
        scope: Some(Scope::Read),
        operation_id: "getSuspicion",
        summary: "One suspicion with its full evidence and feedback trail",
        query: &[],
        body: None,
        ok: &[(200, "application/json", "SuspicionDetail")],
        errors: &[401, 403, 404],
        make: || get(get_suspicion),
    },
    RouteSpec {
        method: Method::POST,
        path: "/v1/suspicions/{id}/feedback",
        scope: Some(Scope::Write),
        operation_id: "postFeedback",
        summary: "Record a reviewer's verdict on a suspicion (idempotent; see Idempotency-Key)",
        query: &[],
        body: Some((&["application/json"], "FeedbackRequest")),
        ok: &[
            (201, "application/json", "FeedbackResult"),
            (200, "application/json", "FeedbackResult"),
        ],
        errors: &[400, 401, 403, 404, 409, 413, 415, 422],
        make: || post(post_feedback),
    },
    RouteSpec {
        method: Method::GET,
        path: "/v1/assets",
        scope: Some(Scope::Read),
        operation_id: "listAssets",
        summary: "Assets with a baseline in the store",
        query: &[],
        body: None,
        ok: &[(200, "application/json", "AssetList")],
        errors: &[401, 403],
        make: || get(list_assets),
    },
    RouteSpec {
        method: Method::GET,
        path: "/v1/assets/{id}/baseline",
        scope: Some(Scope::Read),
        operation_id: "getBaseline",
        summary: "The asset's baseline now in the store, or a recorded earlier version",
        query: &[(
            "version",
            "integer",
            "a version number from /v1/assets/{id}/baselines (default: the one in the store)",
        )],
        body: None,
        ok: &[(200, "application/json", "StoredBaseline")],
        errors: &[401, 403, 404, 422],
        make: || get(get_baseline),
    },
    RouteSpec {
        method: Method::GET,
        path: "/v1/assets/{id}/baselines",
        scope: Some(Scope::Read),
        operation_id: "listBaselineVersions",
        summary: "The asset's baseline versions: the fitted one and each re-baseline since",
        query: &[],
        body: None,
        ok: &[(200, "application/json", "BaselineVersions")],
        errors: &[401, 403, 404],
        make: || get(list_baseline_versions),
    },
    RouteSpec {
        method: Method::GET,
        path: "/healthz",
        scope: None,
        operation_id: "health",
        summary: "The process is up and its database answers",
        query: &[],
        body: None,
        ok: &[(200, "application/json", "Health")],
        errors: &[500],
        make: || get(healthz),
    },
    RouteSpec {
        method: Method::GET,
        path: "/metrics",
        scope: None,
        operation_id: "metrics",
        summary: "Prometheus text exposition: requests, latency, scored windows, suspicions",
        query: &[],
        body: None,
        ok: &[(200, "text/plain; version=0.0.4", "")],
        errors: &[500],
        make: || get(metrics_text),
    },
    RouteSpec {
        method: Method::GET,
        path: "/openapi.json",
        scope: None,
        operation_id: "openapi",
        summary: "This API as an OpenAPI 3.1 document",
        query: &[],
        body: None,
        ok: &[(200, "application/json", "")],
        errors: &[],
        make: || get(openapi_json),
    },
];

/// The router: every route of [`ROUTES`] with its scope check, the
/// timeout, metrics and problem layers, and a problem 404 fallback.
pub fn app(state: AppState) -> Router {
    let mut r: Router<AppState> = Router::new();
    for spec in ROUTES {
        let mut m = (spec.make)();
        if let Some(scope) = spec.scope {
            m = m.route_layer(middleware::from_fn_with_state((state.clone(), scope), auth));
        }
        r = r.route(spec.path, m);
    }
    let timeout = state.inner.limits.request_timeout;
    r.fallback(not_found)
        .layer(middleware::from_fn_with_state(timeout, timeout_layer))
        .layer(middleware::from_fn_with_state(state.clone(), metrics_layer))
        .layer(middleware::from_fn(problem_layer))
        .with_state(state)
}

async fn not_found(method: Method, uri: axum::http::Uri) -> ApiError {
    ApiError::NotFound {
        what: "route",
        detail: format!("no route {method} {}; GET /openapi.json lists the routes", uri.path()),
    }
}

/// Runs blocking work (SQLite, scoring) off the async workers.
async fn blocking<T: Send + 'static>(
    f: impl FnOnce() -> Result<T, ApiError> + Send + 'static,
) -> Result<T, ApiError> {
    tokio::task::spawn_blocking(f).await.map_err(ApiError::internal)?
}

fn db_error(e: DbError) -> ApiError {
    match e {
        DbError::Conflict(_) => ApiError::Conflict(e.to_string()),
        DbError::NoSuspicion(id) => ApiError::NotFound {
            what: "suspicion",
            detail: format!("no suspicion {id:?}; GET /v1/suspicions lists them"),
        },
        other => ApiError::internal(other),
    }
}

async fn auth(
    State((state, need)): State<(AppState, Scope)>,
    mut req: Request,
    next: Next,
) -> Result<Response, ApiError> {
    if state.inner.open {
        req.extensions_mut().insert(Caller::default());
        return Ok(next.run(req).await);
    }
    let token = req
        .headers()
        .get(header::AUTHORIZATION)
        .and_then(|v| v.to_str().ok())
        // the auth scheme is case-insensitive (RFC 9110 section 11.1)
        .and_then(|v| v.get(..7).filter(|p| p.eq_ignore_ascii_case("bearer ")).map(|_| &v[7..]))
        .map(|t| t.trim().to_owned())
        .ok_or_else(|| {
            ApiError::Unauthorized(
                "send an API key as `Authorization: Bearer <key>`; create one with `telltale keys \
                 add`"
                    .to_owned(),
            )
        })?;
    let st = state.clone();
    let key =
        blocking(move || st.db().key_for(&token).map_err(db_error)).await?.ok_or_else(|| {
            ApiError::Unauthorized(
                "the API key is unknown or revoked; `telltale keys list` shows the active keys"
                    .to_owned(),
            )
        })?;
    if !key.scope.allows(need) {
        return Err(ApiError::Forbidden(format!(
            "key {} has scope {}; this route needs a {} key",
            key.id,
            key.scope.as_str(),
            need.as_str()
        )));
    }
    req.extensions_mut().insert(Caller { key_id: Some(key.id) });
    Ok(next.run(req).await)
}

async fn timeout_layer(State(limit): State<Duration>, req: Request, next: Next) -> Response {
    match tokio::time::timeout(limit, next.run(req)).await {
        Ok(r) => r,
        Err(_) => ApiError::Timeout(limit.as_secs()).into_response(),
    }
}

async fn metrics_layer(State(state): State<AppState>, req: Request, next: Next) -> Response {
    let route = req
        .extensions()
        .get::<MatchedPath>()
        .map_or_else(|| "unmatched".to_owned(), |m| m.as_str().to_owned());
    let method = req.method().to_string();
    let t0 = Instant::now();
    let span = tracing::debug_span!("request", %method, route = %route, uri = %req.uri());
    let resp = tracing::Instrument::instrument(next.run(req), span.clone()).await;
    let secs = t0.elapsed().as_secs_f64();
    span.in_scope(|| {
        tracing::debug!(status = resp.status().as_u16(), elapsed_ms = secs * 1e3, "answered");
    });
    state.inner.metrics.request(&route, &method, resp.status().as_u16(), secs);
    resp
}

/// Makes every error response a problem document whose `instance` is the
/// request path, including axum's own rejections (405, bad query strings).
async fn problem_layer(req: Request, next: Next) -> Response {
    let path = req.uri().path().to_owned();
    let resp = next.run(req).await;
    let status = resp.status();
    if !(status.is_client_error() || status.is_server_error()) {
        return resp;
    }
    let ours = resp.extensions().get::<ProblemMarker>().is_some();
    let (parts, body) = resp.into_parts();
    let bytes = axum::body::to_bytes(body, 1 << 20).await.unwrap_or_default();
    if ours && let Ok(mut v) = serde_json::from_slice::<Value>(&bytes) {
        v["instance"] = Value::String(path);
        let mut r = (status, serde_json::to_vec(&v).unwrap_or_default()).into_response();
        r.headers_mut()
            .insert(header::CONTENT_TYPE, HeaderValue::from_static("application/problem+json"));
        for (k, val) in &parts.headers {
            if k != header::CONTENT_TYPE && k != header::CONTENT_LENGTH {
                r.headers_mut().insert(k.clone(), val.clone());
            }
        }
        return r;
    }
    let text = String::from_utf8_lossy(&bytes).trim().to_owned();
    let (type_uri, title, detail) = match status {
        StatusCode::METHOD_NOT_ALLOWED => (
            "/problems/method-not-allowed",
            "Method not allowed",
            format!(
                "{path} does not take this method; GET /openapi.json lists each route's methods"
            ),
        ),
        StatusCode::PAYLOAD_TOO_LARGE => (
            "/problems/body-too-large",
            "Body too large",
            "the body is larger than the service's limit; split it".to_owned(),
        ),
        s if s.is_client_error() => (
            "/problems/malformed-request",
            "Malformed request",
            if text.is_empty() { "the request could not be read".to_owned() } else { text },
        ),
        _ => {
            ("/problems/internal", "Internal error", "the service failed; it is logged".to_owned())
        }
    };
    let p = error::Problem {
        type_uri,
        title,
        status: status.as_u16(),
        detail,
        instance: path,
        field: None,
    };
    let mut r = problem_response(status, &p);
    if let Some(allow) = parts.headers.get(header::ALLOW) {
        r.headers_mut().insert(header::ALLOW, allow.clone());
    }
    r
}

/// Reads the body up to the limit, checking its media type.
async fn read_body(
    state: &AppState,
    headers: &HeaderMap,
    body: Body,
    accept: &[&str],
) -> Result<(Vec<u8>, String), ApiError> {
    let ct = headers
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .map(|v| v.split(';').next().unwrap_or("").trim().to_ascii_lowercase())
        .unwrap_or_default();
    if !accept.contains(&ct.as_str()) {
        return Err(ApiError::UnsupportedMedia(format!(
            "Content-Type {:?} is not accepted here; send {}",
            ct,
            accept.join(" or ")
        )));
    }
    let limit = state.inner.limits.body_bytes;
    // Past the limit the rest is read and dropped (up to four times the
    // limit), so that a client that sends its whole body before reading the
    // answer gets the 413 rather than a reset connection.
    let mut body = body;
    let mut buf = Vec::new();
    let mut total = 0usize;
    while let Some(frame) =
        std::future::poll_fn(|cx| std::pin::Pin::new(&mut body).poll_frame(cx)).await
    {
        let frame = frame.map_err(|e| {
            ApiError::bad_request("body", format!("the body could not be read ({e})"))
        })?;
        if let Ok(data) = frame.into_data() {
            total = total.saturating_add(data.len());
            if total <= limit {
                buf.extend_from_slice(&data);
            } else if total > limit.saturating_mul(4) {
                break;
            }
        }
    }
    if total > limit {
        return Err(ApiError::TooLarge(format!(
            "the body is larger than the limit of {limit} bytes; split the window"
        )));
    }
    Ok((buf, ct))
}

fn history_of(w: &Window, stored: &StoredBaseline) -> (AssetHistory, Vec<String>, Vec<String>) {
    let mut warnings = Vec::new();
    let mut judged = Vec::new();
    let known: Vec<&str> = stored.sensors.iter().map(|s| s.id.as_str()).collect();
    let mut sensors = Vec::new();
    for (id, r) in &w.sensors {
        if known.contains(&id.as_str()) {
            judged.push(id.clone());
            sensors.push(SensorSeries {
                sensor: id.clone(),
                ts_ms: r.ts_ms.clone(),
                value: r.value.clone(),
                good: r.good.clone(),
            });
        } else {
            warnings.push(format!(
                "sensor {id:?} is not in {}'s baseline; its {} readings were not judged (re-fit the \
                 asset to include it)",
                w.asset,
                r.ts_ms.len()
            ));
        }
    }
    for k in &known {
        if !w.sensors.contains_key(*k) {
            warnings.push(format!(
                "baseline sensor {k:?} has no readings in the window; it is judged as silent"
            ));
        }
    }
    (AssetHistory { asset: w.asset.clone(), sensors }, judged, warnings)
}

async fn score_window(
    State(state): State<AppState>,
    axum::Extension(caller): axum::Extension<Caller>,
    Query(q): Query<HashMap<String, String>>,
    headers: HeaderMap,
    body: Body,
) -> Result<Response, ApiError> {
    let (bytes, ct) =
        read_body(&state, &headers, body, &["application/json", ARROW_STREAM]).await?;
    let arrow = ct == ARROW_STREAM;
    if let Some(k) = q.keys().find(|k| !arrow || !["asset", "from", "to"].contains(&k.as_str())) {
        return Err(ApiError::invalid(
            k.as_str(),
            if arrow {
                format!("unknown parameter {k:?}; an Arrow window takes asset, from and to")
            } else {
                format!("parameter {k:?}: a JSON window carries asset, from and to in its body")
            },
        ));
    }
    let st = state.clone();
    let out = blocking(move || {
        let lim = st.inner.limits.window;
        let w = if arrow {
            let asset = q.get("asset").filter(|a| !a.is_empty()).cloned().ok_or_else(|| {
                ApiError::invalid("asset", "an Arrow window needs ?asset=ID in the query string")
            })?;
            let t = |k: &str| {
                q.get(k).map(|v| window::time_field(&Value::String(v.clone()), k)).transpose()
            };
            arrow::parse_arrow(&bytes, asset, t("from")?, t("to")?, &lim)?
        } else {
            window::parse_json(&bytes, &lim)?
        };
        let Some(stored) = st.baseline(&w.asset)? else {
            return Err(ApiError::NotFound {
                what: "asset",
                detail: format!(
                    "no baseline for asset {:?} in the store; GET /v1/assets lists the assets \
                     this service can score, and `telltale fit` adds one",
                    w.asset
                ),
            });
        };
        let (history, judged, warnings) = history_of(&w, &stored);
        let mut settings = ScanSettings::new("<request>", st.inner.store.dir(), w.from_ms, w.to_ms);
        settings.warmup_ms = lim.warmup_ms;
        let report = scan_asset(&settings, (*stored).clone(), &history)
            .map_err(|e| ApiError::invalid("asset", format!("{}: cannot judge: {e}", w.asset)))?;
        let found: Vec<_> = report
            .suspicions
            .iter()
            .map(|s| (s.clone(), priority(s, stored.criticality)))
            .collect();
        let rec = WindowRecord {
            asset: w.asset.clone(),
            from_ms: w.from_ms,
            to_ms: w.to_ms,
            readings: w.readings,
            key_id: caller.key_id.clone(),
        };
        let mut saved =
            st.db().record_window(&rec, &found, st.inner.notify_at).map_err(db_error)?;
        for (s, r) in saved.iter_mut().zip(&report.suspicions) {
            s.record.rank = r.rank;
        }
        let classes: Vec<&str> = report.suspicions.iter().map(|s| s.class.as_str()).collect();
        st.inner.metrics.window(w.readings, &classes);
        Ok(json!({
            "asset": w.asset,
            "from": format_time(from_millis(w.from_ms)),
            "to": format_time(from_millis(w.to_ms)),
            "readings": w.readings,
            "sensors_judged": judged,
            "warnings": warnings,
            "suspicions": saved,
        }))
    })
    .await?;
    Ok(Json(out).into_response())
}

const STATUSES: [&str; 4] = ["open", "confirmed", "dismissed", "process_change_accepted"];
const VERDICTS: [&str; 3] = ["confirmed", "dismissed", "process_change_accepted"];

fn query_time(q: &HashMap<String, String>, k: &str) -> Result<Option<i64>, ApiError> {
    q.get(k)
        .map(|s| {
            telltale_pipelines::time::parse_time(s)
                .map(|t| t.timestamp_millis())
                .map_err(|e| ApiError::invalid(k, format!("{k}: {e}")))
        })
        .transpose()
}

async fn list_suspicions(
    State(state): State<AppState>,
    Query(q): Query<HashMap<String, String>>,
) -> Result<Response, ApiError> {
    const KNOWN: [&str; 7] = ["status", "asset", "class", "from", "to", "limit", "cursor"];
    if let Some(k) = q.keys().find(|k| !KNOWN.contains(&k.as_str())) {
        return Err(ApiError::invalid(
            k.as_str(),
            format!("unknown parameter {k:?}; use {}", KNOWN.join(", ")),
        ));
    }
    if let Some(s) = q.get("status")
        && !STATUSES.contains(&s.as_str())
    {
        return Err(ApiError::invalid(
            "status",
            format!("status {s:?}: use one of {}", STATUSES.join(", ")),
        ));
    }
    if let Some(c) = q.get("class")
        && c.parse::<telltale_pipelines::record::Class>().map_or(true, |c| !c.is_verdict())
    {
        return Err(ApiError::invalid(
            "class",
            format!("class {c:?}: use sensor_fault, process_change or equipment_fault"),
        ));
    }
    let page_max = state.inner.limits.page_max;
    let limit = match q.get("limit") {
        None => 50,
        Some(s) => match s.parse::<usize>() {
            Ok(n) if (1..=page_max).contains(&n) => n,
            _ => {
                return Err(ApiError::invalid(
                    "limit",
                    format!("limit {s:?}: give an integer 1..{page_max}"),
                ));
            }
        },
    };
    let cursor = q
        .get("cursor")
        .map(|c| {
            Cursor::decode(c).ok_or_else(|| {
                ApiError::invalid(
                    "cursor",
                    "cursor is not one this service gave; use next_cursor of the previous page",
                )
            })
        })
        .transpose()?;
    let filter = Filter {
        status: q.get("status").cloned(),
        asset: q.get("asset").cloned(),
        class: q.get("class").cloned(),
        from_ms: query_time(&q, "from")?,
        to_ms: query_time(&q, "to")?,
    };
    let page = blocking(move || state.db().list(&filter, cursor.as_ref(), limit).map_err(db_error))
        .await?;
    Ok(Json(json!({
        "items": page.items,
        "next_cursor": page.next.map(|c| c.encode()),
    }))
    .into_response())
}

async fn get_suspicion(
    State(state): State<AppState>,
    UrlPath(id): UrlPath<String>,
) -> Result<Response, ApiError> {
    let out = blocking(move || {
        let db = state.db();
        let Some(mut s) = db.suspicion(&id).map_err(db_error)? else {
            return Err(db_error(DbError::NoSuspicion(id)));
        };
        s.record.rank = db.rank_of(&s).map_err(db_error)?;
        let fb = db.feedback_of(&id).map_err(db_error)?;
        let rebase = db.rebaseline_of(&id).map_err(db_error)?;
        let mut v = serde_json::to_value(&s).map_err(ApiError::internal)?;
        v["feedback"] = serde_json::to_value(fb).map_err(ApiError::internal)?;
        v["rebaseline"] = serde_json::to_value(rebase).map_err(ApiError::internal)?;
        Ok(v)
    })
    .await?;
    Ok(Json(out).into_response())
}

fn text_field(
    o: &serde_json::Map<String, Value>,
    k: &str,
    required: bool,
    max: usize,
) -> Result<Option<String>, ApiError> {
    match o.get(k) {
        None | Some(Value::Null) if !required => Ok(None),
        None | Some(Value::Null) => Err(ApiError::invalid(k, format!("{k} is missing"))),
        Some(Value::String(s)) if s.chars().count() <= max => Ok(Some(s.clone())),
        Some(Value::String(_)) => {
            Err(ApiError::invalid(k, format!("{k} is longer than {max} characters")))
        }
        Some(other) => Err(ApiError::invalid(k, format!("{k} must be a string, got {other}"))),
    }
}

async fn post_feedback(
    State(state): State<AppState>,
    axum::Extension(caller): axum::Extension<Caller>,
    UrlPath(id): UrlPath<String>,
    headers: HeaderMap,
    body: Body,
) -> Result<Response, ApiError> {
    let (bytes, _) = read_body(&state, &headers, body, &["application/json"]).await?;
    let idem = match headers.get("idempotency-key") {
        None => None,
        Some(v) => match v.to_str() {
            Ok(s) if !s.trim().is_empty() && s.len() <= 200 => Some(s.trim().to_owned()),
            _ => {
                return Err(ApiError::invalid(
                    "Idempotency-Key",
                    "the Idempotency-Key header must be 1..200 visible ASCII characters",
                ));
            }
        },
    };
    let doc: Value = serde_json::from_slice(&bytes)
        .map_err(|e| ApiError::bad_request("body", format!("the body is not valid JSON ({e})")))?;
    let o = doc.as_object().ok_or_else(|| {
        ApiError::invalid("body", "the body must be an object {verdict, note, work_order}")
    })?;
    if let Some(k) = o.keys().find(|k| !["verdict", "note", "work_order"].contains(&k.as_str())) {
        return Err(ApiError::invalid(
            k.as_str(),
            format!("unknown field {k:?}; feedback has verdict, note and work_order"),
        ));
    }
    let verdict = text_field(o, "verdict", true, 64)?.unwrap_or_default();
    if !VERDICTS.contains(&verdict.as_str()) {
        return Err(ApiError::invalid(
            "verdict",
            format!("verdict {verdict:?}: use one of {}", VERDICTS.join(", ")),
        ));
    }
    let note = text_field(o, "note", true, 4000)?.unwrap_or_default();
    let work_order = text_field(o, "work_order", false, 200)?;
    let fb = NewFeedback { verdict, note, work_order, idempotency_key: idem };
    let wake = state.rebaseline_wake();
    let (rec, new, status, rebase) = blocking(move || {
        let (rec, new) =
            state.db().add_feedback(&id, &fb, caller.key_id.as_deref()).map_err(db_error)?;
        let status = state.db().suspicion(&id).map_err(db_error)?.map(|s| s.status);
        let rebase = state.db().rebaseline_of(&id).map_err(db_error)?;
        Ok((rec, new, status, rebase))
    })
    .await?;
    let mut body = json!({ "feedback": rec, "replayed": !new, "status": status });
    if rec.verdict == "process_change_accepted" {
        // the re-baseline is done by the worker; GET /v1/suspicions/{id} shows its state
        wake.notify_one();
        body["rebaseline"] = serde_json::to_value(rebase).map_err(ApiError::internal)?;
    }
    let code = if new { StatusCode::CREATED } else { StatusCode::OK };
    Ok((code, Json(body)).into_response())
}

async fn list_assets(State(state): State<AppState>) -> Result<Response, ApiError> {
    let out = blocking(move || {
        let store = &state.inner.store;
        let ids = store.list().map_err(ApiError::internal)?;
        let manifest = store.manifest().ok();
        let items: Vec<Value> = ids
            .iter()
            .map(|a| {
                let e = manifest.as_ref().and_then(|m| m.entry(a));
                json!({
                    "asset": a,
                    "fit_from": e.and_then(|e| e.fit_from.clone()),
                    "fit_until": e.map(|e| e.fit_until.clone()),
                    "written": e.map(|e| e.written.clone()),
                    "baseline": format!("/v1/assets/{a}/baseline"),
                })
            })
            .collect();
        Ok(json!({ "items": items }))
    })
    .await?;
    Ok(Json(out).into_response())
}

async fn get_baseline(
    State(state): State<AppState>,
    UrlPath(id): UrlPath<String>,
    Query(q): Query<HashMap<String, String>>,
) -> Result<Response, ApiError> {
    if let Some(k) = q.keys().find(|k| k.as_str() != "version") {
        return Err(ApiError::invalid(k.as_str(), format!("unknown parameter {k:?}; use version")));
    }
    let version = q
        .get("version")
        .map(|v| {
            v.parse::<i64>().ok().filter(|n| *n >= 1).ok_or_else(|| {
                ApiError::invalid(
                    "version",
                    format!("version {v:?}: give a version number (1, 2, ...) from the asset's /baselines"),
                )
            })
        })
        .transpose()?;
    let out = blocking(move || {
        if let Some(n) = version {
            let text = state.db().baseline_version_text(&id, n).map_err(db_error)?;
            let Some(text) = text else {
                return Err(ApiError::NotFound {
                    what: "baseline version",
                    detail: format!(
                        "no version {n} of {id:?}'s baseline is recorded; GET \
                         /v1/assets/{id}/baselines lists the versions"
                    ),
                });
            };
            return serde_json::from_str(&text).map_err(ApiError::internal);
        }
        let Some(b) = state.baseline(&id)? else {
            return Err(ApiError::NotFound {
                what: "asset",
                detail: format!(
                    "no baseline for asset {id:?}; GET /v1/assets lists the assets with one"
                ),
            });
        };
        serde_json::to_value(&*b).map_err(ApiError::internal)
    })
    .await?;
    Ok(Json(out).into_response())
}

async fn list_baseline_versions(
    State(state): State<AppState>,
    UrlPath(id): UrlPath<String>,
) -> Result<Response, ApiError> {
    let out = blocking(move || {
        let Some(stored) = state.baseline(&id)? else {
            return Err(ApiError::NotFound {
                what: "asset",
                detail: format!(
                    "no baseline for asset {id:?}; GET /v1/assets lists the assets with one"
                ),
            });
        };
        // the file in the store is recorded as a version the first time it is seen
        let path = state.inner.store.baseline_path(&id);
        let bytes = std::fs::read(&path).map_err(ApiError::internal)?;
        let in_store =
            rebaseline::record_store_file(&state, &id, &bytes, &stored).map_err(db_error)?;
        let items = state.db().baseline_versions(&id).map_err(db_error)?;
        Ok(json!({ "asset": id, "in_store": in_store, "items": items }))
    })
    .await?;
    Ok(Json(out).into_response())
}

async fn healthz(State(state): State<AppState>) -> Result<Response, ApiError> {
    let out = blocking(move || {
        let v = state.db().schema_version().map_err(db_error)?;
        Ok(json!({
            "status": "ok",
            "version": env!("CARGO_PKG_VERSION"),
            "schema_version": v,
            "open": state.inner.open,
        }))
    })
    .await?;
    Ok(Json(out).into_response())
}

async fn metrics_text(State(state): State<AppState>) -> Result<Response, ApiError> {
    let st = state.clone();
    let (stored, outbox) = blocking(move || {
        Ok((st.db().counts().map_err(db_error)?, st.db().outbox_counts().map_err(db_error)?))
    })
    .await?;
    let mut text = state.inner.metrics.render(&stored);
    if state.inner.notify_at.is_some() {
        use std::fmt::Write;
        let _ = writeln!(text, "# HELP telltale_webhook_outbox Webhook deliveries by state.");
        let _ = writeln!(text, "# TYPE telltale_webhook_outbox gauge");
        let _ = writeln!(text, "telltale_webhook_outbox{{state=\"pending\"}} {}", outbox.0);
        let _ = writeln!(text, "telltale_webhook_outbox{{state=\"delivered\"}} {}", outbox.1);
    }
    let mut r = text.into_response();
    r.headers_mut()
        .insert(header::CONTENT_TYPE, HeaderValue::from_static("text/plain; version=0.0.4"));
    Ok(r)
}

async fn openapi_json() -> Response {
    Json(openapi()).into_response()
}

/// Settings of `telltale serve`.
#[derive(Debug, Clone)]
pub struct ServeConfig {
    /// Baseline store.
    pub store: PathBuf,
    /// SQLite database file.
    pub db: PathBuf,
    /// Address to listen on.
    pub listen: std::net::SocketAddr,
    /// Run without keys (loopback only).
    pub open: bool,
    /// Limits.
    pub limits: Limits,
    /// Outbound notification.
    pub webhook: Option<webhook::WebhookConfig>,
    /// Re-baselines after accepted process changes.
    pub rebaseline: rebaseline::RebaselineConfig,
}

/// Waits for ctrl-c or SIGTERM.
async fn shutdown_signal() {
    let ctrl_c = async {
        let _ = tokio::signal::ctrl_c().await;
    };
    #[cfg(unix)]
    let term = async {
        match tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()) {
            Ok(mut s) => {
                s.recv().await;
            }
            Err(_) => std::future::pending::<()>().await,
        }
    };
    #[cfg(not(unix))]
    let term = std::future::pending::<()>();
    tokio::select! { () = ctrl_c => {}, () = term => {} }
}

/// Binds, prints `listening on http://ADDR` on stdout, serves until ctrl-c
/// or SIGTERM, then finishes the requests in flight (bounded by the request
/// timeout plus five seconds).
///
/// # Errors
/// The address cannot be bound.
pub async fn serve(
    state: AppState,
    listen: std::net::SocketAddr,
    hook: Option<webhook::WebhookConfig>,
    rebase: rebaseline::RebaselineConfig,
) -> std::io::Result<()> {
    use std::io::Write;
    if let Some(cfg) = hook {
        webhook::spawn_worker(state.clone(), cfg)?;
    }
    rebaseline::spawn_worker(state.clone(), rebase);
    let listener = tokio::net::TcpListener::bind(listen).await?;
    let addr = listener.local_addr()?;
    {
        let mut out = std::io::stdout().lock();
        writeln!(out, "listening on http://{addr}")?;
        out.flush()?;
    }
    tracing::info!(%addr, open = state.inner.open, "serving");
    let grace = state.inner.limits.request_timeout + Duration::from_secs(5);
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let signal = async move {
        shutdown_signal().await;
        tracing::info!("shutting down: finishing requests in flight");
        let _ = tx.send(());
    };
    let server = axum::serve(listener, app(state)).with_graceful_shutdown(signal);
    let bound = async move {
        let _ = rx.await;
        tokio::time::sleep(grace).await;
    };
    tokio::select! {
        r = server => r,
        () = bound => {
            tracing::warn!("requests still in flight after {} s; stopping", grace.as_secs());
            Ok(())
        }
    }
}

/// Helper for the OpenAPI generator and tests: the route table as (method, path) pairs.
pub fn route_list() -> Vec<(String, String)> {
    ROUTES.iter().map(|r| (r.method.to_string(), r.path.to_owned())).collect()
}

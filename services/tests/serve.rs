//! End-to-end tests of `telltale serve` and `telltale keys` against the real
//! binary on a loopback port: every endpoint, problem documents for bad
//! input, key scopes, the same verdict over HTTP as from `telltale scan`,
//! and no acknowledged record lost when the server is killed.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use serde_json::{Value, json};
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Child, Stdio};
use std::sync::OnceLock;
use telltale_pipelines::io::{AssetHistory, read_suspicions_from};
use telltale_pipelines::io::{FileFormat, HistoryReader, HistoryWriter, HistoryWriterOptions};
use telltale_pipelines::record::Suspicion;
use telltale_pipelines::time::{format_time, from_millis, parse_time};

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

/// The small demo fitted once for the whole file: (dir kept alive, history, store).
struct Fixture {
    _dir: tempfile::TempDir,
    history: PathBuf,
    store: PathBuf,
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap();
        let demo = dir.path().join("demo");
        telltale()
            .args(["-q", "demo", "--preset", "small", "--generate-only", "--out"])
            .arg(&demo)
            .assert()
            .success();
        let history = demo.join("history.parquet");
        let store = dir.path().join("store");
        telltale()
            .args(["-q", "fit", "-j2", "--until", "2026-05-06", "--history"])
            .arg(&history)
            .arg("--fleet")
            .arg(demo.join("fleet.toml"))
            .arg("--store")
            .arg(&store)
            .assert()
            .success();
        Fixture { _dir: dir, history, store }
    })
}

/// A running server; killed (SIGKILL) when dropped.
struct Server {
    child: Child,
    base: String,
}

impl Server {
    fn start(store: &Path, db: &Path, extra: &[&str]) -> Server {
        let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("telltale"))
            .args(["-q", "serve", "--listen", "127.0.0.1:0", "--store"])
            .arg(store)
            .arg("--db")
            .arg(db)
            .args(extra)
            .stdout(Stdio::piped())
            .stderr(Stdio::inherit())
            .spawn()
            .unwrap();
        let mut line = String::new();
        BufReader::new(child.stdout.take().unwrap()).read_line(&mut line).unwrap();
        let base = line
            .trim()
            .strip_prefix("listening on ")
            .unwrap_or_else(|| panic!("no address line, got {line:?}"))
            .to_owned();
        Server { child, base }
    }

    fn url(&self, path: &str) -> String {
        format!("{}{path}", self.base)
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn agent() -> ureq::Agent {
    ureq::Agent::config_builder().http_status_as_error(false).build().into()
}

/// (status, content type, body as JSON or as a string).
struct Resp {
    status: u16,
    media: String,
    body: Value,
    text: String,
}

fn finish(r: Result<ureq::http::Response<ureq::Body>, ureq::Error>) -> Resp {
    let mut r = r.unwrap();
    let status = r.status().as_u16();
    let media =
        r.headers().get("content-type").map(|v| v.to_str().unwrap().to_owned()).unwrap_or_default();
    let text = r.body_mut().with_config().limit(256 << 20).read_to_string().unwrap();
    let body = serde_json::from_str(&text).unwrap_or(Value::Null);
    Resp { status, media, body, text }
}

fn get(url: &str, key: Option<&str>) -> Resp {
    let mut req = agent().get(url);
    if let Some(k) = key {
        req = req.header("Authorization", &format!("Bearer {k}"));
    }
    finish(req.call())
}

fn post_raw(
    url: &str,
    key: Option<&str>,
    media: &str,
    body: &[u8],
    extra: &[(&str, &str)],
) -> Resp {
    let mut req = agent().post(url).header("Content-Type", media);
    if let Some(k) = key {
        req = req.header("Authorization", &format!("Bearer {k}"));
    }
    for (h, v) in extra {
        req = req.header(*h, *v);
    }
    finish(req.send(body))
}

fn post(url: &str, key: Option<&str>, body: &Value) -> Resp {
    post_raw(url, key, "application/json", body.to_string().as_bytes(), &[])
}

/// A 4xx problem document naming `field` (when given).
fn assert_problem(r: &Resp, status: u16, field: Option<&str>) {
    assert_eq!(r.status, status, "{}", r.text);
    assert_eq!(r.media, "application/problem+json", "{}", r.text);
    for k in ["type", "title", "status", "detail", "instance"] {
        assert!(!r.body[k].is_null(), "problem without {k}: {}", r.text);
    }
    assert_eq!(r.body["status"], status);
    assert!(r.body["instance"].as_str().unwrap().starts_with('/'), "{}", r.text);
    if let Some(f) = field {
        assert_eq!(r.body["field"], f, "{}", r.text);
    }
}

fn add_key(db: &Path, scope: &str) -> String {
    let out = telltale()
        .args(["keys", "add", "--scope", scope, "--name", &format!("test-{scope}"), "--db"])
        .arg(db)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    String::from_utf8(out).unwrap().trim().to_owned()
}

/// A new database `DIR/t.db` holding one write key; returns its path and the key.
fn db_with_write_key(dir: &Path) -> (PathBuf, String) {
    let db = dir.join("t.db");
    let key = add_key(&db, "write");
    (db, key)
}

/// The `id`s of a JSON array of suspicions, in order.
fn ids_of(items: &Value) -> Vec<String> {
    items.as_array().unwrap().iter().map(|s| s["id"].as_str().unwrap().to_owned()).collect()
}

fn ms(s: &str) -> i64 {
    parse_time(s).unwrap().timestamp_millis()
}

/// One asset's history in `[from_ms, to_ms)`.
fn asset_history(history: &Path, asset: &str, from_ms: i64, to_ms: i64) -> AssetHistory {
    let mut found = None;
    HistoryReader::try_new(history)
        .unwrap()
        .with_time_range(from_ms, to_ms)
        .for_each_asset(|h| {
            if h.asset == asset {
                found = Some(h);
            }
            Ok::<(), telltale_pipelines::Error>(())
        })
        .unwrap();
    found.unwrap()
}

/// The window request for `h` over `[from, to)` (null for missing readings).
fn window_json(h: &AssetHistory, from: &str, to: &str) -> Value {
    let mut readings = Vec::new();
    for s in &h.sensors {
        assert!(s.good.iter().all(|g| *g), "the demo has no quality column");
        for (t, v) in s.ts_ms.iter().zip(&s.value) {
            let value = if v.is_nan() { Value::Null } else { json!(v) };
            readings.push(
                json!({"sensor": s.sensor, "ts": format_time(from_millis(*t)), "value": value}),
            );
        }
    }
    json!({"asset": h.asset, "from": from, "to": to, "readings": readings})
}

const FROM: &str = "2026-05-06T00:00:00Z";
const TO: &str = "2026-05-09T00:00:00Z";
const WARMUP_MS: i64 = 3 * 86_400_000;

/// An asset the batch scan of the whole fleet suspects of a sensor fault
/// (a verdict that does not hang on peers), with its window request.
fn suspect_window() -> (String, AssetHistory, Value) {
    static W: OnceLock<(String, AssetHistory, Value)> = OnceLock::new();
    W.get_or_init(find_suspect_window).clone()
}

fn find_suspect_window() -> (String, AssetHistory, Value) {
    let f = fixture();
    let asset = fleet_scan()
        .iter()
        .find(|s| s.class.as_str() == "sensor_fault")
        .expect("the small demo has a sensor fault in the span")
        .asset
        .clone();
    let h = asset_history(&f.history, &asset, ms(FROM) - WARMUP_MS, ms(TO));
    let body = window_json(&h, FROM, TO);
    (asset, h, body)
}

/// The fleet's batch scan of `[FROM, TO)`: every suspicion, ranked.
fn fleet_scan() -> Vec<Suspicion> {
    let f = fixture();
    let out = telltale()
        .args(["-q", "scan", "-j2", "--from", FROM, "--to", TO, "--history"])
        .arg(&f.history)
        .arg("--store")
        .arg(&f.store)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    read_suspicions_from(&out[..], FileFormat::Jsonl, Path::new("<stdout>")).unwrap()
}

#[test]
fn a_window_scored_over_http_gets_the_verdicts_of_the_batch_scan() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, key) = db_with_write_key(dir.path());
    let srv = Server::start(&f.store, &db, &[]);
    // every asset the fleet scan suspects
    let mut assets: Vec<String> = fleet_scan().into_iter().map(|s| s.asset).collect();
    assets.sort();
    assets.dedup();
    let mut compared = Vec::new();
    for asset in &assets {
        let h = asset_history(&f.history, asset, ms(FROM) - WARMUP_MS, ms(TO));
        // the same readings as a history file of that one asset, scanned in batch
        let file = dir.path().join(format!("{asset}.parquet"));
        let mut w = HistoryWriter::try_new(&file, HistoryWriterOptions::default()).unwrap();
        for s in &h.sensors {
            w.write_series(asset, &s.sensor, &s.ts_ms, &s.value).unwrap();
        }
        w.close().unwrap();
        let out = telltale()
            .args(["-q", "scan", "-j1", "--from", FROM, "--to", TO, "--history"])
            .arg(&file)
            .arg("--store")
            .arg(&f.store)
            .assert()
            .success()
            .get_output()
            .stdout
            .clone();
        let batch: Vec<Suspicion> =
            read_suspicions_from(&out[..], FileFormat::Jsonl, Path::new("<stdout>")).unwrap();
        // ... and over HTTP
        let body = window_json(&h, FROM, TO);
        let r = post(&srv.url("/v1/windows/score"), Some(&key), &body);
        assert_eq!(r.status, 200, "{}", r.text);
        assert_eq!((r.body["from"].as_str(), r.body["to"].as_str()), (Some(FROM), Some(TO)));
        assert_eq!(r.body["warnings"], json!([]), "{asset}");
        let served: Vec<Suspicion> = r.body["suspicions"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| serde_json::from_value(v.clone()).unwrap())
            .collect();
        let key_of = |s: &Suspicion| {
            (s.rank, s.id.clone(), s.class, s.mode, s.sensor.clone(), s.onset, s.detected)
        };
        assert_eq!(
            served.iter().map(key_of).collect::<Vec<_>>(),
            batch.iter().map(key_of).collect::<Vec<_>>(),
            "{asset}"
        );
        for (a, b) in served.iter().zip(&batch) {
            // same code, same inputs: equal up to the round trip of the printed floats
            assert!(
                (a.score - b.score).abs() <= 1e-12,
                "{} score {} vs {}",
                a.id,
                a.score,
                b.score
            );
            assert!((a.magnitude - b.magnitude).abs() <= 1e-9 * (1.0 + b.magnitude.abs()));
            assert_eq!(a.evidence.len(), b.evidence.len());
        }
        compared.extend(batch.iter().map(|s| (s.class, s.mode)));
        // re-scoring the same window updates the episodes, never duplicates them
        let again = post(&srv.url("/v1/windows/score"), Some(&key), &body);
        assert_eq!(again.status, 200);
        let list = get(&srv.url(&format!("/v1/suspicions?asset={asset}&limit=500")), Some(&key));
        assert_eq!(list.status, 200, "{}", list.text);
        let items = list.body["items"].as_array().unwrap();
        assert_eq!(items.len(), batch.len(), "{asset}");
        assert!(items.iter().all(|s| s["times_scored"] == 2 && s["status"] == "open"));
    }
    eprintln!("compared {} suspicions on {} assets: {compared:?}", compared.len(), assets.len());
    let mut classes: Vec<_> = compared.iter().map(|c| c.0).collect();
    classes.sort_by_key(|c| c.as_str());
    classes.dedup();
    assert!(compared.len() >= 5 && classes.len() >= 2, "too little to compare: {compared:?}");
}

#[test]
fn every_endpoint_answers_and_feedback_is_idempotent() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, write) = db_with_write_key(dir.path());
    let read = add_key(&db, "read");
    let srv = Server::start(&f.store, &db, &[]);
    let (asset, _, body) = suspect_window();

    let h = get(&srv.url("/healthz"), None);
    assert_eq!((h.status, h.body["status"].as_str()), (200, Some("ok")));

    let assets = get(&srv.url("/v1/assets"), Some(&read));
    assert_eq!(assets.status, 200);
    let ids: Vec<&str> = assets.body["items"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["asset"].as_str().unwrap())
        .collect();
    assert_eq!(ids.len(), 24, "the small demo has 24 pumps");
    assert!(ids.contains(&asset.as_str()));
    let b = get(&srv.url(&format!("/v1/assets/{asset}/baseline")), Some(&read));
    assert_eq!((b.status, b.body["asset"].as_str()), (200, Some(asset.as_str())));
    assert!(b.body["sensors"].as_array().is_some_and(|s| !s.is_empty()));
    assert_problem(&get(&srv.url("/v1/assets/no-such-pump/baseline"), Some(&read)), 404, None);

    let scored = post(&srv.url("/v1/windows/score"), Some(&write), &body);
    assert_eq!(scored.status, 200, "{}", scored.text);
    let first = scored.body["suspicions"][0].clone();
    let id = first["id"].as_str().unwrap().to_owned();

    // list: ranked, filtered, paged with a cursor
    let all = get(&srv.url("/v1/suspicions?limit=500"), Some(&read));
    let n = all.body["items"].as_array().unwrap().len();
    assert!(n >= 1);
    let mut paged = Vec::new();
    let mut url = srv.url("/v1/suspicions?limit=1");
    loop {
        let p = get(&url, Some(&read));
        assert_eq!(p.status, 200, "{}", p.text);
        for it in p.body["items"].as_array().unwrap() {
            paged.push((it["id"].as_str().unwrap().to_owned(), it["rank"].as_u64().unwrap()));
        }
        match p.body["next_cursor"].as_str() {
            Some(c) => url = srv.url(&format!("/v1/suspicions?limit=1&cursor={c}")),
            None => break,
        }
    }
    let want: Vec<(String, u64)> = all.body["items"]
        .as_array()
        .unwrap()
        .iter()
        .map(|it| (it["id"].as_str().unwrap().to_owned(), it["rank"].as_u64().unwrap()))
        .collect();
    assert_eq!(paged, want);
    assert_eq!(want.iter().map(|w| w.1).collect::<Vec<_>>(), (1..=n as u64).collect::<Vec<_>>());
    let cls = first["class"].as_str().unwrap();
    let by_class = get(&srv.url(&format!("/v1/suspicions?class={cls}&limit=500")), Some(&read));
    assert!(by_class.body["items"].as_array().unwrap().iter().all(|s| s["class"] == cls));
    let none = get(&srv.url("/v1/suspicions?from=2030-01-01"), Some(&read));
    assert_eq!(none.body["items"], json!([]));

    // feedback: new, repeated (no new row), keyed, conflicting key
    let fb_url = srv.url(&format!("/v1/suspicions/{id}/feedback"));
    let fb =
        json!({"verdict": "confirmed", "note": "transmitter replaced", "work_order": "WO-4411"});
    let r1 = post(&fb_url, Some(&write), &fb);
    assert_eq!(r1.status, 201, "{}", r1.text);
    assert_eq!(r1.body["replayed"], false);
    let r2 = post(&fb_url, Some(&write), &fb);
    assert_eq!((r2.status, &r2.body["replayed"]), (200, &json!(true)));
    assert_eq!(r2.body["feedback"]["seq"], r1.body["feedback"]["seq"]);
    let k = [("Idempotency-Key", "wo-4411-close")];
    let d = json!({"verdict": "dismissed", "note": "duplicate of WO-4400"});
    let r3 = post_raw(&fb_url, Some(&write), "application/json", d.to_string().as_bytes(), &k);
    assert_eq!(r3.status, 201, "{}", r3.text);
    let r4 = post_raw(&fb_url, Some(&write), "application/json", d.to_string().as_bytes(), &k);
    assert_eq!(r4.status, 200);
    let other = json!({"verdict": "dismissed", "note": "something else"});
    let r5 = post_raw(&fb_url, Some(&write), "application/json", other.to_string().as_bytes(), &k);
    assert_problem(&r5, 409, None);
    let one = get(&srv.url(&format!("/v1/suspicions/{id}")), Some(&read));
    assert_eq!(one.status, 200);
    assert_eq!(one.body["status"], "dismissed");
    let trail = one.body["feedback"].as_array().unwrap();
    assert_eq!(trail.len(), 2, "{}", one.text);
    assert_eq!(trail[0]["work_order"], "WO-4411");
    assert!(trail.iter().all(|t| t["key_id"].as_str().is_some_and(|k| write.contains(k))));
    assert!(!one.body["evidence"].as_array().unwrap().is_empty());
    let dismissed = get(&srv.url("/v1/suspicions?status=dismissed"), Some(&read));
    assert_eq!(dismissed.body["items"].as_array().unwrap().len(), 1);

    // metrics: request counts by route pattern, windows and suspicions by class
    let m = get(&srv.url("/metrics"), None);
    assert_eq!(m.status, 200);
    assert!(m.media.starts_with("text/plain"));
    assert!(m.text.contains(
        "telltale_http_requests_total{route=\"/v1/windows/score\",method=\"POST\",status=\"200\"} 1"
    ), "{}", m.text);
    assert!(m.text.contains("telltale_http_requests_total{route=\"/v1/suspicions/{id}/feedback\",method=\"POST\",status=\"409\"} 1"));
    assert!(m.text.contains("telltale_windows_scored_total 1\n"));
    assert!(m.text.contains(&format!("telltale_window_suspicions_total{{class=\"{cls}\"}}")));
    assert!(m.text.contains(
        "telltale_http_request_duration_seconds_bucket{route=\"/v1/assets\",le=\"+Inf\"} 1"
    ));

    // the OpenAPI document: 3.1, and every documented operation is served
    let doc = get(&srv.url("/openapi.json"), None);
    assert_eq!(doc.body["openapi"], "3.1.0");
    let mut ops = 0;
    for (path, methods) in doc.body["paths"].as_object().unwrap() {
        let p = path.replace("{id}", if path.contains("assets") { &asset } else { &id });
        for m in methods.as_object().unwrap().keys() {
            ops += 1;
            let r = match m.as_str() {
                "get" => get(&srv.url(&p), Some(&write)),
                "post" => post(&srv.url(&p), Some(&write), &json!({})),
                other => panic!("unexpected method {other}"),
            };
            assert!(r.status != 404 && r.status != 405, "{m} {p}: {}", r.status);
        }
    }
    assert_eq!(ops, 10);
    // and a route it does not document is a problem 404
    assert_problem(&get(&srv.url("/v1/nothing"), Some(&read)), 404, None);
    assert_problem(&post(&srv.url("/v1/assets"), Some(&write), &json!({})), 405, None);
}

#[test]
fn keys_are_required_and_scoped() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, write) = db_with_write_key(dir.path());
    let read = add_key(&db, "read");
    let srv = Server::start(&f.store, &db, &[]);
    let score = srv.url("/v1/windows/score");
    let fb = srv.url("/v1/suspicions/0123456789abcdef/feedback");
    let w = json!({"asset": "x", "readings": [{"sensor": "s", "ts": FROM, "value": 1.0}]});
    for url in [&score, &fb] {
        assert_problem(&post(url, None, &w), 401, None);
        assert_problem(&post(url, Some("tt_0000_wrong"), &w), 401, None);
        assert_problem(&post(url, Some(&read), &w), 403, None);
    }
    assert_problem(&get(&srv.url("/v1/suspicions"), None), 401, None);
    assert_eq!(get(&srv.url("/v1/suspicions"), Some(&read)).status, 200);
    // the scheme name is case-insensitive
    let lower = agent()
        .get(&srv.url("/v1/suspicions"))
        .header("Authorization", &format!("bearer {read}"))
        .call();
    assert_eq!(finish(lower).status, 200);
    // a write key passes the check (and meets the unknown asset)
    assert_problem(&post(&score, Some(&write), &w), 404, None);
    // revoked keys stop working at once, on the running server
    let id = read.split('_').nth(1).unwrap();
    telltale().args(["keys", "revoke", id, "--db"]).arg(&db).assert().success();
    assert_problem(&get(&srv.url("/v1/suspicions"), Some(&read)), 401, None);
    let list = telltale().args(["keys", "list", "--db"]).arg(&db).assert().success();
    let text = String::from_utf8(list.get_output().stdout.clone()).unwrap();
    assert_eq!(text.lines().count(), 3, "{text}");
    assert!(!text.contains(&write[12..]), "keys list must not print secrets");
    telltale().args(["keys", "revoke", id, "--db"]).arg(&db).assert().code(2);
}

#[test]
fn the_service_refuses_to_start_open_to_the_network_or_without_keys() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("t.db");
    telltale()
        .args(["serve", "--listen", "127.0.0.1:0", "--store"])
        .arg(&f.store)
        .arg("--db")
        .arg(&db)
        .assert()
        .code(2)
        .stderr(predicates::str::contains("keys add"));
    telltale()
        .args(["serve", "--open", "--listen", "0.0.0.0:0", "--store"])
        .arg(&f.store)
        .arg("--db")
        .arg(&db)
        .assert()
        .code(2)
        .stderr(predicates::str::contains("loopback"));
    // --open on loopback serves without a key
    let srv = Server::start(&f.store, &db, &["--open"]);
    assert_eq!(get(&srv.url("/v1/suspicions"), None).status, 200);
}

#[test]
fn bad_windows_get_problem_documents_naming_the_field() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, key) = db_with_write_key(dir.path());
    let srv = Server::start(&f.store, &db, &["--max-readings", "2000", "--max-body-mib", "1"]);
    let url = srv.url("/v1/windows/score");
    let (asset, h, _) = suspect_window();
    let s0 = h.sensors[0].sensor.clone();
    let rd = |ts: &str, v: Value| json!({"sensor": s0, "ts": ts, "value": v});
    let win = |readings: Vec<Value>| json!({"asset": asset, "readings": readings});
    let k = Some(key.as_str());
    assert_problem(&post_raw(&url, k, "application/json", b"{not json", &[]), 400, Some("body"));
    assert_problem(&post_raw(&url, k, "text/csv", b"a,b", &[]), 415, None);
    let nan = win(vec![rd(FROM, json!("NaN"))]);
    assert_problem(&post(&url, k, &nan), 422, Some("readings[0].value"));
    let inf = post_raw(
        &url,
        k,
        "application/json",
        format!(
            r#"{{"asset":"{asset}","readings":[{{"sensor":"{s0}","ts":"{FROM}","value":1e999}}]}}"#
        )
        .as_bytes(),
        &[],
    );
    assert_problem(&inf, 400, Some("body"));
    let dup = win(vec![rd(FROM, json!(1.0)), rd(FROM, json!(2.0))]);
    assert_problem(&post(&url, k, &dup), 422, Some("readings[1].ts"));
    let back = win(vec![rd("2026-05-06T01:00:00Z", json!(1.0)), rd(FROM, json!(2.0))]);
    assert_problem(&post(&url, k, &back), 422, Some("readings[1].ts"));
    let badtime = win(vec![rd("06/05/2026 10:00", json!(1.0))]);
    assert_problem(&post(&url, k, &badtime), 422, Some("readings[0].ts"));
    let long = win(vec![rd(FROM, json!(1.0)), rd("2026-05-20T00:00:00Z", json!(1.0))]);
    assert_problem(&post(&url, k, &long), 422, Some("readings"));
    let many: Vec<Value> =
        (0..2001).map(|i| rd(&format_time(from_millis(ms(FROM) + i * 1000)), json!(1.0))).collect();
    assert_problem(&post(&url, k, &win(many)), 422, Some("readings"));
    let big = vec![b' '; 3 << 20];
    assert_problem(&post_raw(&url, k, "application/json", &big, &[]), 413, None);
    // unknown asset: 404 with the way to find the assets
    let unknown = json!({"asset": "no-such-pump", "readings": [rd(FROM, json!(1.0))]});
    let r = post(&url, k, &unknown);
    assert_problem(&r, 404, None);
    assert!(r.body["detail"].as_str().unwrap().contains("/v1/assets"), "{}", r.text);
    // unknown sensor: scored, with a warning
    let mut odd = win(vec![rd(FROM, json!(1.0))]);
    odd["readings"]
        .as_array_mut()
        .unwrap()
        .push(json!({"sensor": "made_up", "ts": FROM, "value": 3.0}));
    let r = post(&url, k, &odd);
    assert_eq!(r.status, 200, "{}", r.text);
    let warnings: Vec<&str> =
        r.body["warnings"].as_array().unwrap().iter().map(|w| w.as_str().unwrap()).collect();
    assert!(
        warnings.iter().any(|w| w.contains("\"made_up\"") && w.contains("not judged")),
        "{warnings:?}"
    );
    // feedback and listing checks
    let fb = srv.url("/v1/suspicions/0123456789abcdef/feedback");
    assert_problem(&post(&fb, k, &json!({"verdict": "confirmed", "note": "x"})), 404, None);
    assert_problem(&post(&fb, k, &json!({"verdict": "maybe", "note": "x"})), 422, Some("verdict"));
    assert_problem(&post(&fb, k, &json!({"verdict": "confirmed"})), 422, Some("note"));
    assert_problem(&get(&srv.url("/v1/suspicions?status=closed"), k), 422, Some("status"));
    assert_problem(&get(&srv.url("/v1/suspicions?limit=0"), k), 422, Some("limit"));
    assert_problem(&get(&srv.url("/v1/suspicions?cursor=zz"), k), 422, Some("cursor"));
    assert_problem(&get(&srv.url("/v1/suspicions?from=yesterday"), k), 422, Some("from"));
    assert_problem(&get(&srv.url("/v1/suspicions?sort=score"), k), 422, Some("sort"));
    assert_problem(&get(&srv.url("/v1/suspicions/none"), k), 404, None);
}

#[test]
fn acknowledged_records_survive_a_kill() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, key) = db_with_write_key(dir.path());
    let (_, _, body) = suspect_window();
    let mut srv = Server::start(&f.store, &db, &[]);
    let scored = post(&srv.url("/v1/windows/score"), Some(&key), &body);
    assert_eq!(scored.status, 200);
    let ids = ids_of(&scored.body["suspicions"]);
    assert!(!ids.is_empty());
    let fb = json!({"verdict": "process_change_accepted", "note": "new duty pump schedule", "work_order": "WO-77"});
    let r = post(&srv.url(&format!("/v1/suspicions/{}/feedback", ids[0])), Some(&key), &fb);
    assert_eq!(r.status, 201);
    // SIGKILL right after the acknowledgements: no shutdown, no flush
    srv.child.kill().unwrap();
    srv.child.wait().unwrap();
    let srv = Server::start(&f.store, &db, &[]);
    for id in &ids {
        let one = get(&srv.url(&format!("/v1/suspicions/{id}")), Some(&key));
        assert_eq!(one.status, 200, "{id} lost: {}", one.text);
    }
    let one = get(&srv.url(&format!("/v1/suspicions/{}", ids[0])), Some(&key));
    assert_eq!(one.body["status"], "process_change_accepted");
    assert_eq!(one.body["feedback"][0]["work_order"], "WO-77");
    assert_eq!(one.body["feedback"][0]["seq"], r.body["feedback"]["seq"]);
    // the re-baseline the acceptance asked for is kept too; without --history it waits, saying why
    assert_eq!(one.body["rebaseline"]["state"], "pending", "{}", one.text);
    wait_for("the worker's note", || {
        let one = get(&srv.url(&format!("/v1/suspicions/{}", ids[0])), Some(&key));
        one.body["rebaseline"]["detail"].as_str().unwrap().contains("--history")
    });
}

#[test]
fn sigterm_finishes_the_request_in_flight_and_exits_cleanly() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, key) = db_with_write_key(dir.path());
    let (_, _, body) = suspect_window();
    let mut srv = Server::start(&f.store, &db, &[]);
    // a request whose body is half sent when the signal arrives
    use std::io::{Read, Write};
    let text = body.to_string();
    let host = srv.base.trim_start_matches("http://").to_owned();
    let mut conn = std::net::TcpStream::connect(&host).unwrap();
    write!(
        conn,
        "POST /v1/windows/score HTTP/1.1\r\nHost: {host}\r\nAuthorization: Bearer {key}\r\n\
         Content-Type: application/json\r\nContent-Length: {}\r\nConnection: close\r\n\r\n",
        text.len()
    )
    .unwrap();
    let half = text.len() / 2;
    conn.write_all(&text.as_bytes()[..half]).unwrap();
    conn.flush().unwrap();
    std::thread::sleep(std::time::Duration::from_millis(300));
    let pid = srv.child.id().to_string();
    // the shell's own kill: no procps needed
    let sent = std::process::Command::new("sh")
        .args(["-c", &format!("kill -TERM {pid}")])
        .status()
        .unwrap();
    assert!(sent.success());
    std::thread::sleep(std::time::Duration::from_millis(300));
    assert!(srv.child.try_wait().unwrap().is_none(), "stopped with a request in flight");
    // new connections are no longer taken
    assert!(
        agent().get(&srv.url("/healthz")).call().is_err(),
        "a new request was served after SIGTERM"
    );
    conn.write_all(&text.as_bytes()[half..]).unwrap();
    let mut answer = String::new();
    conn.read_to_string(&mut answer).unwrap();
    assert!(answer.starts_with("HTTP/1.1 200"), "{}", &answer[..answer.len().min(300)]);
    assert!(answer.contains("\"suspicions\""));
    let status = srv.child.wait().unwrap();
    assert!(status.success(), "exit after SIGTERM: {status:?}");
}

/// `h` as an Arrow IPC stream of sensor (Utf8), ts (ms, UTC) and value, in
/// batches of `batch` rows; `nan_at` puts a NaN in that row.
fn arrow_stream(h: &AssetHistory, batch: usize, nan_at: Option<usize>) -> Vec<u8> {
    use arrow_array::{
        ArrayRef, Float64Array, RecordBatch, StringArray, TimestampMillisecondArray,
    };
    use arrow_schema::{DataType, Field, Schema, TimeUnit};
    use std::sync::Arc;
    let mut rows: Vec<(String, i64, Option<f64>)> = Vec::new();
    for s in &h.sensors {
        for (t, v) in s.ts_ms.iter().zip(&s.value) {
            rows.push((s.sensor.clone(), *t, (!v.is_nan()).then_some(*v)));
        }
    }
    if let Some(i) = nan_at {
        rows[i].2 = Some(f64::NAN);
    }
    let schema = Arc::new(Schema::new(vec![
        Field::new("sensor", DataType::Utf8, false),
        Field::new("ts", DataType::Timestamp(TimeUnit::Millisecond, Some("UTC".into())), false),
        Field::new("value", DataType::Float64, true),
    ]));
    let mut out = Vec::new();
    let mut w = arrow_ipc::writer::StreamWriter::try_new(&mut out, &schema).unwrap();
    for chunk in rows.chunks(batch) {
        let cols: Vec<ArrayRef> = vec![
            Arc::new(StringArray::from_iter_values(chunk.iter().map(|r| r.0.as_str()))),
            Arc::new(
                TimestampMillisecondArray::from_iter_values(chunk.iter().map(|r| r.1))
                    .with_timezone("UTC"),
            ),
            Arc::new(Float64Array::from_iter(chunk.iter().map(|r| r.2))),
        ];
        w.write(&RecordBatch::try_new(schema.clone(), cols).unwrap()).unwrap();
    }
    w.finish().unwrap();
    drop(w);
    out
}

#[test]
fn an_arrow_window_scores_like_the_same_json_window() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, key) = db_with_write_key(dir.path());
    let srv = Server::start(&f.store, &db, &[]);
    let (asset, h, body) = suspect_window();
    let k = Some(key.as_str());
    let json_r = post(&srv.url("/v1/windows/score"), k, &body);
    assert_eq!(json_r.status, 200, "{}", json_r.text);
    let url = srv.url(&format!("/v1/windows/score?asset={asset}&from={FROM}&to={TO}"));
    let media = "application/vnd.apache.arrow.stream";
    let arrow_r = post_raw(&url, k, media, &arrow_stream(&h, 1000, None), &[]);
    assert_eq!(arrow_r.status, 200, "{}", arrow_r.text);
    let pick = |r: &Resp| -> Vec<(String, String, String, f64)> {
        r.body["suspicions"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| {
                (
                    s["id"].as_str().unwrap().to_owned(),
                    s["class"].as_str().unwrap().to_owned(),
                    s["onset"].as_str().unwrap().to_owned(),
                    s["score"].as_f64().unwrap(),
                )
            })
            .collect()
    };
    assert!(!pick(&json_r).is_empty());
    assert_eq!(pick(&arrow_r), pick(&json_r));
    assert_eq!(arrow_r.body["readings"], json_r.body["readings"]);
    // bad streams: not Arrow, a NaN, no asset, a JSON window with query parameters
    assert_problem(&post_raw(&url, k, media, b"not arrow", &[]), 400, Some("body"));
    let r = post_raw(&url, k, media, &arrow_stream(&h, 1000, Some(1500)), &[]);
    assert_problem(&r, 422, Some("rows[1500].value"));
    let no_asset = srv.url("/v1/windows/score");
    assert_problem(
        &post_raw(&no_asset, k, media, &arrow_stream(&h, 1000, None), &[]),
        422,
        Some("asset"),
    );
    let json_q = srv.url(&format!("/v1/windows/score?asset={asset}"));
    assert_problem(&post(&json_q, k, &body), 422, Some("asset"));
}

/// One request the test receiver got: (status it answered, headers, body).
type Delivery = (u16, std::collections::HashMap<String, String>, String);

/// A minimal HTTP receiver on `listener`: answers 500 to the first
/// `fail_first` requests, 200 after, and logs every request.
fn receiver(
    listener: std::net::TcpListener,
    fail_first: usize,
) -> std::sync::Arc<std::sync::Mutex<Vec<Delivery>>> {
    use std::io::{Read, Write};
    let log = std::sync::Arc::new(std::sync::Mutex::new(Vec::<Delivery>::new()));
    let l2 = log.clone();
    std::thread::spawn(move || {
        for stream in listener.incoming() {
            let Ok(mut s) = stream else { continue };
            let mut buf = Vec::new();
            let mut chunk = [0u8; 4096];
            let head_end = loop {
                let n = s.read(&mut chunk).unwrap_or(0);
                if n == 0 {
                    break None;
                }
                buf.extend_from_slice(&chunk[..n]);
                if let Some(i) = buf.windows(4).position(|w| w == b"\r\n\r\n") {
                    break Some(i + 4);
                }
            };
            let Some(head_end) = head_end else { continue };
            let head = String::from_utf8_lossy(&buf[..head_end]).to_string();
            let headers: std::collections::HashMap<String, String> = head
                .lines()
                .skip(1)
                .filter_map(|l| l.split_once(':'))
                .map(|(k, v)| (k.trim().to_ascii_lowercase(), v.trim().to_owned()))
                .collect();
            let len: usize =
                headers.get("content-length").and_then(|v| v.parse().ok()).unwrap_or(0);
            while buf.len() < head_end + len {
                let n = s.read(&mut chunk).unwrap_or(0);
                if n == 0 {
                    break;
                }
                buf.extend_from_slice(&chunk[..n]);
            }
            let body = String::from_utf8_lossy(&buf[head_end..]).to_string();
            let mut log = l2.lock().unwrap();
            let status = if log.len() < fail_first { 500 } else { 200 };
            log.push((status, headers, body));
            drop(log);
            let _ =
                write!(s, "HTTP/1.1 {status} X\r\nContent-Length: 0\r\nConnection: close\r\n\r\n");
        }
    });
    log
}

fn wait_for(what: &str, mut done: impl FnMut() -> bool) {
    let t0 = std::time::Instant::now();
    while !done() {
        assert!(t0.elapsed() < std::time::Duration::from_secs(30), "timed out waiting for {what}");
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
}

#[test]
fn webhook_deliveries_are_signed_retried_and_neither_lost_nor_repeated_across_restarts() {
    use hmac::{Hmac, Mac};
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let (db, key) = db_with_write_key(dir.path());
    let secret = "pump-station-7f3a9c-shared";
    let secret_file = dir.path().join("hook.secret");
    std::fs::write(&secret_file, format!("{secret}\n")).unwrap();
    // the receiver's port, not listening yet: the first deliveries fail
    let port = std::net::TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port();
    let url = format!("http://127.0.0.1:{port}/hooks/telltale");
    let sf = secret_file.to_str().unwrap().to_owned();
    let args = [
        "--webhook-url",
        url.as_str(),
        "--webhook-secret-file",
        sf.as_str(),
        "--webhook-min-score",
        "0",
        "--webhook-retry-ms",
        "100",
    ];
    let mut srv = Server::start(&f.store, &db, &args);
    let (_, _, body) = suspect_window();
    let r = post(&srv.url("/v1/windows/score"), Some(&key), &body);
    assert_eq!(r.status, 200);
    let mut ids = ids_of(&r.body["suspicions"]);
    ids.sort();
    assert!(!ids.is_empty());
    // killed while the receiver is down: the notifications wait in the outbox
    std::thread::sleep(std::time::Duration::from_millis(300));
    srv.child.kill().unwrap();
    srv.child.wait().unwrap();
    let log = receiver(std::net::TcpListener::bind(("127.0.0.1", port)).unwrap(), 1);
    let srv = Server::start(&f.store, &db, &args);
    let ok = |log: &std::sync::Mutex<Vec<Delivery>>| {
        log.lock().unwrap().iter().filter(|d| d.0 == 200).count()
    };
    wait_for("every delivery", || ok(&log) >= ids.len());
    let got = log.lock().unwrap().clone();
    // the first answer was a 500: that delivery was retried with the same key
    assert_eq!(got[0].0, 500);
    let first_key = &got[0].1["idempotency-key"];
    assert!(got[1..].iter().any(|d| d.0 == 200 && &d.1["idempotency-key"] == first_key));
    let mut delivered: Vec<String> = Vec::new();
    for (status, h, b) in &got {
        // the signature checked with an independent HMAC implementation (the hmac crate)
        let mut mac = Hmac::<sha2::Sha256>::new_from_slice(secret.as_bytes()).unwrap();
        mac.update(format!("{}.{b}", h["x-telltale-timestamp"]).as_bytes());
        let want: String = mac.finalize().into_bytes().iter().map(|x| format!("{x:02x}")).collect();
        assert_eq!(h["x-telltale-signature"], format!("sha256={want}"));
        assert_eq!(h["content-type"], "application/json");
        let v: Value = serde_json::from_str(b).unwrap();
        assert_eq!(v["event"], "new");
        assert_eq!(v["idempotency_key"].as_str(), Some(h["idempotency-key"].as_str()));
        assert_eq!(h["idempotency-key"], format!("{}:new", v["suspicion"]["id"].as_str().unwrap()));
        if *status == 200 {
            delivered.push(v["suspicion"]["id"].as_str().unwrap().to_owned());
        }
    }
    delivered.sort();
    assert_eq!(delivered, ids, "each suspicion delivered exactly once");
    let m = get(&srv.url("/metrics"), None);
    assert!(
        m.text.contains(&format!("telltale_webhook_outbox{{state=\"delivered\"}} {}", ids.len()))
    );
    // re-scoring the same window notifies nothing new; a restart re-sends nothing
    let again = post(&srv.url("/v1/windows/score"), Some(&key), &body);
    assert_eq!(again.status, 200);
    drop(srv);
    let _srv = Server::start(&f.store, &db, &args);
    std::thread::sleep(std::time::Duration::from_millis(1500));
    assert_eq!(log.lock().unwrap().len(), got.len(), "nothing sent twice");
}

/// A copy of the fixture's store that a test may change.
fn store_copy(dir: &Path) -> PathBuf {
    let to = dir.join("store");
    let from = &fixture().store;
    for e in walk(from) {
        let rel = e.strip_prefix(from).unwrap();
        let dst = to.join(rel);
        std::fs::create_dir_all(dst.parent().unwrap()).unwrap();
        std::fs::copy(&e, &dst).unwrap();
    }
    to
}

fn walk(d: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(d).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() { out.extend(walk(&p)) } else { out.push(p) }
    }
    out
}

/// Accepts `pick` (found in the HTTP result of scoring `asset` over
/// [FROM, TO)) as a process change and waits for its re-baseline; returns
/// the suspicion, the re-baseline row and the suspicions of the window from
/// its onset on (`[onset, TO)`, readings from the onset only: the span the
/// re-baseline learns from) scored before and after.
fn accept_and_rebaseline(
    srv: &Server,
    key: &str,
    asset: &str,
    pick: impl Fn(&Value) -> bool,
) -> (Value, Value, Vec<Value>, Vec<Value>) {
    let f = fixture();
    let h = asset_history(&f.history, asset, ms(FROM) - WARMUP_MS, ms(TO));
    let r = post(&srv.url("/v1/windows/score"), Some(key), &window_json(&h, FROM, TO));
    assert_eq!(r.status, 200, "{}", r.text);
    let s = r.body["suspicions"].as_array().unwrap().iter().find(|s| pick(s)).cloned();
    let s = s.unwrap_or_else(|| panic!("{asset}: no suspicion to accept in {}", r.text));
    let onset = s["onset"].as_str().unwrap().to_owned();
    let later = asset_history(&f.history, asset, ms(&onset), ms(TO));
    let score_later = || {
        let r = post(&srv.url("/v1/windows/score"), Some(key), &window_json(&later, &onset, TO));
        assert_eq!(r.status, 200, "{}", r.text);
        r.body["suspicions"].as_array().unwrap().clone()
    };
    let before = score_later();
    let id = s["id"].as_str().unwrap();
    let fb = json!({"verdict": "process_change_accepted", "note": "new duty point after the valve work", "work_order": "WO-310"});
    let r = post(&srv.url(&format!("/v1/suspicions/{id}/feedback")), Some(key), &fb);
    assert_eq!(r.status, 201, "{}", r.text);
    assert_eq!(r.body["rebaseline"]["suspicion_id"], id, "{}", r.text);
    assert_eq!(r.body["rebaseline"]["onset"], s["onset"]);
    let mut row = Value::Null;
    let t0 = std::time::Instant::now();
    while t0.elapsed() < std::time::Duration::from_secs(180) {
        row = get(&srv.url(&format!("/v1/suspicions/{id}")), Some(key)).body["rebaseline"].clone();
        if row["state"] != "pending" {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(200));
    }
    assert_eq!(row["state"], "done", "{row}");
    (s, row, before, score_later())
}

#[test]
fn accepting_a_process_change_re_baselines_the_sensor_or_asset_from_its_onset() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let store = store_copy(dir.path());
    let (db, key) = db_with_write_key(dir.path());
    let hist = f.history.to_str().unwrap();
    let srv = Server::start(&store, &db, &["--history", hist, "--rebaseline-retry-s", "1"]);
    let scan = fleet_scan();
    let baseline_of = |asset: &str, version: Option<i64>| {
        let q = version.map(|v| format!("?version={v}")).unwrap_or_default();
        let r = get(&srv.url(&format!("/v1/assets/{asset}/baseline{q}")), Some(&key));
        assert_eq!(r.status, 200, "{}", r.text);
        r.body
    };

    // 1. one condition sensor: a bias the reviewers judge a real change of the discharge
    let bias = scan
        .iter()
        .find(|s| s.mode.as_str() == "bias" && s.sensor.as_deref() == Some("discharge_pressure"))
        .expect("the small demo has a discharge-pressure bias");
    let asset = bias.asset.clone();
    let original: Value = serde_json::from_slice(
        &std::fs::read(store.join("baselines").join(format!("{asset}.json"))).unwrap(),
    )
    .unwrap();
    // before any re-baseline the fitted file is version 1, recorded when first asked for
    let v = get(&srv.url(&format!("/v1/assets/{asset}/baselines")), Some(&key));
    assert_eq!(v.status, 200, "{}", v.text);
    assert_eq!(
        (v.body["in_store"].as_i64(), v.body["items"].as_array().unwrap().len()),
        (Some(1), 1)
    );
    let (s, row, before, after) =
        accept_and_rebaseline(&srv, &key, &asset, |s| s["id"] == bias.id.as_str());
    assert_eq!(row["version"], 2, "{row}");
    let detail = row["detail"].as_str().unwrap();
    assert!(detail.starts_with("sensor discharge_pressure re-learnt from"), "{detail}");
    let on_sensor = |v: &[Value]| {
        v.iter()
            .filter(|x| x["sensor"] == "discharge_pressure" && x["class"] == "sensor_fault")
            .count()
    };
    assert!(on_sensor(&before) >= 1, "the window from the onset shows the bias before: {before:?}");
    eprintln!("{asset}: {detail}");
    assert_eq!(on_sensor(&after), 0, "still flagged after the re-baseline: {after:?}");
    // the versions: the fitted one, then the re-baseline from the onset
    let v = get(&srv.url(&format!("/v1/assets/{asset}/baselines")), Some(&key));
    assert_eq!(v.status, 200, "{}", v.text);
    let items = v.body["items"].as_array().unwrap();
    assert_eq!(items.len(), 2, "{}", v.text);
    assert_eq!((items[0]["version"].as_i64(), items[0]["reason"].as_str()), (Some(1), Some("fit")));
    assert_eq!(items[1]["reason"], "process_change_accepted");
    assert_eq!(items[1]["suspicion_id"], s["id"]);
    assert_eq!(items[1]["sensor"], "discharge_pressure");
    assert_eq!(items[1]["from"], s["onset"]);
    assert_eq!(v.body["in_store"], 2);
    // version 1 is the fitted file; the new one differs from it in that sensor only
    assert_eq!(baseline_of(&asset, Some(1)), original);
    let now = baseline_of(&asset, None);
    assert_eq!(now, baseline_of(&asset, Some(2)));
    let pos = original["sensors"]
        .as_array()
        .unwrap()
        .iter()
        .position(|x| x["id"] == "discharge_pressure")
        .unwrap();
    let per = |b: &Value| b["baseline"]["sensor_baselines"].as_array().unwrap().clone();
    let (old, new) = (per(&original), per(&now));
    for j in 0..old.len() {
        if j == pos {
            assert_ne!(old[j], new[j], "the accepted sensor was not re-learnt");
        } else {
            assert_eq!(old[j], new[j], "sensor #{j} changed");
        }
    }
    assert_eq!(now["calibration"], original["calibration"]);
    assert_eq!(now["baseline"]["regimes"], original["baseline"]["regimes"]);
    let r = get(&srv.url(&format!("/v1/assets/{asset}/baseline?version=9")), Some(&key));
    assert_problem(&r, 404, None);
    let r = get(&srv.url(&format!("/v1/assets/{asset}/baseline?version=x")), Some(&key));
    assert_problem(&r, 422, Some("version"));

    // 2. an asset-wide suspicion: the whole asset is learnt again from the onset
    let wide_of = |s: &Value| s["sensor"].is_null() && s["mode"] != "common_mode";
    let mut assets: Vec<&str> =
        scan.iter().filter(|s| s.sensor.is_none()).map(|s| s.asset.as_str()).collect();
    assets.dedup();
    let asset = assets
        .into_iter()
        .find(|a| {
            let h = asset_history(&f.history, a, ms(FROM) - WARMUP_MS, ms(TO));
            let r = post(&srv.url("/v1/windows/score"), Some(&key), &window_json(&h, FROM, TO));
            r.body["suspicions"].as_array().unwrap().iter().any(wide_of)
        })
        .expect("the small demo has an asset-wide suspicion that does not hang on peers")
        .to_owned();
    let (wide, row, before, after) = accept_and_rebaseline(&srv, &key, &asset, wide_of);
    let detail = row["detail"].as_str().unwrap();
    assert!(detail.starts_with("whole asset re-learnt and re-calibrated from"), "{detail}");
    let same = |v: &[Value]| {
        v.iter().filter(|x| x["sensor"].is_null() && x["class"] == wide["class"]).count()
    };
    assert!(same(&before) >= 1, "the window from the onset shows it before: {before:?}");
    eprintln!("{asset}: {detail}");
    assert_eq!(
        same(&after),
        0,
        "still flagged after the re-baseline: {after:?} (before {before:?})"
    );
    let now = baseline_of(&asset, None);
    assert_eq!(now["fit_from"], wide["onset"]);
    assert_ne!(now["calibration"], Value::Null);
}

#[test]
fn json_logs_are_one_object_per_line_with_time_level_and_request_route() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("t.db");
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("telltale"))
        .args(["--log-format", "json", "-v", "serve", "--open", "--listen", "127.0.0.1:0"])
        .arg("--store")
        .arg(&f.store)
        .arg("--db")
        .arg(&db)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut line = String::new();
    BufReader::new(child.stdout.take().unwrap()).read_line(&mut line).unwrap();
    let base = line.trim().strip_prefix("listening on ").unwrap().to_owned();
    assert_eq!(get(&format!("{base}/healthz"), None).status, 200);
    let sent = std::process::Command::new("sh")
        .args(["-c", &format!("kill -TERM {}", child.id())])
        .status()
        .unwrap();
    assert!(sent.success());
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stderr).unwrap();
    let lines: Vec<Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not JSON ({e}): {l}")))
        .collect();
    for l in &lines {
        let t = l["timestamp"].as_str().unwrap_or_else(|| panic!("no timestamp: {l}"));
        assert!(chrono::DateTime::parse_from_rfc3339(t).is_ok(), "timestamp {t}");
        assert!(l["level"].is_string() && l["fields"]["message"].is_string(), "{l}");
    }
    let answered = lines
        .iter()
        .find(|l| l["fields"]["message"] == "answered")
        .unwrap_or_else(|| panic!("no request line in {text}"));
    assert_eq!(answered["span"]["route"], "/healthz", "{answered}");
    assert_eq!(answered["fields"]["status"], 200, "{answered}");
    assert!(lines.iter().any(|l| l["fields"]["message"] == "serving"), "{text}");
    // a failure is a JSON line too, with the error and the exit status
    let out = telltale()
        .args(["--log-format", "json", "serve", "--store", "/nonexistent-store"])
        .assert()
        .code(2)
        .get_output()
        .stderr
        .clone();
    let last: Value = serde_json::from_str(String::from_utf8(out).unwrap().trim()).unwrap();
    assert_eq!(last["level"], "ERROR");
    assert!(last["fields"]["error"].as_str().unwrap().contains("--store"), "{last}");
    assert_eq!(last["fields"]["exit_code"], 2);
}

#[test]
fn demo_serve_stores_the_scans_suspicions_and_serves_them() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("telltale"))
        .args(["-q", "demo", "--preset", "small", "--serve", "127.0.0.1:0", "--out"])
        .arg(&out)
        .stdout(Stdio::piped())
        .stderr(Stdio::inherit())
        .spawn()
        .unwrap();
    let mut lines = BufReader::new(child.stdout.take().unwrap()).lines();
    let base = loop {
        let l = lines.next().expect("demo ended before serving").unwrap();
        if let Some(b) = l.strip_prefix("listening on ") {
            break b.to_owned();
        }
    };
    let text = std::fs::read_to_string(out.join("suspicions.jsonl")).unwrap();
    let scanned: Vec<Value> = text.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    assert!(!scanned.is_empty());
    // open on loopback: no key needed; the ranking is the scan's
    let list = get(&format!("{base}/v1/suspicions?limit=500"), None);
    assert_eq!(list.status, 200, "{}", list.text);
    assert_eq!(ids_of(&list.body["items"]), ids_of(&Value::Array(scanned)));
    let h = get(&format!("{base}/healthz"), None);
    assert_eq!(h.body["open"], true);
    child.kill().unwrap();
    child.wait().unwrap();
    // serving needs the fitted store
    let err = telltale()
        .args(["demo", "--preset", "small", "--generate-only", "--serve", "127.0.0.1:0", "--out"])
        .arg(dir.path().join("other"))
        .assert()
        .code(2)
        .get_output()
        .stderr
        .clone();
    assert!(String::from_utf8(err).unwrap().contains("--generate-only"));
}

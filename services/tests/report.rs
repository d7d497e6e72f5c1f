//! End-to-end tests of `telltale report` through the binary, on the small
//! demo fleet (24 pumps, fit span ending 2026-05-06, report 2026-05-06 to
//! 2026-05-09): the page is self-contained, each panel's SVG holds its
//! series, the embedded chart data equals min/max per column and the peers'
//! median computed here from the raw readings, the Markdown lists the same
//! ids in the same order, backtest figures appear when asked, and headless
//! Chromium renders the page without console errors.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;
use telltale_pipelines::io::HistoryReader;

const FROM: &str = "2026-05-06";
const TO: &str = "2026-05-09";
const FROM_MS: i64 = 1_778_025_600_000; // 2026-05-06T00:00:00Z
const TO_MS: i64 = 1_778_284_800_000; // 2026-05-09T00:00:00Z

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

struct Fixture {
    _dir: tempfile::TempDir,
    history: PathBuf,
    fleet: PathBuf,
    store: PathBuf,
    html: String,
    md: String,
}

/// The demo fleet, fitted, and its report in both formats (made once).
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
        let (history, fleet, store) =
            (demo.join("history.parquet"), demo.join("fleet.toml"), dir.path().join("store"));
        telltale()
            .args(["-q", "fit", "-j2", "--until", FROM, "--history"])
            .arg(&history)
            .arg("--fleet")
            .arg(&fleet)
            .arg("--store")
            .arg(&store)
            .assert()
            .success();
        let html_path = dir.path().join("review.html");
        report_cmd(&history, &fleet, &store).arg("--out").arg(&html_path).assert().success();
        let md = report_cmd(&history, &fleet, &store)
            .args(["--format", "md"])
            .assert()
            .success()
            .get_output()
            .stdout
            .clone();
        Fixture {
            html: std::fs::read_to_string(&html_path).unwrap(),
            md: String::from_utf8(md).unwrap(),
            _dir: dir,
            history,
            fleet,
            store,
        }
    })
}

fn report_cmd(history: &Path, fleet: &Path, store: &Path) -> Command {
    let mut c = telltale();
    c.args(["-q", "report", "-j2", "--from", FROM, "--to", TO, "--history"])
        .arg(history)
        .arg("--fleet")
        .arg(fleet)
        .arg("--store")
        .arg(store);
    c
}

/// The embedded chart data.
fn chart_data(html: &str) -> Value {
    let tag = "<script type=\"application/json\" id=\"tt-chart-data\">";
    let start = html.find(tag).expect("chart data embedded") + tag.len();
    let end = start + html[start..].find("</script>").unwrap();
    serde_json::from_str(&html[start..end]).unwrap()
}

/// Each panel's HTML, by suspicion id, in page order.
fn panels(html: &str) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let mut rest = html;
    while let Some(i) = rest.find("<section class=\"tt-panel\"") {
        let after = &rest[i..];
        let end = after.find("</section>").unwrap();
        let body = &after[..end];
        let id_at = body.find("data-id=\"").unwrap() + 9;
        let id = body[id_at..id_at + body[id_at..].find('"').unwrap()].to_owned();
        out.push((id, body.to_owned()));
        rest = &after[end..];
    }
    out
}

/// The ids of the ranked list (the first table of the ranked section), in order.
fn ranked_ids(html: &str) -> Vec<String> {
    let s = &html[html.find("<section id=\"ranked\">").unwrap()..];
    let s = &s[..s.find("</section>").unwrap()];
    s.match_indices("<tr data-id=\"")
        .map(|(i, m)| {
            let a = i + m.len();
            s[a..a + s[a..].find('"').unwrap()].to_owned()
        })
        .collect()
}

/// The contents of every `<g class="CLASS">` group in `svg`.
fn groups<'a>(svg: &'a str, class: &str) -> Vec<&'a str> {
    let open = format!("<g class=\"{class}\">");
    svg.match_indices(&open)
        .map(|(i, _)| {
            let a = i + open.len();
            &svg[a..a + svg[a..].find("</g>").unwrap()]
        })
        .collect()
}

#[test]
fn the_page_requests_nothing_outside_itself() {
    let html = &fixture().html;
    assert!(html.starts_with("<!DOCTYPE html>"));
    assert!(html.trim_end().ends_with("</html>"), "the page is complete");
    for bad in ["http://", "https://", "<link", "<img", "<iframe", "@import", "url(", " src="] {
        assert!(!html.contains(bad), "the page holds {bad:?}");
    }
    // the one script element is inert data
    assert_eq!(html.matches("<script").count(), 1);
    assert!(html.contains("<script type=\"application/json\""));
    // the caution, at the top and in the footer
    assert_eq!(html.matches("not a protective or safety function").count(), 2);
    assert!(html.contains("licensed practice"));
    // printable on A4
    assert!(html.contains("@page{size:A4"));
    assert!(html.contains("@media print"));
}

#[test]
fn every_panel_svg_holds_its_series() {
    let f = fixture();
    let data = chart_data(&f.html);
    let data_panels = data["panels"].as_array().unwrap();
    let ps = panels(&f.html);
    assert!(ps.len() >= 5, "the demo week gives several panels, got {}", ps.len());
    assert_eq!(ps.len(), data_panels.len());
    // panels follow the ranked list
    let ranked = ranked_ids(&f.html);
    let panel_ids: Vec<&str> = ps.iter().map(|(id, _)| id.as_str()).collect();
    assert_eq!(panel_ids, ranked[..ps.len()].iter().map(String::as_str).collect::<Vec<_>>());
    for ((id, body), d) in ps.iter().zip(data_panels) {
        assert_eq!(d["id"].as_str().unwrap(), id);
        let main_start = body.find("<div class=\"tt-main\">").unwrap();
        let main = &body[main_start..main_start + body[main_start..].find("</svg>").unwrap()];
        // the readings: at least one line whose points are inside the chart
        let readings = groups(main, "tt-readings");
        assert_eq!(readings.len(), 1, "{id}");
        let pts: usize = readings[0]
            .match_indices("points=\"")
            .map(|(i, m)| {
                let a = i + m.len();
                readings[0][a..a + readings[0][a..].find('"').unwrap()].split_whitespace().count()
            })
            .sum();
        let cols = d["main"]["max"].as_array().unwrap().iter().filter(|v| !v.is_null()).count();
        // min/max per column: one or two points per non-empty column
        assert!(pts >= cols && pts <= 2 * cols, "{id}: {pts} points for {cols} columns");
        assert_eq!(groups(main, "tt-band").len(), 1, "{id}: the baseline band");
        assert!(groups(main, "tt-band")[0].contains("<polygon"), "{id}");
        assert_eq!(groups(main, "tt-onset").len(), 1, "{id}: the onset mark");
        assert!(groups(main, "tt-onset")[0].contains("onset"), "{id}: the onset is labelled");
        assert_eq!(groups(main, "tt-detected").len(), 1, "{id}");
        let peers = d["main"]["peer_assets"].as_array().unwrap();
        assert_eq!(groups(main, "tt-peers").len(), usize::from(!peers.is_empty()), "{id}");
        // every demo pump has 10 sensors: the other 9 are drawn small
        assert_eq!(body.matches("<figure class=\"tt-neighbour\"").count(), 9, "{id}");
        assert_eq!(d["neighbours"].as_array().unwrap().len(), 9, "{id}");
        // the evidence table
        assert!(body.contains("<table class=\"tt-evidence\">"), "{id}");
        assert!(body.contains("fleet_fdr"), "{id}");
    }
}

/// Min and max per column of `[from, to)` cut into `n`, computed here from the
/// raw readings (column = floor((t − from)·n / (to − from)); the rule of
/// the min/max-per-pixel-column method, Jugel et al. 2014).
fn minmax_here(ts: &[i64], v: &[f64], n: usize) -> Vec<Option<(f64, f64)>> {
    let mut out: Vec<Option<(f64, f64)>> = vec![None; n];
    for (&t, &x) in ts.iter().zip(v) {
        if !x.is_finite() || !(FROM_MS..TO_MS).contains(&t) {
            continue;
        }
        let c = ((t - FROM_MS) as i128 * n as i128 / (TO_MS - FROM_MS) as i128) as usize;
        out[c] = Some(match out[c] {
            None => (x, x),
            Some((lo, hi)) => (lo.min(x), hi.max(x)),
        });
    }
    out
}

fn close(a: f64, b: f64) -> bool {
    // the page keeps 6 significant digits
    (a - b).abs() <= 1e-5 * a.abs().max(b.abs()).max(1e-9)
}

#[test]
fn chart_data_equals_the_raw_readings_per_column() {
    let f = fixture();
    let data = chart_data(&f.html);
    // every reading of the period, by (asset, sensor)
    let mut raw: BTreeMap<(String, String), (Vec<i64>, Vec<f64>)> = BTreeMap::new();
    HistoryReader::try_new(&f.history)
        .unwrap()
        .with_time_range(FROM_MS, TO_MS)
        .for_each_asset(|a| -> Result<(), telltale_pipelines::Error> {
            for s in a.sensors {
                raw.insert((a.asset.clone(), s.sensor), (s.ts_ms, s.value));
            }
            Ok(())
        })
        .unwrap();
    let mut checked_peers = 0;
    for p in data["panels"].as_array().unwrap() {
        let asset = p["asset"].as_str().unwrap();
        let m = &p["main"];
        let sensor = m["sensor"].as_str().unwrap();
        assert_eq!(m["from_ms"].as_i64().unwrap(), FROM_MS);
        assert_eq!(m["to_ms"].as_i64().unwrap(), TO_MS);
        let n = m["columns"].as_u64().unwrap() as usize;
        let (ts, v) = &raw[&(asset.to_owned(), sensor.to_owned())];
        let want = minmax_here(ts, v, n);
        let (mins, maxs) = (m["min"].as_array().unwrap(), m["max"].as_array().unwrap());
        assert_eq!(mins.len(), n);
        for (c, w) in want.iter().enumerate() {
            match w {
                None => assert!(mins[c].is_null() && maxs[c].is_null(), "{asset}/{sensor} col {c}"),
                Some((lo, hi)) => {
                    let (glo, ghi) = (mins[c].as_f64().unwrap(), maxs[c].as_f64().unwrap());
                    assert!(close(glo, *lo), "{asset}/{sensor} col {c}: min {glo} vs {lo}");
                    assert!(close(ghi, *hi), "{asset}/{sensor} col {c}: max {ghi} vs {hi}");
                }
            }
        }
        // the band brackets something: lo below hi wherever it is drawn
        for (lo, hi) in
            m["band_lo"].as_array().unwrap().iter().zip(m["band_hi"].as_array().unwrap())
        {
            if let (Some(lo), Some(hi)) = (lo.as_f64(), hi.as_f64()) {
                assert!(lo < hi, "{asset}/{sensor}: band {lo}..{hi}");
            }
        }
        // the peers' median: each peer's mean per column, then the median across peers
        let peers: Vec<&str> =
            m["peer_assets"].as_array().unwrap().iter().map(|x| x.as_str().unwrap()).collect();
        if peers.is_empty() {
            continue;
        }
        let got = m["peers"].as_array().unwrap();
        let k = got.len();
        let means: Vec<Vec<Option<f64>>> = peers
            .iter()
            .map(|peer| {
                let (ts, v) = &raw[&((*peer).to_owned(), sensor.to_owned())];
                let mut acc = vec![(0.0, 0u32); k];
                for (&t, &x) in ts.iter().zip(v) {
                    if x.is_finite() && (FROM_MS..TO_MS).contains(&t) {
                        let c = ((t - FROM_MS) as i128 * k as i128 / (TO_MS - FROM_MS) as i128)
                            as usize;
                        acc[c].0 += x;
                        acc[c].1 += 1;
                    }
                }
                acc.iter().map(|&(s, n)| (n > 0).then(|| s / f64::from(n))).collect()
            })
            .collect();
        for c in 0..k {
            let mut col: Vec<f64> = means.iter().filter_map(|m| m[c]).collect();
            col.sort_by(f64::total_cmp);
            let want = match col.len() {
                0 => None,
                n if n % 2 == 1 => Some(col[n / 2]),
                n => Some(0.5 * (col[n / 2 - 1] + col[n / 2])),
            };
            match want {
                None => assert!(got[c].is_null()),
                Some(w) => {
                    assert!(close(got[c].as_f64().unwrap(), w), "{asset}/{sensor} peers col {c}")
                }
            }
        }
        checked_peers += 1;
    }
    assert!(checked_peers > 0, "the demo has peers: at least one peers' median checked");
}

#[test]
fn markdown_lists_the_same_ids_in_the_same_order() {
    let f = fixture();
    let md = &f.md;
    assert!(md.contains("not a protective or safety function"));
    let section = &md[md.find("## Ranked suspicions").unwrap()..];
    let section = &section[..section.find("\n## ").unwrap_or(section.len())];
    let ids: Vec<String> = section
        .lines()
        .filter(|l| l.starts_with("| ") && l.contains('`'))
        .map(|l| {
            let a = l.find('`').unwrap() + 1;
            l[a..a + l[a..].find('`').unwrap()].to_owned()
        })
        .collect();
    let html_ids = ranked_ids(&f.html);
    assert!(!ids.is_empty());
    assert_eq!(ids, html_ids);
    // and the same ids the scan gives, in its rank order
    let scan = telltale()
        .args(["scan", "-j2", "--from", FROM, "--to", TO, "--history"])
        .arg(&f.history)
        .arg("--fleet")
        .arg(&f.fleet)
        .arg("--store")
        .arg(&f.store)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let scan_ids: Vec<String> = String::from_utf8(scan)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str::<Value>(l).unwrap()["id"].as_str().unwrap().to_owned())
        .collect();
    assert_eq!(ids, scan_ids);
}

#[test]
fn backtest_figures_appear_when_a_backtest_folder_is_given() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let bt = dir.path().join("bt");
    let events = f.history.parent().unwrap().join("events.csv");
    telltale()
        .args(["-q", "backtest", "-j2", "--fit-days", "2", "--min-fit-days", "1"])
        .args(["--refit-days", "1", "--history"])
        .arg(&f.history)
        .arg("--fleet")
        .arg(&f.fleet)
        .arg("--events")
        .arg(&events)
        .arg("--out")
        .arg(&bt)
        .assert()
        .success();
    let out = dir.path().join("r.html");
    report_cmd(&f.history, &f.fleet, &f.store)
        .arg("--backtest")
        .arg(&bt)
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let html = std::fs::read_to_string(&out).unwrap();
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(bt.join("summary.json")).unwrap()).unwrap();
    assert!(html.contains("<section id=\"backtest\">"));
    // one sweep row per level in the summary
    let table = &html[html.find("<table class=\"tt-sweep-table\">").unwrap()..];
    let table = &table[..table.find("</table>").unwrap()];
    assert_eq!(
        table.matches("<tr>").count() - 1,
        summary["sweep"].as_array().unwrap().len(),
        "header row plus one per level"
    );
    let lt = &summary["evaluation"]["lead_time"];
    let warned = format!(
        "<b>{} / {}</b><span>failures warned",
        lt["warned"].as_u64().unwrap(),
        lt["failures"].as_array().unwrap().len()
    );
    assert!(html.contains(&warned), "{warned}");
    // and none without the flag
    assert!(!f.html.contains("<section id=\"backtest\">"));
}

#[test]
fn bad_usage_exits_2_naming_the_flag() {
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    report_cmd(&f.history, &f.fleet, &f.store)
        .arg("--backtest")
        .arg(dir.path())
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--backtest"));
    telltale()
        .args(["report", "--from", TO, "--to", FROM, "--history"])
        .arg(&f.history)
        .arg("--store")
        .arg(&f.store)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--from"));
}

/// PNG width and height from the IHDR chunk.
fn png_size(bytes: &[u8]) -> Option<(u32, u32)> {
    let sig = [0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];
    if bytes.len() < 24 || bytes[..8] != sig || &bytes[12..16] != b"IHDR" {
        return None;
    }
    let w = u32::from_be_bytes(bytes[16..20].try_into().ok()?);
    let h = u32::from_be_bytes(bytes[20..24].try_into().ok()?);
    Some((w, h))
}

fn chromium() -> Option<PathBuf> {
    ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.is_file())
}

#[test]
fn headless_chromium_renders_the_page_without_console_errors() {
    let Some(bin) = chromium() else {
        if std::env::var("TELLTALE_REQUIRE_CHROMIUM").is_ok_and(|v| v == "1") {
            panic!(
                "TELLTALE_REQUIRE_CHROMIUM=1 but no chromium in /usr/bin; apt-get install chromium"
            );
        }
        eprintln!(
            "skipped: no chromium in /usr/bin (set TELLTALE_REQUIRE_CHROMIUM=1 to fail instead)"
        );
        return;
    };
    let f = fixture();
    let dir = tempfile::tempdir().unwrap();
    let page = dir.path().join("review.html");
    std::fs::write(&page, &f.html).unwrap();
    let url = format!("file://{}", page.display());
    let common = |profile: &str| -> std::process::Command {
        let mut c = std::process::Command::new(&bin);
        c.args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", dir.path().join(profile).display()));
        c
    };
    let png = dir.path().join("review.png");
    let out = common("p1")
        .arg(format!("--screenshot={}", png.display()))
        .arg("--window-size=1240,1754")
        .arg(&url)
        .output()
        .unwrap();
    assert!(out.status.success(), "chromium failed: {}", String::from_utf8_lossy(&out.stderr));
    let bytes = std::fs::read(&png).unwrap();
    assert_eq!(png_size(&bytes), Some((1240, 1754)), "a PNG of the window size");
    // a blank page compresses to a few kB; the rendered report does not
    assert!(bytes.len() > 50_000, "screenshot only {} bytes", bytes.len());
    let log = String::from_utf8_lossy(&out.stderr);
    // a console message is logged as `INFO:CONSOLE:<line>] "<text>"`
    for bad in ["Uncaught", ":CONSOLE", "net::ERR_"] {
        assert!(!log.contains(bad), "chromium logged {bad:?}:\n{log}");
    }
    // printed, every page is A4 (595 x 842 pt; from the @page rule)
    let pdf = dir.path().join("review.pdf");
    let printed = common("p3")
        .arg("--no-pdf-header-footer")
        .arg(format!("--print-to-pdf={}", pdf.display()))
        .arg(&url)
        .output()
        .unwrap();
    assert!(printed.status.success());
    let pdf = std::fs::read(&pdf).unwrap();
    let text = String::from_utf8_lossy(&pdf);
    let boxes: Vec<&str> = text
        .match_indices("/MediaBox [")
        .map(|(i, _)| &text[i..i + text[i..].find(']').unwrap() + 1])
        .collect();
    assert!(!boxes.is_empty(), "a PDF with pages");
    for b in &boxes {
        let nums: Vec<f64> = b["/MediaBox [".len()..b.find(']').unwrap()]
            .split_whitespace()
            .map(|x| x.parse().unwrap())
            .collect();
        // A4 is 210 x 297 mm = 595.3 x 841.9 pt (ISO 216)
        assert!((nums[2] - 595.3).abs() < 1.0 && (nums[3] - 841.9).abs() < 1.0, "{b}");
    }
    // the DOM chromium built holds every panel and the data at the end
    let dom = common("p2").arg("--dump-dom").arg(&url).output().unwrap();
    assert!(dom.status.success());
    let dom = String::from_utf8_lossy(&dom.stdout);
    assert_eq!(
        dom.matches("<section class=\"tt-panel\"").count(),
        f.html.matches("<section class=\"tt-panel\"").count()
    );
    assert!(dom.contains("id=\"tt-chart-data\""), "the page parsed to its end");
    assert_eq!(
        dom.matches("<svg class=\"tt-chart\"").count(),
        f.html.matches("<svg class=\"tt-chart\"").count()
    );
}

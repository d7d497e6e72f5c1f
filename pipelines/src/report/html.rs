//! The report as one self-contained HTML page: inline CSS and SVG, no
//! script that runs, no request to anything outside the file.
//!
//! The data behind every panel's charts is embedded as JSON in
//! `<script type="application/json" id="tt-chart-data">` (inert: browsers do
//! not run it), so the page can be checked, or its numbers reused, without
//! parsing the SVG.

use super::chart::{CHART_CSS, ChartError, Frame, sensor_svg, series_colour, xy_svg};
use super::gather::{Item, Panel, Report, SensorChart, Status};
use super::{BAND_SIGMA, CAUTION, MAIN_COLUMNS, PEER_COLUMNS, SPARK_FACTOR, escape_html as esc};
use crate::record::{Class, Suspicion};
use crate::time::from_millis;
use serde::Serialize;
use std::fmt::Write as _;

const MAIN: Frame = Frame { width: 980, height: 250, x_labels: 7, font: 14 };
const SMALL: Frame = Frame { width: 480, height: 130, x_labels: 4, font: 13 };

const CSS: &str = r#"
:root{--ink:#222b33;--muted:#5f6b75;--rule:#c9cfd4;--paper:#fbfaf7;--tint:#eef2f0;
--eq:#8c1d18;--sf:#7a4f00;--pc:#1f4e79;--new:#8c1d18;--cont:#7a4f00;--closed:#2e6b3a}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"Noto Sans",sans-serif}
main{max-width:1040px;margin:0 auto;padding:24px 28px 48px}
header.tt-head{border-bottom:3px double var(--ink);padding-bottom:10px;margin-bottom:18px}
header.tt-head h1{font-size:24px;margin:0;letter-spacing:.01em}
header.tt-head p{margin:4px 0 0;color:var(--muted)}
h2{font-size:17px;margin:30px 0 10px;padding-bottom:3px;border-bottom:1px solid var(--rule)}
h3{font-size:15px;margin:0 0 6px}
.tt-caution{border:2px solid var(--ink);border-left-width:10px;padding:10px 14px;background:#fff;margin:14px 0}
.tt-caution strong{text-transform:uppercase;letter-spacing:.06em;margin-right:.4em}
.tt-tiles{display:grid;grid-template-columns:repeat(4,1fr);gap:10px}
.tt-tile{background:#fff;border:1px solid var(--rule);padding:8px 10px}
.tt-tile b{display:block;font-size:22px;font-variant-numeric:tabular-nums}
.tt-tile span{color:var(--muted);font-size:12px}
table{border-collapse:collapse;width:100%;background:#fff;font-size:12.5px}
th,td{border-bottom:1px solid var(--rule);padding:4px 6px;text-align:left;vertical-align:top}
th{background:var(--tint);font-weight:600}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
.tt-class{white-space:nowrap;font-weight:600}
.tt-class.equipment_fault{color:var(--eq)}.tt-class.sensor_fault{color:var(--sf)}.tt-class.process_change{color:var(--pc)}
.tt-status{display:inline-block;padding:0 5px;font-size:11px;font-weight:700;text-transform:uppercase;letter-spacing:.04em;border:1.5px solid}
.tt-status.new{color:var(--new);border-style:solid}.tt-status.continuing{color:var(--cont);border-style:dashed}
.tt-status.closed{color:var(--closed);border-style:dotted}
.tt-bar{display:inline-block;height:8px;background:var(--ink);vertical-align:middle;margin-left:4px}
.tt-panel{background:#fff;border:1px solid var(--rule);padding:12px 14px;margin:14px 0}
.tt-panel .tt-meta{color:var(--muted);margin:0 0 8px}
.tt-panel svg{display:block;width:100%;height:auto}
.tt-small{display:grid;grid-template-columns:1fr 1fr;gap:6px 12px;margin-top:6px}
.tt-small figure{margin:0}.tt-small figcaption{font-size:11.5px;color:var(--muted)}
.tt-legend{display:flex;flex-wrap:wrap;gap:4px 16px;font-size:12px;margin:4px 0 8px}
.tt-legend svg{display:inline;width:34px;height:12px;vertical-align:middle}
.tt-evidence td:nth-child(2),.tt-evidence td:nth-child(3),.tt-evidence td:nth-child(4){text-align:right;font-variant-numeric:tabular-nums}
.tt-note{color:var(--muted);font-size:12px}
a{color:var(--pc)}
footer{margin-top:32px;border-top:3px double var(--ink);padding-top:8px}
@page{size:A4 portrait;margin:12mm}
@media print{
 body{background:#fff;font-size:10pt}
 main{max-width:none;padding:0}
 .tt-panel,.tt-tile,table tr,.tt-caution{break-inside:avoid}
 .tt-panel{border:0;border-top:1px solid var(--rule);padding:8px 0}
 h2{break-after:avoid}
 a{color:inherit;text-decoration:none}
 .tt-tiles{grid-template-columns:repeat(4,1fr)}
}
"#;

fn day(ms: i64) -> String {
    from_millis(ms).format("%a %Y-%m-%d %H:%M UTC").to_string()
}

fn when(t: chrono::DateTime<chrono::Utc>) -> String {
    t.format("%Y-%m-%d %H:%M").to_string()
}

/// An integer with thin spaces between groups of three digits.
fn thousands(n: u64) -> String {
    let d = n.to_string();
    let mut out = String::new();
    for (i, c) in d.chars().enumerate() {
        if i > 0 && (d.len() - i).is_multiple_of(3) {
            out.push('\u{2009}');
        }
        out.push(c);
    }
    out
}

/// Three significant digits, no exponent for everyday magnitudes.
fn sig3(x: f64) -> String {
    let a = x.abs();
    if a >= 100.0 || a == 0.0 {
        format!("{x:.0}")
    } else if a >= 10.0 {
        format!("{x:.1}")
    } else if a >= 1.0 {
        format!("{x:.2}")
    } else {
        format!("{x:.3}")
    }
}

fn pct(x: f64) -> String {
    format!("{:.0} %", 100.0 * x)
}

/// The class shown with a shape as well as a colour.
pub(crate) fn class_glyph(c: Class) -> &'static str {
    match c {
        Class::EquipmentFault => "\u{25B2}", // triangle
        Class::SensorFault => "\u{25C6}",    // diamond
        Class::ProcessChange => "\u{25CF}",  // circle
        _ => "\u{25A0}",
    }
}

fn class_cell(s: &Suspicion) -> String {
    format!(
        "<span class=\"tt-class {c}\">{g} {c}</span><br>{m}",
        c = s.class.as_str(),
        g = class_glyph(s.class),
        m = s.mode.as_str()
    )
}

fn status_badge(st: Status) -> String {
    format!("<span class=\"tt-status {0}\">{0}</span>", st.as_str())
}

/// Anchor of a suspicion's panel.
pub fn panel_anchor(id: &str) -> String {
    format!(
        "p-{}",
        id.chars().filter(|c| c.is_ascii_alphanumeric() || *c == '-').collect::<String>()
    )
}

fn ranked_table(out: &mut String, items: &[Item], with_links: bool) {
    out.push_str(
        "<table class=\"tt-ranked\"><thead><tr><th class=\"num\">Rank</th><th>Status</th>\
         <th>Asset</th><th>Sensor</th><th>Verdict</th><th class=\"num\">Score</th>\
         <th>Onset</th><th>Summary</th></tr></thead><tbody>",
    );
    for it in items {
        let s = &it.suspicion;
        let link = match (with_links, it.panel) {
            (true, Some(_)) => format!(" <a href=\"#{}\">panel</a>", panel_anchor(&s.id)),
            _ => String::new(),
        };
        let _ = write!(
            out,
            "<tr data-id=\"{id}\"><td class=\"num\">{rank}</td><td>{status}</td><td>{asset}</td>\
             <td>{sensor}</td><td>{class}</td><td class=\"num\">{score:.2}<span class=\"tt-bar\" \
             style=\"width:{w:.0}px\"></span></td><td>{onset}</td><td>{summary}{link}</td></tr>",
            id = esc(&s.id),
            rank = s.rank,
            status = status_badge(it.status),
            asset = esc(&s.asset),
            sensor = s.sensor.as_deref().map_or("(asset)".to_owned(), esc),
            class = class_cell(s),
            score = s.score,
            w = 40.0 * s.score.clamp(0.0, 1.0),
            onset = when(s.onset),
            summary = esc(&s.summary),
        );
    }
    out.push_str("</tbody></table>");
}

fn legend_line(kind: &str, label: &str) -> String {
    let c = series_colour(kind);
    let shape = match kind {
        "band" => format!(
            "<rect x=\"1\" y=\"2\" width=\"32\" height=\"8\" fill=\"{c}\" fill-opacity=\"0.35\" stroke=\"{c}\"/>"
        ),
        "peers" => format!(
            "<line x1=\"1\" y1=\"6\" x2=\"33\" y2=\"6\" stroke=\"{c}\" stroke-width=\"2\" stroke-dasharray=\"6 4\"/>"
        ),
        "onset" => format!(
            "<line x1=\"17\" y1=\"3\" x2=\"17\" y2=\"12\" stroke=\"{c}\" stroke-width=\"2\"/><path d=\"M12 0h10l-5 6z\" fill=\"{c}\"/>"
        ),
        "detected" => format!(
            "<line x1=\"17\" y1=\"4\" x2=\"17\" y2=\"12\" stroke=\"{c}\" stroke-width=\"2\" stroke-dasharray=\"3 3\"/><path d=\"M17 0l4 4-4 4-4-4z\" fill=\"{c}\"/>"
        ),
        _ => format!(
            "<line x1=\"1\" y1=\"6\" x2=\"33\" y2=\"6\" stroke=\"{c}\" stroke-width=\"1.5\"/>"
        ),
    };
    format!("<span><svg viewBox=\"0 0 34 12\" aria-hidden=\"true\">{shape}</svg> {label}</span>")
}

fn evidence_table(out: &mut String, s: &Suspicion) {
    out.push_str(
        "<table class=\"tt-evidence\"><thead><tr><th>Test</th><th>Statistic</th><th>Threshold</th>\
         <th>p-value</th><th>Detail</th></tr></thead><tbody>",
    );
    for e in &s.evidence {
        let _ = write!(
            out,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&e.test),
            num(e.statistic),
            num(e.threshold),
            e.p_value.map_or("—".to_owned(), |p| format!("{p:.2e}")),
            esc(&e.detail)
        );
    }
    out.push_str("</tbody></table>");
}

fn num(x: f64) -> String {
    if x == f64::MAX {
        "∞".to_owned()
    } else if x.abs() >= 1e5 || (x != 0.0 && x.abs() < 1e-3) {
        format!("{x:.3e}")
    } else {
        format!("{x:.3}")
    }
}

fn panel_html(out: &mut String, p: &Panel, s: &Suspicion) -> Result<(), ChartError> {
    let _ = write!(
        out,
        "<section class=\"tt-panel\" id=\"{anchor}\" data-id=\"{id}\"><h3>#{rank} {asset} · {sensor} \
         — <span class=\"tt-class {c}\">{g} {c}</span> / {m}</h3><p class=\"tt-meta\">score {score:.2} · \
         magnitude {mag:.2} · onset {onset} · detected {det}</p><p>{summary}</p>",
        anchor = panel_anchor(&p.id),
        id = esc(&p.id),
        rank = s.rank,
        asset = esc(&p.asset),
        sensor = s.sensor.as_deref().map_or("asset level".to_owned(), esc),
        c = s.class.as_str(),
        g = class_glyph(s.class),
        m = s.mode.as_str(),
        score = s.score,
        mag = s.magnitude,
        onset = when(s.onset),
        det = when(s.detected),
        summary = esc(&s.summary),
    );
    let mut legend = vec![
        legend_line("readings", "readings (min and max per pixel column)"),
        legend_line(
            "band",
            &format!("baseline band, ±{BAND_SIGMA:.0} robust sigma, column's regime"),
        ),
    ];
    if !p.main.peers.is_empty() {
        legend.push(legend_line(
            "peers",
            &format!("peers' median ({})", esc(&p.main.peer_assets.join(", "))),
        ));
    }
    legend.push(legend_line("onset", "onset"));
    legend.push(legend_line("detected", "detected"));
    let _ = write!(out, "<div class=\"tt-legend\">{}</div>", legend.join(""));
    if p.onset_ms < p.main.from_ms {
        let _ = write!(
            out,
            "<p class=\"tt-note\">The onset ({}) is before the period; its mark sits at the left edge.</p>",
            when(s.onset)
        );
    }
    let title = format!("{} {} readings over the period", p.asset, p.main.sensor);
    out.push_str("<div class=\"tt-main\">");
    out.push_str(&sensor_svg(&p.main, MAIN, Some((p.onset_ms, p.detected_ms)), &title)?);
    out.push_str("</div>");
    if !p.neighbours.is_empty() {
        out.push_str("<div class=\"tt-small\">");
        for n in &p.neighbours {
            let t = format!("{} {} ({})", p.asset, n.sensor, n.role);
            let _ = write!(
                out,
                "<figure class=\"tt-neighbour\" data-sensor=\"{}\">{}<figcaption>{} · {}{}</figcaption></figure>",
                esc(&n.sensor),
                sensor_svg(n, SMALL, None, &t)?,
                esc(&n.sensor),
                n.role,
                if n.peers.is_empty() { "" } else { " · dashed: peers' median" }
            );
        }
        out.push_str("</div>");
    }
    evidence_table(out, s);
    out.push_str("</section>");
    Ok(())
}

/// A value as embedded in the page: 6 significant digits (the chart draws
/// to a pixel, about 3 digits; the data stays comparable to the readings).
fn sig6(x: f64) -> f64 {
    format!("{x:.5e}").parse().unwrap_or(x)
}

fn sig6_all(v: impl Iterator<Item = Option<f64>>) -> Vec<Option<f64>> {
    v.map(|x| x.map(sig6)).collect()
}

/// The numbers behind one chart, as embedded in the page.
#[derive(Serialize)]
struct ChartData<'a> {
    sensor: &'a str,
    from_ms: i64,
    to_ms: i64,
    columns: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    min: Option<Vec<Option<f64>>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    max: Option<Vec<Option<f64>>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    band_lo: Option<Vec<Option<f64>>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    band_hi: Option<Vec<Option<f64>>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    peers: Option<Vec<Option<f64>>>,
    peer_assets: &'a [String],
}

impl<'a> ChartData<'a> {
    /// `full`: with the values (the main chart); else the outline only.
    fn of(c: &'a SensorChart, full: bool) -> Self {
        let f = |v: Vec<Option<f64>>| full.then_some(v);
        ChartData {
            sensor: &c.sensor,
            from_ms: c.from_ms,
            to_ms: c.to_ms,
            columns: c.columns.len(),
            min: f(sig6_all(c.columns.iter().map(|m| m.map(|m| m.min)))),
            max: f(sig6_all(c.columns.iter().map(|m| m.map(|m| m.max)))),
            band_lo: f(sig6_all(c.band.iter().map(|b| b.map(|b| b[0])))),
            band_hi: f(sig6_all(c.band.iter().map(|b| b.map(|b| b[1])))),
            peers: f(sig6_all(c.peers.iter().copied())),
            peer_assets: &c.peer_assets,
        }
    }
}

#[derive(Serialize)]
struct PanelData<'a> {
    id: &'a str,
    asset: &'a str,
    onset_ms: i64,
    detected_ms: i64,
    main: ChartData<'a>,
    neighbours: Vec<ChartData<'a>>,
}

/// The embedded JSON of every panel's chart data (`<` escaped for a script element).
fn chart_data(r: &Report) -> String {
    let panels: Vec<PanelData<'_>> = r
        .panels
        .iter()
        .map(|p| PanelData {
            id: &p.id,
            asset: &p.asset,
            onset_ms: p.onset_ms,
            detected_ms: p.detected_ms,
            main: ChartData::of(&p.main, true),
            neighbours: p.neighbours.iter().map(|n| ChartData::of(n, false)).collect(),
        })
        .collect();
    let json = serde_json::json!({
        "method": format!(
            "min and max per pixel column (Jugel et al. 2014), {MAIN_COLUMNS} columns over the \
             period for the main chart, {} for the neighbours, {PEER_COLUMNS} for the peers' \
             median; values to 6 significant digits; neighbours' values not embedded",
            MAIN_COLUMNS / SPARK_FACTOR
        ),
        "panels": panels,
    });
    script_json(&json)
}

/// JSON for a `<script>` element: `<` only occurs inside JSON strings, where
/// `\u003c` means the same, so no `</script>` or `<!--` can end or confuse it.
fn script_json(v: &serde_json::Value) -> String {
    v.to_string().replace('<', "\\u003c")
}

fn glance(out: &mut String, r: &Report) {
    let f = &r.fleet;
    let days = (r.to_ms - r.from_ms) as f64 / 86_400_000.0;
    out.push_str("<section id=\"glance\"><h2>The fleet at a glance</h2><div class=\"tt-tiles\">");
    let tile = |out: &mut String, v: String, label: &str| {
        let _ = write!(out, "<div class=\"tt-tile\"><b>{v}</b><span>{label}</span></div>");
    };
    tile(out, format!("{days:.1} d"), "period");
    tile(out, thousands(f.assets as u64), "assets judged");
    tile(out, thousands(f.sensors as u64), "sensors");
    tile(out, pct(f.coverage), "data coverage (grid rows with a reading)");
    tile(out, r.items.len().to_string(), "suspicions this period");
    tile(out, f.new.to_string(), "new");
    tile(out, f.continuing.to_string(), "continuing (raised again, or still outside the band)");
    tile(out, f.closed.to_string(), "closed since last period");
    out.push_str("</div>");
    out.push_str("<table class=\"tt-classes\" style=\"margin-top:10px\"><thead><tr><th>Class</th><th class=\"num\">Suspicions</th></tr></thead><tbody>");
    for (c, n) in &f.by_class {
        let _ = write!(
            out,
            "<tr><td><span class=\"tt-class {0}\">{1} {0}</span></td><td class=\"num\">{2}</td></tr>",
            c.as_str(),
            class_glyph(*c),
            n
        );
    }
    out.push_str("</tbody></table>");
    let _ = write!(
        out,
        "<p class=\"tt-note\">{} readings. Previous period of the same length: {} to {}, {} suspicion(s). \
         <em>New</em>: nothing of the same asset, sensor, class and mode last period. <em>Continuing</em>: \
         raised in both periods, or raised last period and its sensors are still outside their baseline \
         band. <em>Closed</em>: raised last period only, and back inside the band over the last day \
         (at least 90 % of judged rows). A lasting change is reported once, at its onset.</p>",
        thousands(f.readings),
        day(r.previous_from_ms),
        day(r.from_ms),
        f.previous
    );
    if !f.skipped.is_empty() {
        out.push_str("<p class=\"tt-note\">Not judged: ");
        let list: Vec<String> =
            f.skipped.iter().map(|(a, why)| format!("{} ({})", esc(a), esc(why))).collect();
        out.push_str(&list.join("; "));
        out.push_str("</p>");
    }
    out.push_str("</section>");
}

fn assets_table(out: &mut String, r: &Report) {
    out.push_str(
        "<section id=\"assets\"><h2>Per asset</h2><p class=\"tt-note\">Regime shares are of the \
         period's grid rows. Time in band is the share of rows with a reading inside the \
         registry's normal band, over the rows the asset ran (not stopped). Gaps are runs of at least 3 grid rows without a reading; out of \
         range counts readings outside the instrument range; stuck names sensors the scan found \
         stuck.</p><table class=\"tt-assets\"><thead><tr><th>Asset</th><th>Group · site</th>\
         <th class=\"num\">Coverage</th><th>Operating regimes</th><th>Time in band</th>\
         <th>Data quality</th><th class=\"num\">Suspicions</th></tr></thead><tbody>",
    );
    for a in &r.assets {
        let regimes: Vec<String> = a
            .regimes
            .iter()
            .map(|g| {
                let ctx: Vec<String> =
                    g.context.iter().map(|(s, m)| format!("{} {}", esc(s), sig3(*m))).collect();
                if ctx.is_empty() {
                    format!("<b>{}</b> {}", g.regime, pct(g.share))
                } else {
                    format!(
                        "<b>{}</b> {} <small>({})</small>",
                        g.regime,
                        pct(g.share),
                        ctx.join(", ")
                    )
                }
            })
            .collect();
        // in band: the sensors below 99.5 % by name, the rest in one phrase
        let with_band: Vec<_> =
            a.sensors.iter().filter_map(|q| q.in_band.map(|b| (&q.sensor, b.share))).collect();
        let low: Vec<String> = with_band
            .iter()
            .filter(|(_, x)| *x < 0.995)
            .map(|(s, x)| format!("{} {}", esc(s), pct(*x)))
            .collect();
        let band = match (with_band.len(), low.len()) {
            (0, _) => "—".to_owned(),
            (n, 0) => format!("all {n} banded sensors ≥ 99.5 %"),
            (n, k) if k == n => low.join("<br>"),
            (_, _) => format!("{}<br>others ≥ 99.5 %", low.join("<br>")),
        };
        let mut quality: Vec<String> = Vec::new();
        // a gap every sensor shares is the asset being offline: said once
        let shared_gap = a.sensors.len() > 1
            && a.sensors[0].gaps > 0
            && a.sensors
                .iter()
                .all(|q| q.gaps == a.sensors[0].gaps && q.gap_hours == a.sensors[0].gap_hours);
        if shared_gap {
            quality.push(format!(
                "all sensors: {} gap(s), {:.1} h (asset silent)",
                a.sensors[0].gaps, a.sensors[0].gap_hours
            ));
        }
        for q in &a.sensors {
            if q.gaps > 0 && !shared_gap {
                quality.push(format!(
                    "{}: {} gap(s), {:.1} h",
                    esc(&q.sensor),
                    q.gaps,
                    q.gap_hours
                ));
            }
            if q.out_of_range > 0 {
                quality.push(format!("{}: {} out of range", esc(&q.sensor), q.out_of_range));
            }
            if q.stuck > 0 {
                quality.push(format!("{}: stuck", esc(&q.sensor)));
            }
        }
        let _ = write!(
            out,
            "<tr data-asset=\"{asset}\"><td>{asset}</td><td>{group}{site}</td><td class=\"num\">{cov}</td>\
             <td>{regimes}</td><td>{band}</td><td>{quality}</td><td class=\"num\">{n}</td></tr>",
            asset = esc(&a.asset),
            group = esc(&a.group),
            site = a.site.as_deref().map_or(String::new(), |s| format!(" · {}", esc(s))),
            cov = pct(a.coverage),
            regimes = regimes.join("<br>"),
            band = band,
            quality =
                if quality.is_empty() { "no findings".to_owned() } else { quality.join("<br>") },
            n = a.suspicions,
        );
    }
    out.push_str("</tbody></table></section>");
}

fn opt(x: Option<f64>, f: impl Fn(f64) -> String) -> String {
    x.map_or("—".to_owned(), f)
}

fn backtest_section(out: &mut String, r: &Report) -> Result<(), ChartError> {
    let Some(b) = &r.backtest else { return Ok(()) };
    let rep = &b.report;
    let ev = &rep.evaluation;
    let lt = &ev.lead_time;
    out.push_str("<section id=\"backtest\"><h2>Backtest figures</h2>");
    let _ = write!(
        out,
        "<p class=\"tt-note\">From {} (archive: {}). A walk-forward replay of fit and scan over the \
         archive, scored against its failure and maintenance records.</p><div class=\"tt-tiles\">",
        esc(&b.dir),
        esc(&rep.archive)
    );
    let tiles = [
        (rep.assets.to_string(), "assets replayed"),
        (format!("{:.1}", rep.judged_asset_weeks), "asset-weeks judged"),
        (format!("{} / {}", lt.warned, lt.failures.len()), "failures warned"),
        (opt(lt.median_hours, |h| format!("{h:.0} h")), "median lead time"),
        (
            opt(ev.false_alarms.per_100_asset_weeks, |x| format!("{x:.2}")),
            "false alarms per 100 asset-weeks (clean time)",
        ),
        (
            opt(rep.quiet.per_100_asset_weeks, |x| format!("{x:.2}")),
            "suspicions per 100 asset-weeks (quiet time)",
        ),
        (rep.suspicions.to_string(), "suspicions at the default level"),
        (opt(ev.overall.recall, pct), "recall over labelled changes"),
    ];
    for (v, l) in tiles {
        let _ = write!(out, "<div class=\"tt-tile\"><b>{v}</b><span>{l}</span></div>");
    }
    out.push_str("</div>");
    if !lt.marks.is_empty() {
        out.push_str("<p>Warned at least: ");
        let marks: Vec<String> =
            lt.marks.iter().map(|m| format!("{:.0} h ahead: {}", m.hours, m.warned)).collect();
        out.push_str(&marks.join(" · "));
        out.push_str("</p>");
    }
    // sensitivity curve: what is caught (recall over labelled changes, else
    // failures warned) against the alarm rate, one point per FDR level; the
    // ends and the default level are labelled, the table below has them all
    let use_recall = rep.sweep.iter().any(|p| p.recall.is_some());
    let last = rep.sweep.len().saturating_sub(1);
    let pts: Vec<(f64, f64, String)> = rep
        .sweep
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let x = p.quiet_per_100_asset_weeks.or(p.false_alarms_per_100_asset_weeks);
            let y = if use_recall {
                p.recall.map_or(f64::NAN, |r| 100.0 * r)
            } else {
                p.failures_warned as f64
            };
            let label = if p.default {
                format!("q={:.0e} (default)", p.fdr_q)
            } else if i == 0 || i == last {
                format!("q={:.0e}", p.fdr_q)
            } else {
                String::new()
            };
            (x.unwrap_or(f64::NAN), y, label)
        })
        .collect();
    if pts.iter().any(|p| p.0.is_finite() && p.1.is_finite()) {
        out.push_str("<h3>Sensitivity</h3><div class=\"tt-sweep\">");
        out.push_str(&xy_svg(
            "sensitivity curve",
            &pts,
            "suspicions per 100 asset-weeks of quiet time",
            if use_recall { "recall over labelled changes, %" } else { "failures warned" },
            (760, 300),
            true,
        )?);
        out.push_str("</div>");
    }
    out.push_str(
        "<table class=\"tt-sweep-table\"><thead><tr><th class=\"num\">FDR level q</th><th class=\"num\">Suspicions</th>\
         <th class=\"num\">Recall</th><th class=\"num\">Class accuracy</th><th class=\"num\">False alarms / 100 aw</th>\
         <th class=\"num\">Quiet / 100 aw</th><th class=\"num\">Failures warned</th><th class=\"num\">Warned ≥ 72 h</th></tr></thead><tbody>",
    );
    for p in &rep.sweep {
        let _ = write!(
            out,
            "<tr><td class=\"num\">{:.0e}{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
             <td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td></tr>",
            p.fdr_q,
            if p.default { " (default)" } else { "" },
            p.suspicions,
            opt(p.recall, pct),
            opt(p.class_accuracy, pct),
            opt(p.false_alarms_per_100_asset_weeks, |x| format!("{x:.2}")),
            opt(p.quiet_per_100_asset_weeks, |x| format!("{x:.2}")),
            p.failures_warned,
            opt(p.warned_72h_share, pct),
        );
    }
    out.push_str("</tbody></table>");
    let leads: Vec<(f64, f64, String)> = lt
        .failures
        .iter()
        .enumerate()
        .filter_map(|(i, f)| f.lead_hours.map(|h| (h, (i + 1) as f64, f.asset.clone())))
        .collect();
    if !leads.is_empty() {
        out.push_str("<h3>Lead times of warned failures</h3><div class=\"tt-leads\">");
        out.push_str(&xy_svg(
            "lead times",
            &leads,
            "hours between the warning and the failure",
            "failure (input order)",
            (760, 40 + 26 * leads.len().min(30) as u32 + 60),
            false,
        )?);
        out.push_str("</div>");
    }
    out.push_str("</section>");
    Ok(())
}

/// Renders the report as one HTML page.
///
/// # Errors
/// [`ChartError`] when plotters cannot draw a chart.
pub fn render(r: &Report) -> Result<String, ChartError> {
    let mut out = String::with_capacity(64 * 1024 + r.panels.len() * 120 * 1024);
    let _ = write!(
        out,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>Reliability review {from} to {to}</title><style>{CSS}{CHART_CSS}</style></head><body><main>\
         <header class=\"tt-head\"><h1>Weekly reliability review</h1><p>{from_l} to {to_l} · \
         telltale {v}</p></header>",
        from = from_millis(r.from_ms).format("%Y-%m-%d"),
        to = from_millis(r.to_ms).format("%Y-%m-%d"),
        from_l = day(r.from_ms),
        to_l = day(r.to_ms),
        v = r.telltale_version,
    );
    let _ = write!(
        out,
        "<div class=\"tt-caution\" role=\"note\"><strong>Caution</strong>{}</div>",
        esc(CAUTION)
    );
    glance(&mut out, r);
    out.push_str("<section id=\"ranked\"><h2>Ranked suspicions</h2>");
    if r.items.is_empty() {
        out.push_str("<p>No suspicions this period.</p>");
    } else {
        ranked_table(&mut out, &r.items, true);
        if r.panels.len() < r.items.len() {
            let _ = write!(
                out,
                "<p class=\"tt-note\">Panels are drawn for the top {} suspicions.</p>",
                r.panels.len()
            );
        }
    }
    out.push_str("</section>");
    if !r.earlier.is_empty() {
        out.push_str(
            "<section id=\"earlier\"><h2>Raised last period, not raised again</h2><p class=\"tt-note\">\
             Ranks are last period's.</p>",
        );
        ranked_table(&mut out, &r.earlier, false);
        out.push_str("</section>");
    }
    if !r.panels.is_empty() {
        out.push_str("<section id=\"panels\"><h2>Panels</h2>");
        for p in &r.panels {
            if let Some(it) = r.items.iter().find(|i| i.suspicion.id == p.id) {
                panel_html(&mut out, p, &it.suspicion)?;
            }
        }
        out.push_str("</section>");
    }
    assets_table(&mut out, r);
    backtest_section(&mut out, r)?;
    let _ = write!(
        out,
        "<footer><div class=\"tt-caution\" role=\"note\"><strong>Caution</strong>{}</div>\
         <p class=\"tt-note\">Charts: min and max of the readings per pixel column (Jugel et al. \
         2014), so spikes and gaps stay visible; a gap in the line is a gap in the data. The band \
         is the sensor's baseline location ± {BAND_SIGMA:.0} robust sigma in the regime most rows \
         of the column ran in.</p></footer>",
        esc(CAUTION)
    );
    let _ = writeln!(
        out,
        "<script type=\"application/json\" id=\"tt-chart-data\">{}</script></main></body></html>",
        chart_data(r)
    );
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thousands_groups_by_three() {
        assert_eq!(thousands(57_538_801), "57\u{2009}538\u{2009}801");
        assert_eq!(thousands(999), "999");
        assert_eq!(thousands(1000), "1\u{2009}000");
    }

    #[test]
    fn panel_anchors_keep_only_safe_characters() {
        assert_eq!(panel_anchor("98debf71\"<x>"), "p-98debf71x");
    }

    #[test]
    fn embedded_json_has_no_angle_bracket() {
        let s = script_json(&serde_json::json!({"id": "</script><!--"}));
        assert!(!s.contains('<'));
        let back: serde_json::Value = serde_json::from_str(&s).unwrap();
        assert_eq!(back["id"], "</script><!--");
    }
}

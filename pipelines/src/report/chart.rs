//! The report's charts, drawn with plotters' SVG backend.
//!
//! Each chart is drawn as layers on one coordinate system: every layer is a
//! plotters drawing of its own (same size, margins and axis ranges, so the
//! same pixel mapping), and its elements are wrapped in a `<g>` whose
//! `class` names the series (`tt-band`, `tt-readings`, `tt-peers`,
//! `tt-onset`, `tt-detected`, ...). The page's CSS and the tests find the
//! series by those classes; the outer `<svg>` is ours.
//!
//! Colour is never the only signal: the readings are a solid line, the
//! peers' median a dashed line (dashed by the page's CSS, see [`CHART_CSS`]), the band a filled area with its edges drawn,
//! the onset a vertical line topped by a triangle and the word "onset", the
//! detection a dotted line with a diamond and the word "detected".

use super::gather::SensorChart;
use crate::time::from_millis;
use plotters::prelude::*;
use telltale_models::downsample::line_runs;

/// A chart could not be drawn.
#[derive(Debug, thiserror::Error)]
#[error("drawing the {chart} chart: {message}")]
pub struct ChartError {
    /// Which chart.
    pub chart: String,
    /// What plotters said.
    pub message: String,
}

/// CSS the page must carry for the charts: dashes are styled rather than
/// drawn dash by dash, which keeps a 50-panel page small.
pub(crate) const CHART_CSS: &str = ".tt-peers polyline{stroke-dasharray:7 4}\
.tt-detected polyline{stroke-dasharray:3 3}";

/// The report's palette (our own): name → hex colour.
const INK: RGBColor = RGBColor(0x22, 0x2b, 0x33);
const READINGS: RGBColor = RGBColor(0x0b, 0x4f, 0x6c);
const PEERS: RGBColor = RGBColor(0x9a, 0x5b, 0x13);
const BAND: RGBColor = RGBColor(0x8f, 0xb8, 0x9a);
const ONSET: RGBColor = RGBColor(0xb3, 0x26, 0x1e);
const DETECTED: RGBColor = RGBColor(0x55, 0x3a, 0x8a);
const GRID: RGBColor = RGBColor(0xd9, 0xdd, 0xe0);

/// The colour of a named series, as CSS hex (for the HTML legends).
pub fn series_colour(series: &str) -> &'static str {
    match series {
        "readings" => "#0b4f6c",
        "peers" => "#9a5b13",
        "band" => "#8fb89a",
        "onset" => "#b3261e",
        "detected" => "#553a8a",
        _ => "#222b33",
    }
}

/// Size and furniture of one sensor chart.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Frame {
    pub(crate) width: u32,
    pub(crate) height: u32,
    /// Time axis labels (0: none).
    pub(crate) x_labels: usize,
    /// Font size of the labels as plotters takes it (it draws about 0.7 of it), px.
    pub(crate) font: u32,
}

/// One layer: a class for its `<g>` and what to draw.
enum Layer<'a> {
    Axes,
    Band(&'a [Option<[f64; 2]>]),
    Line(Vec<Vec<(i64, f64)>>),
    Dashed(Vec<Vec<(i64, f64)>>),
    Mark { t: i64, label: &'static str, colour: RGBColor, triangle: bool },
}

fn err(chart: &str, e: impl std::fmt::Display) -> ChartError {
    ChartError { chart: chart.to_owned(), message: e.to_string() }
}

/// The elements between plotters' `<svg ...>` and `</svg>`.
fn inner(svg: &str) -> &str {
    let start = svg.find('>').map_or(0, |i| i + 1);
    let end = svg.rfind("</svg>").unwrap_or(svg.len());
    svg.get(start..end).unwrap_or("").trim()
}

fn day_label(ms: &i64) -> String {
    from_millis(*ms).format("%d %b %H:%M").to_string()
}

fn value_label(v: &f64) -> String {
    let a = v.abs();
    if a >= 1000.0 {
        format!("{v:.0}")
    } else if a >= 10.0 {
        format!("{v:.1}")
    } else {
        format!("{v:.2}")
    }
}

/// Value range of a chart: readings, band and peers, padded by 5 %.
fn y_range(c: &SensorChart) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for m in c.columns.iter().flatten() {
        lo = lo.min(m.min);
        hi = hi.max(m.max);
    }
    for b in c.band.iter().flatten() {
        lo = lo.min(b[0]);
        hi = hi.max(b[1]);
    }
    for p in c.peers.iter().flatten() {
        lo = lo.min(*p);
        hi = hi.max(*p);
    }
    if !lo.is_finite() || !hi.is_finite() {
        return (0.0, 1.0);
    }
    let pad = if hi > lo { 0.05 * (hi - lo) } else { 0.5_f64.max(0.05 * hi.abs()) };
    (lo - pad, hi + pad)
}

/// Column `i`'s start time of `[from, to)` cut into `n`.
fn col_start(from: i64, to: i64, n: usize, i: usize) -> i64 {
    from + ((i128::from(to - from) * i as i128) / n.max(1) as i128) as i64
}

/// The band as closed step polygons, one per run of columns with a band.
fn band_polygons(from: i64, to: i64, band: &[Option<[f64; 2]>]) -> Vec<Vec<(i64, f64)>> {
    let n = band.len();
    let mut out = Vec::new();
    let mut upper: Vec<(i64, f64)> = Vec::new();
    let mut lower: Vec<(i64, f64)> = Vec::new();
    let close = |upper: &mut Vec<(i64, f64)>, lower: &mut Vec<(i64, f64)>, out: &mut Vec<_>| {
        if !upper.is_empty() {
            let mut poly = std::mem::take(upper);
            poly.extend(lower.drain(..).rev());
            out.push(poly);
        }
    };
    for (i, b) in band.iter().enumerate() {
        match b {
            Some([lo, hi]) => {
                let (a, z) = (col_start(from, to, n, i), col_start(from, to, n, i + 1));
                // a column with the same band as the one before only moves the run's end
                let same = upper.last().is_some_and(|p| p.1 == *hi)
                    && lower.last().is_some_and(|p| p.1 == *lo);
                if same {
                    if let Some(p) = upper.last_mut() {
                        p.0 = z;
                    }
                    if let Some(p) = lower.last_mut() {
                        p.0 = z;
                    }
                } else {
                    upper.extend([(a, *hi), (z, *hi)]);
                    lower.extend([(a, *lo), (z, *lo)]);
                }
            }
            None => close(&mut upper, &mut lower, &mut out),
        }
    }
    close(&mut upper, &mut lower, &mut out);
    out
}

/// The peers' median as runs of points at column centres.
fn peer_runs(c: &SensorChart) -> Vec<Vec<(i64, f64)>> {
    let n = c.peers.len();
    let mut runs = Vec::new();
    let mut cur = Vec::new();
    for (i, p) in c.peers.iter().enumerate() {
        match p {
            Some(v) => {
                let mid = (col_start(c.from_ms, c.to_ms, n, i)
                    + col_start(c.from_ms, c.to_ms, n, i + 1))
                    / 2;
                cur.push((mid, *v));
            }
            None if !cur.is_empty() => runs.push(std::mem::take(&mut cur)),
            None => {}
        }
    }
    if !cur.is_empty() {
        runs.push(cur);
    }
    runs
}

fn draw_layer(
    name: &str,
    f: Frame,
    x: (i64, i64),
    y: (f64, f64),
    layer: &Layer<'_>,
    y_desc: &str,
) -> Result<String, ChartError> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (f.width, f.height)).into_drawing_area();
        let mut chart = ChartBuilder::on(&root)
            .margin(6)
            .margin_right(14)
            .x_label_area_size(if f.x_labels > 0 { 2 * f.font + 6 } else { 4 })
            .y_label_area_size(5 * f.font + 8)
            .build_cartesian_2d(x.0..x.1, y.0..y.1)
            .map_err(|e| err(name, e))?;
        let label = ("sans-serif", f.font).into_font().color(&INK);
        match layer {
            Layer::Axes => {
                let mut mesh = chart.configure_mesh();
                mesh.light_line_style(TRANSPARENT)
                    .bold_line_style(GRID)
                    .axis_style(INK.mix(0.6))
                    .label_style(label.clone())
                    .x_labels(f.x_labels)
                    .y_labels(5)
                    .x_label_formatter(&day_label)
                    .y_label_formatter(&value_label)
                    .y_desc(y_desc)
                    .axis_desc_style(label);
                mesh.draw().map_err(|e| err(name, e))?;
            }
            Layer::Band(band) => {
                for poly in band_polygons(x.0, x.1, band) {
                    chart
                        .draw_series(std::iter::once(Polygon::new(
                            poly.clone(),
                            BAND.mix(0.35).filled(),
                        )))
                        .map_err(|e| err(name, e))?;
                    chart
                        .draw_series(std::iter::once(PathElement::new(poly, BAND.stroke_width(1))))
                        .map_err(|e| err(name, e))?;
                }
            }
            Layer::Line(runs) => {
                for run in runs {
                    if run.len() == 1 {
                        chart
                            .draw_series(std::iter::once(Circle::new(run[0], 2, READINGS.filled())))
                            .map_err(|e| err(name, e))?;
                    } else {
                        chart
                            .draw_series(LineSeries::new(
                                run.iter().copied(),
                                READINGS.stroke_width(1),
                            ))
                            .map_err(|e| err(name, e))?;
                    }
                }
            }
            Layer::Dashed(runs) => {
                // drawn solid; the page's CSS dashes `.tt-peers polyline` (one
                // element per run instead of one per dash)
                for run in runs {
                    chart
                        .draw_series(LineSeries::new(run.iter().copied(), PEERS.stroke_width(2)))
                        .map_err(|e| err(name, e))?;
                }
            }
            Layer::Mark { t, label: text, colour, triangle } => {
                let t = (*t).clamp(x.0, x.1);
                let top = y.1;
                let style = colour.stroke_width(2);
                if *triangle {
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(t, y.0), (t, top)],
                            style,
                        )))
                        .map_err(|e| err(name, e))?;
                    chart
                        .draw_series(std::iter::once(TriangleMarker::new(
                            (t, top),
                            6,
                            colour.filled(),
                        )))
                        .map_err(|e| err(name, e))?;
                } else {
                    // dotted by the page's CSS (`.tt-detected polyline`)
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(t, y.0), (t, top)],
                            colour.stroke_width(2),
                        )))
                        .map_err(|e| err(name, e))?;
                    // a diamond: a square turned by 45 degrees, drawn as a polygon in pixels
                    let d = 5;
                    chart
                        .draw_series(std::iter::once(
                            EmptyElement::at((t, top))
                                + Polygon::new(
                                    vec![(0, -d), (d, 0), (0, d), (-d, 0)],
                                    colour.filled(),
                                ),
                        ))
                        .map_err(|e| err(name, e))?;
                }
                let font = ("sans-serif", f.font).into_font().color(colour);
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((t, top))
                            + Text::new(*text, (8, if *triangle { 2 } else { 12 }), font),
                    ))
                    .map_err(|e| err(name, e))?;
            }
        }
        root.present().map_err(|e| err(name, e))?;
    }
    Ok(buf)
}

/// Draws one sensor's chart as an inline `<svg>` with one `<g>` per series.
/// `marks` adds the onset and detection lines (for a panel's main chart).
pub(crate) fn sensor_svg(
    c: &SensorChart,
    f: Frame,
    marks: Option<(i64, i64)>,
    title: &str,
) -> Result<String, ChartError> {
    let x = (c.from_ms, c.to_ms);
    let y = y_range(c);
    let unit = c.unit.as_deref().map_or(String::new(), |u| format!(" [{u}]"));
    let y_desc = format!("{}{unit}", c.sensor);
    let mut layers: Vec<(&str, Layer<'_>)> = vec![("tt-axes", Layer::Axes)];
    if c.band.iter().any(Option::is_some) {
        layers.push(("tt-band", Layer::Band(&c.band)));
    }
    if !c.peers.is_empty() {
        layers.push(("tt-peers", Layer::Dashed(peer_runs(c))));
    }
    layers.push(("tt-readings", Layer::Line(line_runs(&c.columns))));
    if let Some((onset, detected)) = marks {
        layers.push((
            "tt-onset",
            Layer::Mark { t: onset, label: "onset", colour: ONSET, triangle: true },
        ));
        layers.push((
            "tt-detected",
            Layer::Mark { t: detected, label: "detected", colour: DETECTED, triangle: false },
        ));
    }
    let mut out = format!(
        "<svg class=\"tt-chart\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" \
         role=\"img\" aria-label=\"{title}\" data-sensor=\"{s}\">",
        w = f.width,
        h = f.height,
        title = super::escape_html(title),
        s = super::escape_html(&c.sensor),
    );
    out.push_str(&format!("<title>{}</title>", super::escape_html(title)));
    for (class, layer) in &layers {
        let svg = draw_layer(&c.sensor, f, x, y, layer, &y_desc)?;
        out.push_str(&format!("<g class=\"{class}\">{}</g>", inner(&svg)));
    }
    out.push_str("</svg>");
    Ok(out)
}

/// A scatter of (x, y) points joined in order, with a text label at each
/// point, for the backtest's sensitivity curve and lead times.
pub(crate) fn xy_svg(
    name: &str,
    points: &[(f64, f64, String)],
    x_desc: &str,
    y_desc: &str,
    size: (u32, u32),
    join: bool,
) -> Result<String, ChartError> {
    let fin: Vec<&(f64, f64, String)> =
        points.iter().filter(|p| p.0.is_finite() && p.1.is_finite()).collect();
    let (mut x0, mut x1, mut y0, mut y1) = (0.0_f64, 1.0_f64, 0.0_f64, 1.0_f64);
    for p in &fin {
        x0 = x0.min(p.0);
        x1 = x1.max(p.0);
        y0 = y0.min(p.1);
        y1 = y1.max(p.1);
    }
    let (xp, yp) = (0.08 * (x1 - x0), 0.12 * (y1 - y0));
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, size).into_drawing_area();
        let mut chart = ChartBuilder::on(&root)
            .margin(8)
            // room for the label of the rightmost point
            .margin_right(120)
            .x_label_area_size(34)
            .y_label_area_size(54)
            .build_cartesian_2d(x0..x1 + xp, y0..y1 + yp)
            .map_err(|e| err(name, e))?;
        let label = ("sans-serif", 14).into_font().color(&INK);
        chart
            .configure_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(GRID)
            .axis_style(INK.mix(0.6))
            .label_style(label.clone())
            .x_desc(x_desc)
            .y_desc(y_desc)
            .axis_desc_style(label.clone())
            .x_label_formatter(&value_label)
            .y_label_formatter(&value_label)
            .draw()
            .map_err(|e| err(name, e))?;
        if join && fin.len() > 1 {
            chart
                .draw_series(LineSeries::new(
                    fin.iter().map(|p| (p.0, p.1)),
                    READINGS.stroke_width(1),
                ))
                .map_err(|e| err(name, e))?;
        }
        for p in &fin {
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at((p.0, p.1))
                        + Rectangle::new([(-3, -3), (3, 3)], READINGS.filled())
                        + Text::new(p.2.clone(), (6, -14), label.clone()),
                ))
                .map_err(|e| err(name, e))?;
        }
        root.present().map_err(|e| err(name, e))?;
    }
    Ok(format!(
        "<svg class=\"tt-chart tt-xy\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" \
         role=\"img\" aria-label=\"{t}\"><title>{t}</title><g class=\"tt-points\">{}</g></svg>",
        inner(&buf),
        w = size.0,
        h = size.1,
        t = super::escape_html(name),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use telltale_models::downsample::minmax_columns;

    fn chart() -> SensorChart {
        let ts: Vec<i64> = (0..100).map(|i| i * 1000).collect();
        let v: Vec<f64> = (0..100).map(|i| f64::from(i % 7)).collect();
        SensorChart {
            sensor: "bearing_de".into(),
            unit: Some("degC".into()),
            role: "condition",
            from_ms: 0,
            to_ms: 100_000,
            columns: minmax_columns(&ts, &v, 0, 100_000, 20),
            band: vec![Some([1.0, 5.0]); 20],
            peers: vec![Some(3.0); 10],
            peer_assets: vec!["north-b2".into()],
            range: None,
        }
    }

    #[test]
    fn every_series_gets_its_own_group() {
        let f = Frame { width: 600, height: 200, x_labels: 5, font: 11 };
        let svg = sensor_svg(&chart(), f, Some((10_000, 20_000)), "t").unwrap();
        for class in ["tt-axes", "tt-band", "tt-peers", "tt-readings", "tt-onset", "tt-detected"] {
            assert!(svg.contains(&format!("<g class=\"{class}\">")), "{class}");
        }
        assert!(!svg.contains("http"), "no namespace or link in inline svg");
        assert_eq!(svg.matches("<svg").count(), 1);
        assert!(svg.contains("\nonset\n</text>"), "the onset is labelled in text");
    }

    #[test]
    fn band_polygons_break_at_missing_columns() {
        let mut c = chart();
        c.band[5] = None;
        let polys = band_polygons(c.from_ms, c.to_ms, &c.band);
        assert_eq!(polys.len(), 2);
        // one band over the 5 columns before the break: 2 points on each edge
        assert_eq!(polys[0].len(), 4);
        assert_eq!(polys[0][1].0, 25_000);
    }
}

//! The weekly reliability review (`telltale report`): one self-contained
//! HTML file (inline SVG and CSS, no network requests) or a Markdown list.
//!
//! ```text
//!  run_scan [from, to)            ─► ranked suspicions with evidence
//!  run_scan [from − len, from)    ─► the previous period: new / continuing / closed
//!  history [from, to) ─ for_each_asset ─ par_iter (rayon):
//!        align on the stored baseline's grid ─ regime of every row
//!        ─ per asset: regime shares, time in band, coverage, gaps, out of range
//!        ─ per sensor: mean per peer column (for the peers' median), last day in band
//!        ─ panel assets only: min/max per pixel column of every sensor and
//!          the baseline band of each column's majority regime
//!  ─► Report (plain data, serialisable) ─► html::render / markdown::render
//! ```
//!
//! Nothing here judges anything: the verdicts, scores and evidence are the
//! scan's ([`crate::jobs::run_scan`]); this module only gathers and draws.
//!
//! | constant | value | meaning |
//! |---|---|---|
//! | [`DEFAULT_PANEL_CAP`] | 50 | panels drawn (the top of the ranked list); the rest are listed only |
//! | [`MAIN_COLUMNS`] | 720 | pixel columns of a panel's main chart (min/max per column, [`telltale_models::downsample`]) |
//! | [`SPARK_FACTOR`] | 3 | main columns joined per column of a neighbouring sensor's small chart (240 columns) |
//! | [`PEER_COLUMNS`] | 240 | columns of the peers' median (each peer's mean per column, then the median across peers) |
//! | [`BAND_SIGMA`] | 3 | half-width of the baseline band, robust sigma (location ± 3 × MAD-based scale of the row's regime) |
//! | [`GAP_ROWS`] | 3 | grid rows without a reading, at least, that count as a gap (common practice, no source) |

mod chart;
mod gather;
pub mod html;
pub mod markdown;

pub use chart::{ChartError, series_colour};
pub use gather::{
    AssetSummary, BacktestFigures, FleetSummary, Item, Panel, RegimeShare, Report, ReportSettings,
    SensorChart, SensorQuality, Status, TimeInBand, read_backtest, run_report,
};

/// Panels drawn by default.
pub const DEFAULT_PANEL_CAP: usize = 50;
/// Pixel columns of a panel's main chart.
pub const MAIN_COLUMNS: usize = 720;
/// Main columns per column of a neighbouring sensor's chart.
pub const SPARK_FACTOR: usize = 3;
/// Columns of the peers' median.
pub const PEER_COLUMNS: usize = 240;
/// Half-width of the baseline band in robust sigma.
pub const BAND_SIGMA: f64 = 3.0;
/// Least run of grid rows without a reading that counts as a gap.
pub const GAP_ROWS: usize = 3;

/// The caution every report carries.
pub const CAUTION: &str = "telltale is decision support, not a protective or safety function. \
It does not replace alarms, trips, interlocks or inspections. Check every finding against the \
readings and the site, and defer to site procedures, local codes and licensed practice before \
acting.";

/// Escapes text for HTML element content and quoted attribute values.
pub fn escape_html(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escape_html_escapes_the_five_characters() {
        assert_eq!(
            escape_html(r#"<a href="x">Tom & 'Jerry'</a>"#),
            "&lt;a href=&quot;x&quot;&gt;Tom &amp; &#39;Jerry&#39;&lt;/a&gt;"
        );
    }
}

//! The report as Markdown (for e-mail and work-order attachments): the
//! period, the counts, the ranked list in the same order as the HTML page,
//! and the caution.

use super::CAUTION;
use super::gather::{Item, Report};
use crate::time::from_millis;
use std::fmt::Write as _;

/// Escapes text for a Markdown table cell.
fn cell(s: &str) -> String {
    s.replace('\\', "\\\\").replace('|', "\\|").replace('\n', " ")
}

fn table(out: &mut String, items: &[Item]) {
    out.push_str("| Rank | Status | Asset | Sensor | Verdict | Score | Onset | Id | Summary |\n");
    out.push_str("|---:|---|---|---|---|---:|---|---|---|\n");
    for it in items {
        let s = &it.suspicion;
        let _ = writeln!(
            out,
            "| {} | {} | {} | {} | {} / {} | {:.2} | {} | `{}` | {} |",
            s.rank,
            it.status.as_str(),
            cell(&s.asset),
            s.sensor.as_deref().map_or("(asset)".to_owned(), cell),
            s.class.as_str(),
            s.mode.as_str(),
            s.score,
            s.onset.format("%Y-%m-%d %H:%M"),
            s.id,
            cell(&s.summary)
        );
    }
}

/// Renders the report as Markdown.
pub fn render(r: &Report) -> String {
    let mut out = String::new();
    let f = &r.fleet;
    let _ = writeln!(
        out,
        "# Weekly reliability review, {} to {}\n",
        from_millis(r.from_ms).format("%Y-%m-%d %H:%M UTC"),
        from_millis(r.to_ms).format("%Y-%m-%d %H:%M UTC")
    );
    let _ = writeln!(out, "> **Caution.** {CAUTION}\n");
    let classes: Vec<String> =
        f.by_class.iter().map(|(c, n)| format!("{n} {}", c.as_str())).collect();
    let _ = writeln!(
        out,
        "{} assets, {} sensors, data coverage {:.0} %. {} suspicion(s): {}; {} new, {} continuing, \
         {} closed since the previous period.\n",
        f.assets,
        f.sensors,
        100.0 * f.coverage,
        r.items.len(),
        classes.join(", "),
        f.new,
        f.continuing,
        f.closed
    );
    out.push_str("## Ranked suspicions\n\n");
    if r.items.is_empty() {
        out.push_str("No suspicions this period.\n");
    } else {
        table(&mut out, &r.items);
    }
    if !r.earlier.is_empty() {
        out.push_str("\n## Raised last period, not raised again\n\n");
        table(&mut out, &r.earlier);
    }
    let _ = writeln!(out, "\n---\n\n{CAUTION}\n\ntelltale {}", r.telltale_version);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_escape_pipes_and_newlines() {
        assert_eq!(cell("a|b\nc"), "a\\|b c");
    }
}

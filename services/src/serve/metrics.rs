//! Counters and latency histograms, rendered in the Prometheus text
//! exposition format (version 0.0.4).

use std::collections::BTreeMap;
use std::fmt::Write;
use std::sync::Mutex;

/// Upper bounds of the latency buckets, seconds.
pub const BUCKETS_S: [f64; 12] =
    [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 10.0];

#[derive(Debug, Default, Clone)]
struct Histogram {
    counts: [u64; BUCKETS_S.len()],
    sum_s: f64,
    count: u64,
}

#[derive(Debug, Default)]
struct Inner {
    requests: BTreeMap<(String, String, u16), u64>,
    latency: BTreeMap<String, Histogram>,
    windows: u64,
    readings: u64,
    suspicions: BTreeMap<String, u64>,
}

/// The service's metrics.
#[derive(Debug, Default)]
pub struct Metrics {
    inner: Mutex<Inner>,
}

fn escape(s: &str) -> String {
    s.replace('\\', "\\\\").replace('"', "\\\"").replace('\n', "\\n")
}

impl Metrics {
    fn lock(&self) -> std::sync::MutexGuard<'_, Inner> {
        self.inner.lock().unwrap_or_else(std::sync::PoisonError::into_inner)
    }

    /// Counts one request to `route` (the route's pattern, not the raw path).
    pub fn request(&self, route: &str, method: &str, status: u16, seconds: f64) {
        let mut m = self.lock();
        *m.requests.entry((route.to_owned(), method.to_owned(), status)).or_default() += 1;
        let h = m.latency.entry(route.to_owned()).or_default();
        for (c, &b) in h.counts.iter_mut().zip(&BUCKETS_S) {
            if seconds <= b {
                *c += 1;
            }
        }
        h.sum_s += seconds;
        h.count += 1;
    }

    /// Counts one scored window with its readings and the classes of its suspicions.
    pub fn window(&self, readings: usize, classes: &[&str]) {
        let mut m = self.lock();
        m.windows += 1;
        m.readings += readings as u64;
        for c in classes {
            *m.suspicions.entry((*c).to_owned()).or_default() += 1;
        }
    }

    /// The text exposition; `stored` adds the stored suspicions by (class, status).
    pub fn render(&self, stored: &[(String, String, i64)]) -> String {
        let m = self.lock();
        let mut o = String::new();
        let _ = writeln!(
            o,
            "# HELP telltale_http_requests_total HTTP requests by route, method and status."
        );
        let _ = writeln!(o, "# TYPE telltale_http_requests_total counter");
        for ((r, meth, s), n) in &m.requests {
            let _ = writeln!(
                o,
                "telltale_http_requests_total{{route=\"{}\",method=\"{meth}\",status=\"{s}\"}} {n}",
                escape(r)
            );
        }
        let _ = writeln!(
            o,
            "# HELP telltale_http_request_duration_seconds Time to answer a request, by route."
        );
        let _ = writeln!(o, "# TYPE telltale_http_request_duration_seconds histogram");
        for (r, h) in &m.latency {
            let r = escape(r);
            for (c, b) in h.counts.iter().zip(&BUCKETS_S) {
                let _ = writeln!(
                    o,
                    "telltale_http_request_duration_seconds_bucket{{route=\"{r}\",le=\"{b}\"}} {c}"
                );
            }
            let _ = writeln!(
                o,
                "telltale_http_request_duration_seconds_bucket{{route=\"{r}\",le=\"+Inf\"}} {}",
                h.count
            );
            let _ = writeln!(
                o,
                "telltale_http_request_duration_seconds_sum{{route=\"{r}\"}} {}",
                h.sum_s
            );
            let _ = writeln!(
                o,
                "telltale_http_request_duration_seconds_count{{route=\"{r}\"}} {}",
                h.count
            );
        }
        let _ = writeln!(
            o,
            "# HELP telltale_windows_scored_total Windows scored since the service started."
        );
        let _ = writeln!(o, "# TYPE telltale_windows_scored_total counter");
        let _ = writeln!(o, "telltale_windows_scored_total {}", m.windows);
        let _ =
            writeln!(o, "# HELP telltale_readings_scored_total Readings in the scored windows.");
        let _ = writeln!(o, "# TYPE telltale_readings_scored_total counter");
        let _ = writeln!(o, "telltale_readings_scored_total {}", m.readings);
        let _ = writeln!(
            o,
            "# HELP telltale_window_suspicions_total Suspicions returned by scoring, by class."
        );
        let _ = writeln!(o, "# TYPE telltale_window_suspicions_total counter");
        for (c, n) in &m.suspicions {
            let _ = writeln!(o, "telltale_window_suspicions_total{{class=\"{}\"}} {n}", escape(c));
        }
        let _ = writeln!(
            o,
            "# HELP telltale_stored_suspicions Suspicions in the database, by class and status."
        );
        let _ = writeln!(o, "# TYPE telltale_stored_suspicions gauge");
        for (c, s, n) in stored {
            let _ = writeln!(
                o,
                "telltale_stored_suspicions{{class=\"{}\",status=\"{}\"}} {n}",
                escape(c),
                escape(s)
            );
        }
        o
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]
    use super::*;

    #[test]
    fn histogram_buckets_are_cumulative() {
        let m = Metrics::default();
        m.request("/v1/assets", "GET", 200, 0.003);
        m.request("/v1/assets", "GET", 200, 0.2);
        m.request("/v1/assets", "GET", 404, 20.0);
        let t = m.render(&[]);
        // cumulative counts per the exposition format: le=0.005 holds 1, le=0.25 holds 2, +Inf 3
        assert!(t.contains("_bucket{route=\"/v1/assets\",le=\"0.005\"} 1\n"), "{t}");
        assert!(t.contains("_bucket{route=\"/v1/assets\",le=\"0.25\"} 2\n"), "{t}");
        assert!(t.contains("_bucket{route=\"/v1/assets\",le=\"+Inf\"} 3\n"), "{t}");
        assert!(t.contains("route=\"/v1/assets\",method=\"GET\",status=\"404\"} 1\n"), "{t}");
    }
}

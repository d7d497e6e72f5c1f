//! Downsampling a time series for a chart: the minimum and the maximum per
//! pixel column.
//!
//! ```text
//!  span [from, to) cut into n equal columns, column i = [from + i·w, from + (i+1)·w), w = (to − from)/n
//!  per column: the smallest and the largest finite value with their times
//!  points of column i, in time order: (t_min, min), (t_max, max)   (one point when they coincide)
//!  empty columns break the line (a gap in the data stays a gap in the chart)
//! ```
//!
//! A line through these points touches, in every pixel column, the same
//! lowest and highest pixel as a line through all the readings, so spikes
//! and dropouts stay visible however long the span; the output has at most
//! `2n` points whatever the input length. Columns combine exactly: the
//! column of `k` neighbouring columns has the smallest of their minima and
//! the largest of their maxima ([`coarsen`]), so one pass serves charts of
//! several widths.
//!
//! # References
//! U. Jugel, Z. Jerzak, G. Hackenbroich and V. Markl (2014), "M4: A
//! Visualization-Oriented Time Series Data Aggregation", *Proceedings of the
//! VLDB Endowment* 7(10), 797-808 (the min/max aggregation per pixel column
//! discussed there; M4 adds the first and last value of each column).

/// The extremes of one pixel column.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct MinMax {
    /// Smallest value in the column.
    pub min: f64,
    /// Time of the first reading with that value, ms.
    pub min_ms: i64,
    /// Largest value in the column.
    pub max: f64,
    /// Time of the first reading with that value, ms.
    pub max_ms: i64,
    /// Finite readings in the column.
    pub count: usize,
}

impl MinMax {
    fn new(t: i64, v: f64) -> Self {
        MinMax { min: v, min_ms: t, max: v, max_ms: t, count: 1 }
    }

    fn push(&mut self, t: i64, v: f64) {
        if v < self.min {
            self.min = v;
            self.min_ms = t;
        }
        if v > self.max {
            self.max = v;
            self.max_ms = t;
        }
        self.count += 1;
    }

    fn merge(&mut self, o: &MinMax) {
        if o.min < self.min || (o.min == self.min && o.min_ms < self.min_ms) {
            self.min = o.min;
            self.min_ms = o.min_ms;
        }
        if o.max > self.max || (o.max == self.max && o.max_ms < self.max_ms) {
            self.max = o.max;
            self.max_ms = o.max_ms;
        }
        self.count += o.count;
    }

    /// The column's points in time order: one when min and max are the
    /// same reading, else two.
    pub fn points(&self) -> impl Iterator<Item = (i64, f64)> {
        let a = (self.min_ms, self.min);
        let b = (self.max_ms, self.max);
        let (first, second) = if a.0 <= b.0 { (a, b) } else { (b, a) };
        let one = first == second;
        std::iter::once(first).chain((!one).then_some(second))
    }
}

/// Column of a time in `[from_ms, to_ms)` cut into `n` equal columns; `None`
/// outside the span or when `n == 0` or the span is empty.
pub fn column_of(t_ms: i64, from_ms: i64, to_ms: i64, n: usize) -> Option<usize> {
    if n == 0 || to_ms <= from_ms || t_ms < from_ms || t_ms >= to_ms {
        return None;
    }
    // i128: (t − from)·n does not overflow for any i64 span
    let i = (i128::from(t_ms - from_ms) * n as i128) / i128::from(to_ms - from_ms);
    usize::try_from(i).ok().filter(|&i| i < n)
}

/// Min and max per column of `[from_ms, to_ms)` cut into `n` columns.
/// Readings outside the span and non-finite values (missing readings) are
/// left out; a column with no reading is `None`. `ts_ms` need not be sorted.
///
/// # Panics
/// If `ts_ms` and `values` differ in length.
pub fn minmax_columns(
    ts_ms: &[i64],
    values: &[f64],
    from_ms: i64,
    to_ms: i64,
    n: usize,
) -> Vec<Option<MinMax>> {
    assert_eq!(ts_ms.len(), values.len(), "one time per value");
    let mut out: Vec<Option<MinMax>> = vec![None; n];
    for (&t, &v) in ts_ms.iter().zip(values) {
        if !v.is_finite() {
            continue;
        }
        if let Some(i) = column_of(t, from_ms, to_ms, n) {
            match &mut out[i] {
                Some(c) => c.push(t, v),
                slot @ None => *slot = Some(MinMax::new(t, v)),
            }
        }
    }
    out
}

/// Joins every `factor` neighbouring columns into one (the last one may
/// join fewer). `factor == 0` is taken as 1.
pub fn coarsen(columns: &[Option<MinMax>], factor: usize) -> Vec<Option<MinMax>> {
    columns
        .chunks(factor.max(1))
        .map(|chunk| {
            chunk.iter().flatten().fold(None, |acc: Option<MinMax>, c| match acc {
                None => Some(*c),
                Some(mut a) => {
                    a.merge(c);
                    Some(a)
                }
            })
        })
        .collect()
}

/// The chart lines: runs of points over consecutive non-empty columns, each
/// run in time order; an empty column ends a run.
pub fn line_runs(columns: &[Option<MinMax>]) -> Vec<Vec<(i64, f64)>> {
    let mut runs: Vec<Vec<(i64, f64)>> = Vec::new();
    let mut cur: Vec<(i64, f64)> = Vec::new();
    for c in columns {
        match c {
            Some(c) => cur.extend(c.points()),
            None if !cur.is_empty() => runs.push(std::mem::take(&mut cur)),
            None => {}
        }
    }
    if !cur.is_empty() {
        runs.push(cur);
    }
    runs
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hand-worked example of the min/max-per-column rule (Jugel et al. 2014):
    // span [0, 12) in 3 columns of width 4:
    //   column 0 = t 0..3: values 5, 1, 7, 3   -> min 1 at t=1, max 7 at t=2
    //   column 1 = t 4..7: NaN, NaN, NaN, NaN  -> empty (a gap)
    //   column 2 = t 8..11: 2, 9, 9, 4         -> min 2 at t=8, max 9 first at t=9
    // points: (1,1) (2,7) | gap | (8,2) (9,9)
    #[test]
    fn minmax_per_column_matches_the_hand_worked_example() {
        let ts: Vec<i64> = (0..12).collect();
        let nan = f64::NAN;
        let v = [5.0, 1.0, 7.0, 3.0, nan, nan, nan, nan, 2.0, 9.0, 9.0, 4.0];
        let cols = minmax_columns(&ts, &v, 0, 12, 3);
        assert_eq!(cols[0], Some(MinMax { min: 1.0, min_ms: 1, max: 7.0, max_ms: 2, count: 4 }));
        assert_eq!(cols[1], None);
        assert_eq!(cols[2], Some(MinMax { min: 2.0, min_ms: 8, max: 9.0, max_ms: 9, count: 4 }));
        assert_eq!(line_runs(&cols), vec![vec![(1, 1.0), (2, 7.0)], vec![(8, 2.0), (9, 9.0)]]);
    }

    #[test]
    fn max_before_min_keeps_time_order() {
        // column [0, 4): max 8 at t=0, min -1 at t=3 -> points (0,8), (3,-1)
        let cols = minmax_columns(&[3, 0, 1, 2], &[-1.0, 8.0, 2.0, 2.0], 0, 4, 1);
        assert_eq!(line_runs(&cols), vec![vec![(0, 8.0), (3, -1.0)]]);
    }

    #[test]
    fn a_single_reading_gives_one_point_and_out_of_span_readings_are_dropped() {
        let cols = minmax_columns(&[-5, 2, 10], &[100.0, 4.0, 100.0], 0, 10, 2);
        assert_eq!(line_runs(&cols), vec![vec![(2, 4.0)]]);
    }

    #[test]
    fn coarsening_equals_computing_at_the_coarser_width() {
        let ts: Vec<i64> = (0..1000).map(|i| i * 7).collect();
        let v: Vec<f64> =
            ts.iter().map(|&t| ((t as f64) * 0.013).sin() * (t % 11) as f64).collect();
        let fine = minmax_columns(&ts, &v, 0, 7000, 60);
        let direct = minmax_columns(&ts, &v, 0, 7000, 20);
        assert_eq!(coarsen(&fine, 3), direct);
    }

    #[test]
    fn at_most_two_points_per_column() {
        let ts: Vec<i64> = (0..10_000).collect();
        let v: Vec<f64> = ts.iter().map(|&t| ((t * 7919) % 1000) as f64).collect();
        let cols = minmax_columns(&ts, &v, 0, 10_000, 50);
        let n: usize = line_runs(&cols).iter().map(Vec::len).sum();
        assert!(n <= 100, "{n}");
        // the extremes of the whole series survive
        let all: Vec<f64> = line_runs(&cols).concat().iter().map(|p| p.1).collect();
        assert_eq!(all.iter().copied().fold(f64::INFINITY, f64::min), 0.0);
        assert_eq!(all.iter().copied().fold(f64::NEG_INFINITY, f64::max), 999.0);
    }

    #[test]
    fn column_of_handles_edges() {
        assert_eq!(column_of(0, 0, 10, 3), Some(0));
        assert_eq!(column_of(9, 0, 10, 3), Some(2));
        assert_eq!(column_of(10, 0, 10, 3), None);
        assert_eq!(column_of(-1, 0, 10, 3), None);
        assert_eq!(column_of(5, 0, 10, 0), None);
    }
}

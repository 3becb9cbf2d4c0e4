//! Cutting traces to the time window and thinning very dense traces for display.
//!
//! Thinning keeps, in every pixel column, the first and last vertex and the
//! vertices holding the column's lowest and highest value, in their original
//! order. Lines drawn inside one column only ever span the column's value
//! range, so what is lost is invisible at the figure's resolution, while
//! every peak, valley and vertical step stays a vertex.

/// The part of a time-ordered trace inside `[t0, t1]`, with vertices added
/// by linear interpolation where a segment crosses an edge.
pub(crate) fn clip_to_window(points: &[(f64, f64)], t0: f64, t1: f64) -> Vec<(f64, f64)> {
    let n = points.len();
    let first_inside = points.partition_point(|p| p.0 < t0);
    let first_after = points.partition_point(|p| p.0 <= t1);
    let mut out = Vec::with_capacity(first_after.saturating_sub(first_inside) + 2);
    if first_inside > 0 && first_inside < n && points[first_inside].0 > t0 {
        out.push(interpolate(
            points[first_inside - 1],
            points[first_inside],
            t0,
        ));
    }
    if first_inside < first_after {
        out.extend_from_slice(&points[first_inside..first_after]);
    }
    if first_after > 0 && first_after < n && points[first_after - 1].0 < t1 {
        out.push(interpolate(
            points[first_after - 1],
            points[first_after],
            t1,
        ));
    }
    out
}

fn interpolate(a: (f64, f64), b: (f64, f64), t: f64) -> (f64, f64) {
    let dt = b.0 - a.0;
    if dt > 0.0 {
        (t, a.1 + (b.1 - a.1) * ((t - a.0) / dt))
    } else {
        (t, b.1)
    }
}

/// Keeps first, lowest, highest and last vertex of every pixel column
/// (see the module docs). `column` maps a time to its column index and must
/// not decrease with time.
pub(crate) fn thin_per_column(
    points: &[(f64, f64)],
    column: impl Fn(f64) -> i64,
) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    let mut start = 0;
    while start < points.len() {
        let col = column(points[start].0);
        let mut end = start + 1;
        while end < points.len() && column(points[end].0) == col {
            end += 1;
        }
        keep_extremes(&points[start..end], &mut out);
        start = end;
    }
    out
}

/// Appends to `out` the first, lowest, highest and last vertex of a
/// non-empty `group`, in their order, each once.
fn keep_extremes(group: &[(f64, f64)], out: &mut Vec<(f64, f64)>) {
    let mut lowest = 0;
    let mut highest = 0;
    for (i, p) in group.iter().enumerate() {
        if p.1 < group[lowest].1 {
            lowest = i;
        }
        if p.1 > group[highest].1 {
            highest = i;
        }
    }
    let mut keep = [0, lowest, highest, group.len() - 1];
    keep.sort_unstable();
    let mut previous = None;
    for k in keep {
        if previous != Some(k) {
            out.push(group[k]);
            previous = Some(k);
        }
    }
}

/// The vertices of a trace, thinned where more than [`THIN_ABOVE`] fall
/// in one half-pixel column: such a column keeps its first, lowest,
/// highest and last vertex in time order, which draws the same envelope.
/// A window of millions of segments (a 100 MHz converter recorded for a
/// second) then costs memory in proportion to the figure's width, not to
/// the record; ordinary figures, with a few vertices per pixel, keep them
/// all.
pub(crate) struct Thinned {
    t0: f64,
    /// Columns per second.
    per_s: f64,
    column: Option<i64>,
    pending: Vec<(f64, f64)>,
    /// Whether the pending column was thinned already.
    thinned: bool,
    out: Vec<(f64, f64)>,
}

/// Vertices in one half-pixel column beyond which it is thinned.
const THIN_ABOVE: usize = 32;

impl Thinned {
    /// For a trace from `t0` over `span` seconds drawn `width_px` wide.
    pub(crate) fn new(t0: f64, span: f64, width_px: u32) -> Thinned {
        Thinned {
            t0,
            per_s: 2.0 * f64::from(width_px.max(1)) / span,
            column: None,
            pending: vec![],
            thinned: false,
            out: vec![],
        }
    }

    /// Adds the next vertex (times must not decrease).
    pub(crate) fn push(&mut self, p: (f64, f64)) {
        let c = ((p.0 - self.t0) * self.per_s).floor() as i64;
        if self.column != Some(c) {
            self.flush();
            self.column = Some(c);
        }
        self.pending.push(p);
        if self.pending.len() > 2 * THIN_ABOVE {
            self.reduce();
        }
    }

    /// Keeps the first, lowest, highest and last pending vertex.
    fn reduce(&mut self) {
        let mut kept = Vec::with_capacity(4);
        keep_extremes(&self.pending, &mut kept);
        self.pending = kept;
        self.thinned = true;
    }

    fn flush(&mut self) {
        if self.thinned || self.pending.len() > THIN_ABOVE {
            self.reduce();
        }
        self.thinned = false;
        self.out.append(&mut self.pending);
    }

    /// The thinned vertices, in time order.
    pub(crate) fn finish(mut self) -> Vec<(f64, f64)> {
        self.flush();
        self.out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipping_interpolates_at_both_edges() {
        let pts = [(0.0, 0.0), (1.0, 10.0), (2.0, 0.0)];
        let c = clip_to_window(&pts, 0.5, 1.5);
        assert_eq!(c, vec![(0.5, 5.0), (1.0, 10.0), (1.5, 5.0)]);
    }

    #[test]
    fn clipping_inside_one_segment_gives_its_two_ends() {
        let pts = [(0.0, 0.0), (4.0, 8.0)];
        assert_eq!(clip_to_window(&pts, 1.0, 3.0), vec![(1.0, 2.0), (3.0, 6.0)]);
    }

    #[test]
    fn clipping_keeps_steps_and_exact_edges() {
        let pts = [(0.0, 0.0), (1.0, 0.0), (1.0, 12.0), (2.0, 12.0)];
        assert_eq!(clip_to_window(&pts, 1.0, 2.0), pts[1..].to_vec());
        assert!(clip_to_window(&pts, 3.0, 4.0).is_empty());
        assert!(clip_to_window(&pts, -2.0, -1.0).is_empty());
    }

    #[test]
    fn thinning_keeps_every_column_extreme_in_order() {
        // A fast sawtooth: 1000 teeth in 10 columns.
        let pts: Vec<(f64, f64)> = (0..10_000)
            .map(|i| {
                (
                    i as f64,
                    if i % 10 == 3 {
                        5.0
                    } else {
                        (i % 7) as f64 * 0.1
                    },
                )
            })
            .collect();
        let thin = thin_per_column(&pts, |t| (t / 1000.0).floor() as i64);
        assert!(thin.len() <= 40);
        for col in 0..10 {
            let in_col = |p: &&(f64, f64)| (p.0 / 1000.0).floor() as i64 == col;
            let max_all = pts
                .iter()
                .filter(in_col)
                .map(|p| p.1)
                .fold(f64::MIN, f64::max);
            let min_all = pts
                .iter()
                .filter(in_col)
                .map(|p| p.1)
                .fold(f64::MAX, f64::min);
            let max_thin = thin
                .iter()
                .filter(in_col)
                .map(|p| p.1)
                .fold(f64::MIN, f64::max);
            let min_thin = thin
                .iter()
                .filter(in_col)
                .map(|p| p.1)
                .fold(f64::MAX, f64::min);
            assert_eq!((max_all, min_all), (max_thin, min_thin));
        }
        assert!(thin.windows(2).all(|w| w[0].0 <= w[1].0));
        assert_eq!(thin.first(), pts.first());
        assert_eq!(thin.last(), pts.last());
    }
}

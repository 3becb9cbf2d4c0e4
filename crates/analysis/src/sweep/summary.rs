//! The summary of a table: per figure, spread, percentiles and the point
//! where the worst case happens, with its parameter values.
//!
//! Everything is computed in point order from the table alone, so a merged
//! table gives the summary of a single run, bit for bit.

use serde::Serialize;

use super::spec::Worst;
use super::table::{Status, Table};

/// A point named in a summary, with its parameter values.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PointRef {
    /// Point index.
    pub point: u64,
    /// Monte Carlo sample number, with Monte Carlo.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sample: Option<u64>,
    /// The figure's value there.
    pub value: f64,
    /// Parameter values there, as (path, value) in column order.
    pub parameters: Vec<(String, f64)>,
}

/// Percentiles by linear interpolation between order statistics (the
/// usual definition 7 of R. J. Hyndman & Y. Fan, The American
/// Statistician 1996).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Percentiles {
    /// 1st percentile.
    pub p1: f64,
    /// 5th percentile.
    pub p5: f64,
    /// Median.
    pub p50: f64,
    /// 95th percentile.
    pub p95: f64,
    /// 99th percentile.
    pub p99: f64,
}

/// The spread of one figure over the points where it was measured.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FigureSummary {
    /// Figure name.
    pub name: String,
    /// Its unit.
    pub unit: String,
    /// Points where it was measured.
    pub count: u64,
    /// Which end is the worst case.
    pub worst_is: Worst,
    /// The worst-case point: `max` or `min`, as `worst_is` says.
    pub worst: Option<PointRef>,
    /// Smallest value and where (first such point).
    pub min: Option<PointRef>,
    /// Largest value and where (first such point).
    pub max: Option<PointRef>,
    /// Mean.
    pub mean: Option<f64>,
    /// Sample standard deviation (n − 1 in the denominator; 0 for one point).
    pub std_dev: Option<f64>,
    /// Percentiles.
    pub percentiles: Option<Percentiles>,
}

/// The summary of a sweep's table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Summary {
    /// Fingerprint of the sweep.
    pub fingerprint: String,
    /// Points in the table.
    pub points: u64,
    /// Points per status: ok, invalid, stopped, failed.
    pub ok: u64,
    /// Points whose circuit failed validation.
    pub invalid: u64,
    /// Points whose run stopped on a diagnostic.
    pub stopped: u64,
    /// Points where a figure could not be measured.
    pub failed: u64,
    /// The first failing point's message, if any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub first_failure: Option<String>,
    /// One entry per figure.
    pub figures: Vec<FigureSummary>,
}

fn percentile(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

impl Summary {
    /// Summarises a table.
    pub fn of(table: &Table) -> Summary {
        let count = |s: Status| table.rows.iter().filter(|r| r.status == s).count() as u64;
        let at = |k: usize, v: f64| {
            let r = &table.rows[k];
            PointRef {
                point: r.point,
                sample: r.sample,
                value: v,
                parameters: table
                    .meta
                    .parameters
                    .iter()
                    .zip(&r.values)
                    .map(|(c, &x)| (c.name.clone(), x))
                    .collect(),
            }
        };
        let figures = table
            .meta
            .figures
            .iter()
            .enumerate()
            .map(|(j, col)| {
                let vals: Vec<(usize, f64)> = table
                    .rows
                    .iter()
                    .enumerate()
                    .filter_map(|(k, r)| r.figures[j].map(|v| (k, v)))
                    .collect();
                let n = vals.len();
                let mut s = FigureSummary {
                    name: col.name.clone(),
                    unit: col.unit.clone(),
                    count: n as u64,
                    worst_is: col.worst.unwrap_or_default(),
                    worst: None,
                    min: None,
                    max: None,
                    mean: None,
                    std_dev: None,
                    percentiles: None,
                };
                if n == 0 {
                    return s;
                }
                // First point wins a tie (strict comparisons in point order).
                let (mut kmin, mut kmax) = (vals[0], vals[0]);
                for &(k, v) in &vals[1..] {
                    if v < kmin.1 {
                        kmin = (k, v);
                    }
                    if v > kmax.1 {
                        kmax = (k, v);
                    }
                }
                let mean = vals.iter().map(|x| x.1).sum::<f64>() / n as f64;
                let var = if n > 1 {
                    vals.iter().map(|x| (x.1 - mean).powi(2)).sum::<f64>() / (n - 1) as f64
                } else {
                    0.0
                };
                let mut sorted: Vec<f64> = vals.iter().map(|x| x.1).collect();
                sorted.sort_by(f64::total_cmp);
                s.worst = Some(match s.worst_is {
                    Worst::Max => at(kmax.0, kmax.1),
                    Worst::Min => at(kmin.0, kmin.1),
                });
                s.min = Some(at(kmin.0, kmin.1));
                s.max = Some(at(kmax.0, kmax.1));
                s.mean = Some(mean);
                s.std_dev = Some(var.sqrt());
                s.percentiles = Some(Percentiles {
                    p1: percentile(&sorted, 0.01),
                    p5: percentile(&sorted, 0.05),
                    p50: percentile(&sorted, 0.5),
                    p95: percentile(&sorted, 0.95),
                    p99: percentile(&sorted, 0.99),
                });
                s
            })
            .collect();
        Summary {
            fingerprint: table.meta.fingerprint.clone(),
            points: table.rows.len() as u64,
            ok: count(Status::Ok),
            invalid: count(Status::Invalid),
            stopped: count(Status::Stopped),
            failed: count(Status::Failed),
            first_failure: table
                .rows
                .iter()
                .find(|r| r.status != Status::Ok)
                .map(|r| format!("point {}: {}", r.point, r.message)),
            figures,
        }
    }

    /// The summary as pretty JSON text.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("a summary always serializes") + "\n"
    }
}

#[cfg(test)]
mod tests {
    use super::percentile;

    #[test]
    fn percentiles_interpolate() {
        let v = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert_eq!(percentile(&v, 0.5), 3.0);
        assert_eq!(percentile(&v, 0.25), 2.0);
        assert_eq!(percentile(&v, 0.1), 1.4);
        assert_eq!(percentile(&[7.0], 0.99), 7.0);
    }
}

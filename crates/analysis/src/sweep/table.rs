//! The result table: one row per point, as CSV; shard files and merging.
//!
//! Numbers are written as the shortest text that reads back to the same
//! bits (plain decimals from 1e-4 to 1e15, exponent form outside), so a
//! table read back from CSV is the table that was written, and a merge of
//! shard tables writes the bytes a single run writes.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::spec::{PlotSpec, Worst};
use super::{Shard, SweepError};

/// How a point ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Every figure was measured.
    Ok,
    /// The point's circuit failed validation (or a tolerance could not be drawn).
    Invalid,
    /// The run stopped on a diagnostic (interrupted inductor current,
    /// shoot-through, chatter…).
    Stopped,
    /// The run finished but a figure could not be measured.
    Failed,
}

impl Status {
    /// The name written in the table.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::Invalid => "invalid",
            Status::Stopped => "stopped",
            Status::Failed => "failed",
        }
    }

    fn parse(text: &str) -> Option<Status> {
        [Status::Ok, Status::Invalid, Status::Stopped, Status::Failed]
            .into_iter()
            .find(|s| s.as_str() == text)
    }
}

/// A parameter or figure column.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Column {
    /// The parameter path or figure name.
    pub name: String,
    /// Its unit ("" for ratios).
    pub unit: String,
    /// For a figure: which end of its spread is the worst case.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub worst: Option<Worst>,
}

/// What a table holds besides its rows; the same for every shard of a sweep.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TableMeta {
    /// A hash of the sweep and its base circuit.
    pub fingerprint: String,
    /// Points of the whole sweep.
    pub points: u64,
    /// Whether rows carry a Monte Carlo sample number.
    pub monte_carlo: bool,
    /// Parameter columns.
    pub parameters: Vec<Column>,
    /// Figure columns.
    pub figures: Vec<Column>,
    /// The plots the sweep asks for, drawn from the table.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub plots: Vec<PlotSpec>,
}

/// One point's results.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    /// Point index, from 0.
    pub point: u64,
    /// Monte Carlo sample number (with Monte Carlo only).
    pub sample: Option<u64>,
    /// Parameter values, in column order.
    pub values: Vec<f64>,
    /// Figure values, in column order; `None` where not measured.
    pub figures: Vec<Option<f64>>,
    /// How the point ended.
    pub status: Status,
    /// Why it failed (empty when ok).
    pub message: String,
}

/// The results of a sweep or of one shard of it, rows in point order.
#[derive(Clone, Debug, PartialEq)]
pub struct Table {
    /// Columns and size of the sweep.
    pub meta: TableMeta,
    /// The rows, in increasing point order.
    pub rows: Vec<Row>,
}

/// `shard.json`: which shard a table is and of which sweep.
#[derive(Serialize, Deserialize)]
struct ShardFile {
    shard: [u64; 2],
    meta: TableMeta,
}

/// Shortest text that reads back to the same bits.
fn number(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || (1e-4..1e15).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

impl Table {
    /// A parameter column by path.
    pub fn column(&self, name: &str) -> Option<Vec<f64>> {
        let k = self.meta.parameters.iter().position(|c| c.name == name)?;
        Some(self.rows.iter().map(|r| r.values[k]).collect())
    }

    /// A figure column by name (`None` entries where not measured).
    pub fn figure(&self, name: &str) -> Option<Vec<Option<f64>>> {
        let k = self.meta.figures.iter().position(|c| c.name == name)?;
        Some(self.rows.iter().map(|r| r.figures[k]).collect())
    }

    /// Rows whose status is not ok.
    pub fn failures(&self) -> usize {
        self.rows.iter().filter(|r| r.status != Status::Ok).count()
    }

    fn header(&self) -> Vec<String> {
        let mut h = vec!["point".to_string()];
        if self.meta.monte_carlo {
            h.push("sample".into());
        }
        h.extend(self.meta.parameters.iter().map(|c| c.name.clone()));
        h.extend(self.meta.figures.iter().map(|c| c.name.clone()));
        h.push("status".into());
        h.push("message".into());
        h
    }

    /// The table as CSV: a header, then one row per point.
    pub fn to_csv(&self) -> String {
        let mut w = csv::WriterBuilder::new()
            .terminator(csv::Terminator::Any(b'\n'))
            .from_writer(vec![]);
        w.write_record(self.header()).expect("writing to memory");
        for r in &self.rows {
            let mut rec = vec![r.point.to_string()];
            if self.meta.monte_carlo {
                rec.push(r.sample.map(|s| s.to_string()).unwrap_or_default());
            }
            rec.extend(r.values.iter().map(|&v| number(v)));
            rec.extend(r.figures.iter().map(|f| f.map(number).unwrap_or_default()));
            rec.push(r.status.as_str().into());
            rec.push(r.message.clone());
            w.write_record(rec).expect("writing to memory");
        }
        String::from_utf8(w.into_inner().expect("writing to memory")).expect("CSV of UTF-8 text")
    }

    /// Reads a table written by [`Table::to_csv`] for a sweep with `meta`.
    ///
    /// # Errors
    ///
    /// [`SweepError::Table`] naming the line (with `what` as the file name)
    /// when the header or a cell does not match.
    pub fn from_csv(meta: TableMeta, text: &str, what: &str) -> Result<Table, SweepError> {
        let err = |line: u64, message: String| SweepError::Table {
            path: what.to_string(),
            message: format!("line {line}: {message}"),
        };
        let mut t = Table { meta, rows: vec![] };
        let mut r = csv::ReaderBuilder::new()
            .has_headers(false)
            .from_reader(text.as_bytes());
        let header = t.header();
        let mut lines = r.records();
        match lines.next() {
            Some(Ok(h)) if h.iter().eq(header.iter().map(String::as_str)) => {}
            _ => return Err(err(1, format!("expected the header {}", header.join(",")))),
        }
        let np = t.meta.parameters.len();
        let nf = t.meta.figures.len();
        for rec in lines {
            let rec = rec.map_err(|e| err(0, e.to_string()))?;
            let line = rec.position().map(|p| p.line()).unwrap_or(0);
            if rec.len() != header.len() {
                return Err(err(
                    line,
                    format!("{} cells, expected {}", rec.len(), header.len()),
                ));
            }
            let num = |k: usize| -> Result<f64, SweepError> {
                rec[k]
                    .parse()
                    .map_err(|_| err(line, format!("{}: not a number: {:?}", header[k], &rec[k])))
            };
            let int = |k: usize| -> Result<u64, SweepError> {
                rec[k]
                    .parse()
                    .map_err(|_| err(line, format!("{}: not an index: {:?}", header[k], &rec[k])))
            };
            let mut k = 0;
            let point = int(k)?;
            k += 1;
            let sample = if t.meta.monte_carlo {
                k += 1;
                Some(int(k - 1)?)
            } else {
                None
            };
            let values = (k..k + np).map(num).collect::<Result<Vec<_>, _>>()?;
            k += np;
            let figures = (k..k + nf)
                .map(|j| {
                    if rec[j].is_empty() {
                        Ok(None)
                    } else {
                        num(j).map(Some)
                    }
                })
                .collect::<Result<Vec<_>, _>>()?;
            k += nf;
            let status = Status::parse(&rec[k])
                .ok_or_else(|| err(line, format!("unknown status {:?}", &rec[k])))?;
            t.rows.push(Row {
                point,
                sample,
                values,
                figures,
                status,
                message: rec[k + 1].to_string(),
            });
        }
        Ok(t)
    }

    /// Writes this table as shard `shard` into `dir`: `table.csv` and
    /// `shard.json` (which sweep and which shard).
    ///
    /// # Errors
    ///
    /// [`SweepError::Io`] when the folder or a file cannot be written.
    pub fn write_shard(&self, dir: &Path, shard: Shard) -> Result<(), SweepError> {
        let info = ShardFile {
            shard: [shard.index, shard.count],
            meta: self.meta.clone(),
        };
        write(dir, "table.csv", &self.to_csv())?;
        write(
            dir,
            "shard.json",
            &(serde_json::to_string_pretty(&info).expect("shard info serializes") + "\n"),
        )
    }

    /// Reads a shard folder written by [`Table::write_shard`].
    ///
    /// # Errors
    ///
    /// [`SweepError::Io`], or [`SweepError::Table`] for a file that does
    /// not read back.
    pub fn read_shard(dir: &Path) -> Result<(Table, Shard), SweepError> {
        let info_path = dir.join("shard.json");
        let info: ShardFile =
            serde_json::from_str(&read(&info_path)?).map_err(|e| SweepError::Table {
                path: info_path.display().to_string(),
                message: e.to_string(),
            })?;
        let table_path = dir.join("table.csv");
        let t = Table::from_csv(
            info.meta,
            &read(&table_path)?,
            &table_path.display().to_string(),
        )?;
        Ok((
            t,
            Shard {
                index: info.shard[0],
                count: info.shard[1],
            },
        ))
    }

    /// Combines the tables of every shard of one sweep into the table a
    /// single run gives.
    ///
    /// # Errors
    ///
    /// [`SweepError::Merge`] when the shards belong to different sweeps or
    /// shard counts, a shard is missing or given twice, or a point is
    /// missing or repeated.
    pub fn merge(shards: Vec<(Table, Shard)>) -> Result<Table, SweepError> {
        let err = |m: String| SweepError::Merge(m);
        let Some(((first, s0), rest)) = shards.split_first() else {
            return Err(err("no shards given".into()));
        };
        let n = s0.count;
        let mut seen = vec![false; n as usize];
        for (t, s) in &shards {
            if t.meta != first.meta {
                return Err(err(format!(
                    "shard {}/{} is of another sweep (fingerprint {} vs {})",
                    s.index, s.count, t.meta.fingerprint, first.meta.fingerprint
                )));
            }
            if s.count != n || s.index >= n {
                return Err(err(format!(
                    "shard {}/{} does not match the shard count {n}",
                    s.index, s.count
                )));
            }
            if std::mem::replace(&mut seen[s.index as usize], true) {
                return Err(err(format!("shard {}/{n} is given twice", s.index)));
            }
        }
        if let Some(i) = seen.iter().position(|s| !s) {
            return Err(err(format!("shard {i}/{n} is missing")));
        }
        let _ = rest;
        let mut rows: Vec<Row> = shards
            .iter()
            .flat_map(|(t, _)| t.rows.iter().cloned())
            .collect();
        rows.sort_by_key(|r| r.point);
        for (k, r) in rows.iter().enumerate() {
            if r.point != k as u64 {
                return Err(err(format!(
                    "point {k} is {} (a shard was cut short or edited)",
                    if r.point > k as u64 {
                        "missing"
                    } else {
                        "repeated"
                    }
                )));
            }
        }
        if rows.len() as u64 != first.meta.points {
            return Err(err(format!(
                "{} points of {} (a shard was cut short)",
                rows.len(),
                first.meta.points
            )));
        }
        Ok(Table {
            meta: first.meta.clone(),
            rows,
        })
    }
}

fn read(path: &Path) -> Result<String, SweepError> {
    std::fs::read_to_string(path).map_err(|source| SweepError::Io {
        action: "read",
        path: path.display().to_string(),
        source,
    })
}

/// Writes `name` in `dir`, creating the folder.
pub(crate) fn write(dir: &Path, name: &str, text: &str) -> Result<(), SweepError> {
    let io = |source, path: &Path| SweepError::Io {
        action: "write",
        path: path.display().to_string(),
        source,
    };
    std::fs::create_dir_all(dir).map_err(|e| io(e, dir))?;
    let path = dir.join(name);
    std::fs::write(&path, text).map_err(|e| io(e, &path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_read_back_to_the_same_bits() {
        for v in [
            0.0,
            -0.0,
            0.1,
            1e-5,
            22e-6,
            6.0,
            1.0 / 3.0,
            2e15,
            -1e-300,
            123456.789,
        ] {
            let t = number(v);
            assert_eq!(t.parse::<f64>().unwrap().to_bits(), v.to_bits(), "{t}");
        }
        assert_eq!(number(22e-6), "2.2e-5");
        assert_eq!(number(0.5), "0.5");
    }
}

//! The figures of a sweep file's `plots` (docs/sweeps.md): a figure
//! against a parameter with one line per value of another, or a histogram
//! of a figure over every measured point. `fluxstep sweep` writes them as
//! files, and the report inlines them in its sweep section.

use fluxstep_analysis::sweep::{PlotSpec, Table};
use fluxstep_plot::format_si_short as si;

/// The sweep's plots in the order of its file, each with the file name
/// `fluxstep sweep` writes it under (`plot-K-FIGURE-vs-X.svg`,
/// `plot-K-FIGURE-histogram.svg`) and the figure, `None` where too few
/// points were measured to draw it.
pub fn plots(table: &Table) -> Vec<(String, Option<fluxstep_plot::Figure>)> {
    table
        .meta
        .plots
        .iter()
        .enumerate()
        .map(|(k, plot)| {
            let (name, figure) = match plot {
                PlotSpec::Lines { figure, x, lines } => (
                    format!("plot-{}-{figure}-vs-{x}.svg", k + 1),
                    lines_plot(table, figure, x, lines.as_deref()),
                ),
                PlotSpec::Histogram { figure, bins } => (
                    format!("plot-{}-{figure}-histogram.svg", k + 1),
                    histogram(table, figure, bins.unwrap_or(20) as usize),
                ),
            };
            (name.replace(['/', '\\', ' '], "_"), figure)
        })
        .collect()
}

/// A value with its unit for people ("12.01 V"); plain for unitless ones.
pub fn show(v: f64, unit: &str) -> String {
    if unit.is_empty() {
        format!("{v:.4}")
    } else {
        si(v, unit)
    }
}

/// Column index of a parameter and its unit.
fn param(table: &Table, name: &str) -> Option<(usize, String)> {
    let k = table.meta.parameters.iter().position(|c| c.name == name)?;
    Some((k, table.meta.parameters[k].unit.clone()))
}

/// A figure against parameter `x`, one line per value of parameter
/// `lines`; any other parameter is held at its value in the first
/// measured row (a slice of the grid). `None` with fewer than 2 points.
pub fn lines_plot(
    table: &Table,
    figure: &str,
    x: &str,
    lines: Option<&str>,
) -> Option<fluxstep_plot::Figure> {
    let j = table.meta.figures.iter().position(|c| c.name == figure)?;
    let unit = table.meta.figures[j].unit.clone();
    let (kx, x_unit) = param(table, x)?;
    let kl = lines.and_then(|l| param(table, l));
    let rows: Vec<_> = table
        .rows
        .iter()
        .filter(|r| r.figures[j].is_some())
        .collect();
    let first = rows.first()?;
    let held: Vec<usize> = (0..table.meta.parameters.len())
        .filter(|&k| k != kx && Some(k) != kl.as_ref().map(|l| l.0))
        .collect();
    let slice: Vec<_> = rows
        .iter()
        .filter(|r| {
            held.iter()
                .all(|&k| r.values[k].to_bits() == first.values[k].to_bits())
        })
        .collect();
    let mut groups: Vec<(f64, Vec<(f64, f64)>)> = vec![];
    for r in &slice {
        let key = kl.as_ref().map_or(0.0, |l| r.values[l.0]);
        let pt = (r.values[kx], r.figures[j].expect("filtered"));
        match groups.iter_mut().find(|g| g.0.to_bits() == key.to_bits()) {
            Some(g) => g.1.push(pt),
            None => groups.push((key, vec![pt])),
        }
    }
    if slice.len() < 2 {
        return None;
    }
    let mut panel = fluxstep_plot::Panel::new(format!("{figure} ({unit})"));
    for (key, mut pts) in groups {
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        let label = match (&kl, lines) {
            (Some((_, u)), Some(l)) => format!("{l} = {}", show(key, u)),
            _ => figure.to_string(),
        };
        panel = panel.with_trace(fluxstep_plot::Trace::new(label, unit.clone(), pts));
    }
    let mut title = format!("{figure} against {x}");
    if !held.is_empty() {
        let at: Vec<String> = held
            .iter()
            .map(|&k| {
                format!(
                    "{} = {}",
                    table.meta.parameters[k].name,
                    show(first.values[k], &table.meta.parameters[k].unit)
                )
            })
            .collect();
        title.push_str(&format!(" at {}", at.join(", ")));
    }
    Some(
        fluxstep_plot::Figure::new(title)
            .with_x_axis(x, x_unit)
            .with_panel(panel),
    )
}

/// A histogram of a figure over every measured point, drawn as a step
/// outline. `None` with fewer than 2 points.
pub fn histogram(table: &Table, figure: &str, bins: usize) -> Option<fluxstep_plot::Figure> {
    let vals: Vec<f64> = table.figure(figure)?.into_iter().flatten().collect();
    let unit = table
        .meta
        .figures
        .iter()
        .find(|c| c.name == figure)?
        .unit
        .clone();
    if vals.len() < 2 {
        return None;
    }
    let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (
            lo - 0.5 * lo.abs().max(1e-12),
            hi + 0.5 * hi.abs().max(1e-12),
        )
    };
    let width = (hi - lo) / bins as f64;
    let mut counts = vec![0u64; bins];
    for v in &vals {
        let b = (((v - lo) / width) as usize).min(bins - 1);
        counts[b] += 1;
    }
    let edge = |b: usize| if b == bins { hi } else { lo + width * b as f64 };
    let mut pts = vec![(lo, 0.0)];
    for (b, &c) in counts.iter().enumerate() {
        pts.push((edge(b), c as f64));
        pts.push((edge(b + 1), c as f64));
    }
    pts.push((hi, 0.0));
    let panel = fluxstep_plot::Panel::new(format!("points per bin ({} points)", vals.len()))
        .with_trace(fluxstep_plot::Trace::new(figure, "", pts));
    Some(
        fluxstep_plot::Figure::new(format!("histogram of {figure}"))
            .with_x_axis(figure, unit)
            .with_panel(panel),
    )
}

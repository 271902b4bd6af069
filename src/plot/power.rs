//! The power figure of `plot power`: the power of a planned F test against the number per
//! group, one line per effect size or per R², each in its own colour with its own marker
//! shape, and the target power as a reference line. The numbers come computed (from
//! `stats::power`); this module only lays them out as a [`Chart`].

use super::chart::{self, Chart, Curve, Guide, Point};
use super::{Drawn, PlotError, MAX_LEVELS};

/// Markers along each line: enough to tell the lines apart in grey, few enough not to hide
/// the line.
const MARKERS_PER_LINE: usize = 8;

/// One line of the figure.
#[derive(Debug, Clone, PartialEq)]
pub struct PowerLine {
    /// Legend label ("0.25", "0 (no covariate)").
    pub label: String,
    /// (number per group, power), in rising order of n.
    pub points: Vec<(f64, f64)>,
}

/// Everything the power figure shows, already computed.
#[derive(Debug, Clone, PartialEq)]
pub struct PowerCurves {
    pub lines: Vec<PowerLine>,
    /// Heading of the legend ("effect f", "R²").
    pub legend_title: String,
    pub x_label: String,
    /// The target power and its legend label, drawn as a horizontal line.
    pub target: Option<(f64, String)>,
    /// The plan's own number per group and its legend label, drawn as a vertical line.
    pub plan_n: Option<(f64, String)>,
    pub caption: String,
    pub alt: String,
}

/// Draws the power figure.
pub fn draw(curves: &PowerCurves) -> Result<Drawn, PlotError> {
    if curves.lines.iter().all(|l| l.points.is_empty()) {
        return Err(PlotError::NothingToDraw);
    }
    if curves.lines.len() > MAX_LEVELS {
        return Err(PlotError::TooManyLevels {
            factor: curves.legend_title.clone(),
            levels: curves.lines.len(),
        });
    }
    let mut chart = Chart {
        x_label: curves.x_label.clone(),
        y_label: "power".to_string(),
        legend_title: Some(curves.legend_title.clone()),
        groups: curves.lines.iter().map(|l| l.label.clone()).collect(),
        group_lines: true,
        y_from_zero: true,
        ..Chart::default()
    };
    for (g, line) in curves.lines.iter().enumerate() {
        chart.curves.push(Curve {
            group: Some(g),
            points: line.points.clone(),
        });
        chart.points.extend(
            marker_positions(&line.points)
                .into_iter()
                .filter_map(|k| line.points.get(k).map(|&(x, y)| Point { group: g, x, y })),
        );
    }
    if let Some((n, label)) = &curves.plan_n {
        chart.curves.push(Curve {
            group: None,
            points: vec![(*n, 0.0), (*n, 1.0)],
        });
        chart.neutral_curve_label = Some(label.clone());
    }
    if let Some((p, label)) = &curves.target {
        chart.guides.push(Guide::Horizontal {
            y: *p,
            label: label.clone(),
        });
    }
    let svg = chart::render(&chart)?;
    Ok(Drawn {
        svg,
        alt: curves.alt.clone(),
        caption: curves.caption.clone(),
    })
}

/// Width of the panel over its height, about: arc lengths weigh a step along x by it, so
/// that markers fall evenly along the line as drawn.
const ASPECT: f64 = 1.45;

/// Indices of the points of a line that carry a marker: spread evenly along the line as it
/// is drawn (by arc length, x scaled to the line's range and y, a power, as it is), so that
/// a line that rises steeply keeps markers on its rise. The first marker sits half a step
/// in, so that lines starting together do not pile their markers at one spot.
fn marker_positions(points: &[(f64, f64)]) -> Vec<usize> {
    let (Some(first), Some(last)) = (points.first(), points.last()) else {
        return Vec::new();
    };
    let width = (last.0 - first.0).abs();
    let scale = if width > 0.0 { ASPECT / width } else { 0.0 };
    let mut along = Vec::with_capacity(points.len());
    let mut total = 0.0;
    along.push(0.0);
    for w in points.windows(2) {
        if let [a, b] = w {
            total += (((b.0 - a.0) * scale).powi(2) + (b.1 - a.1).powi(2)).sqrt();
        }
        along.push(total);
    }
    let count = MARKERS_PER_LINE.min(points.len());
    let mut out: Vec<usize> = (0..count)
        .map(|i| {
            let at = total * (i as f64 + 0.5) / count as f64;
            along.partition_point(|&d| d < at).min(points.len() - 1)
        })
        .collect();
    out.dedup();
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markers_spread_along_the_line_as_drawn() {
        // A line that rises at once and then stays flat: half its drawn length is the rise,
        // so about half the markers sit on it.
        let mut steep: Vec<(f64, f64)> = (0..=10).map(|i| (i as f64, i as f64 * 0.1)).collect();
        steep.extend((11..=1000).map(|i| (i as f64, 1.0)));
        let at = marker_positions(&steep);
        assert_eq!(at.len(), MARKERS_PER_LINE);
        let on_rise = at.iter().filter(|&&k| k <= 10).count();
        assert!((3..=5).contains(&on_rise), "{at:?}");
        assert!(at.windows(2).all(|w| w[0] < w[1]));
        assert!(marker_positions(&[]).is_empty());
        assert_eq!(marker_positions(&[(1.0, 0.5)]), vec![0]);
    }
}

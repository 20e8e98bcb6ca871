//! The power curve of a rehearsal laid out for LaTeX's own `picture` environment (so
//! rehearsal.tex needs no graphics package): per hypothesis, the simulated points with their
//! 95% Wilson intervals as vertical bars, each series joined by small dots (the environment
//! draws straight lines only at a few slopes), a legend, axes with ticks and the target power
//! as a dashed line. Every coordinate is in points, formatted here to one decimal;
//! `templates/rehearsal.tex.j2` places them.

use super::figure::PALETTE;
use super::summary::{CurvePoint, Rehearsed};
use serde::Serialize;

/// The power curve laid out for LaTeX's `picture` environment, in points: every coordinate
/// formatted to one decimal as the environment reads it.
#[derive(Debug, Serialize)]
pub struct Picture {
    /// Width of the picture (plot and margins).
    pub width: String,
    /// Height of the picture.
    pub height: String,
    /// Length of the horizontal axis.
    pub x_axis: String,
    /// Length of the vertical axis.
    pub y_axis: String,
    /// Ticks on the power axis, 0 to 1 by 0.2.
    pub y_ticks: Vec<Tick>,
    /// Ticks on the effect axis, one per effect size.
    pub x_ticks: Vec<Tick>,
    /// Where the effect axis's title starts.
    pub x_title_at: String,
    /// The target power line.
    pub target: TargetLine,
    /// One series per hypothesis.
    pub series: Vec<Series>,
}

/// A tick and its label.
#[derive(Debug, Serialize)]
pub struct Tick {
    /// Position along its axis.
    pub at: String,
    /// Position of the label along the same axis.
    pub label_at: String,
    /// The label.
    pub label: String,
}

/// The dashed target-power line.
#[derive(Debug, Serialize)]
pub struct TargetLine {
    /// Its height.
    pub at: String,
    /// Number of dashes across the plot.
    pub dashes: usize,
    /// Where its label starts, horizontally.
    pub label_x: String,
    /// The label's height.
    pub label_at: String,
    /// The target power.
    pub value: String,
}

/// One hypothesis's power curve.
#[derive(Debug, Serialize)]
pub struct Series {
    /// Colour name.
    pub name: String,
    /// Colour as LaTeX `rgb` components.
    pub rgb: String,
    /// Small dots joining consecutive points.
    pub dots: Vec<Dot>,
    /// The simulated points with their interval bars.
    pub points: Vec<PowerPoint>,
    /// Height of the legend's marker.
    pub legend_dot_at: String,
    /// Height of the legend's text.
    pub legend_at: String,
    /// Hypothesis id.
    pub id: String,
}

/// A point of the picture.
#[derive(Debug, Serialize)]
pub struct Dot {
    /// Horizontal position.
    pub x: String,
    /// Vertical position.
    pub y: String,
}

/// A simulated point with its interval as a vertical bar.
#[derive(Debug, Serialize)]
pub struct PowerPoint {
    /// Horizontal position.
    pub x: String,
    /// Height of the point.
    pub y: String,
    /// Where the bar starts.
    pub low: String,
    /// The bar's length.
    pub length: String,
}

/// Plot width and height in points.
const W: f64 = 320.0;
const H: f64 = 180.0;
/// Dots drawn between two consecutive points, plus one.
const DOT_STEPS: u32 = 24;

/// A coordinate of the picture.
fn at(x: f64) -> String {
    format!("{x:.1}")
}

/// The picture's scale: effect and power to points.
struct Scale {
    xmax: f64,
}

impl Scale {
    fn x(&self, effect: f64) -> f64 {
        W * effect / self.xmax
    }

    fn y(power: f64) -> f64 {
        H * power
    }
}

/// The LaTeX power curve: axes with ticks, the target line and one series per hypothesis.
pub(super) fn picture(r: &Rehearsed) -> Picture {
    let scale = Scale {
        xmax: r.effects.iter().copied().fold(0.0_f64, f64::max).max(1e-9),
    };
    let t = Scale::y(r.target_power);
    Picture {
        width: (W + 60.0).to_string(),
        height: (H + 40.0).to_string(),
        x_axis: W.to_string(),
        y_axis: H.to_string(),
        y_ticks: (0..=5)
            .map(|k| {
                let p = f64::from(k) / 5.0;
                Tick {
                    at: at(Scale::y(p)),
                    label_at: at(Scale::y(p) - 3.0),
                    label: format!("{p:.1}"),
                }
            })
            .collect(),
        x_ticks: r
            .effects
            .iter()
            .map(|&e| Tick {
                at: at(scale.x(e)),
                label_at: at(scale.x(e) - 6.0),
                label: e.to_string(),
            })
            .collect(),
        x_title_at: at(W / 2.0 - 60.0),
        target: TargetLine {
            at: at(t),
            dashes: (W / 10.0) as usize,
            label_x: at(W + 4.0),
            label_at: at(t - 3.0),
            value: r.target_power.to_string(),
        },
        series: r
            .hypotheses
            .iter()
            .enumerate()
            .map(|(i, (id, h))| series(&scale, i, id, &h.curve))
            .collect(),
    }
}

/// Series `i` of the picture: hypothesis `id`'s curve in the palette's `i`-th colour, its
/// points joined by dots, each with its interval bar, and its legend line.
fn series(scale: &Scale, i: usize, id: &str, curve: &[CurvePoint]) -> Series {
    let c = PALETTE[i % PALETTE.len()];
    let dots = curve
        .windows(2)
        .flat_map(|pair| {
            let (a, b) = (&pair[0], &pair[1]);
            (1..DOT_STEPS).map(move |k| {
                let s = f64::from(k) / f64::from(DOT_STEPS);
                Dot {
                    x: at(scale.x(a.effect + s * (b.effect - a.effect))),
                    y: at(Scale::y(
                        a.power.share + s * (b.power.share - a.power.share),
                    )),
                }
            })
        })
        .collect();
    let points = curve
        .iter()
        .map(|p| {
            let (lo, hi) = (Scale::y(p.power.low), Scale::y(p.power.high));
            PowerPoint {
                x: at(scale.x(p.effect)),
                y: at(Scale::y(p.power.share)),
                low: at(lo),
                length: at((hi - lo).max(0.1)),
            }
        })
        .collect();
    let ly = H - 12.0 * (i as f64 + 1.0);
    Series {
        name: format!("s{i}"),
        rgb: format!(
            "{:.3},{:.3},{:.3}",
            f64::from(c.0) / 255.0,
            f64::from(c.1) / 255.0,
            f64::from(c.2) / 255.0
        ),
        dots,
        points,
        legend_dot_at: at(ly + 3.0),
        legend_at: at(ly),
        id: id.to_string(),
    }
}

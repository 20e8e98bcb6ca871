//! The power curve of a rehearsal as inline SVG (plotters' SVG backend): per hypothesis, the
//! share of simulated data sets supporting the claim against the effect size, each point with
//! its 95% Wilson interval as a vertical bar, and the target power as a dashed horizontal
//! line. Labels pass through [`crate::escape::line`] and the backend's own text escaping.
//! Output depends only on the model, so it is the same on every machine.

use super::summary::Rehearsed;
use plotters::prelude::*;

const WIDTH: u32 = 720;
const HEIGHT: u32 = 420;

/// Colours of the series, in hypothesis order (cycled past six).
pub(super) const PALETTE: [RGBColor; 6] = [
    RGBColor(31, 95, 168),
    RGBColor(192, 90, 0),
    RGBColor(46, 125, 50),
    RGBColor(142, 36, 170),
    RGBColor(110, 110, 110),
    RGBColor(183, 28, 28),
];

/// One hypothesis's curve: its id and, per effect size, (effect, share, interval low, high).
pub struct PowerSeries {
    /// Hypothesis id.
    pub id: String,
    /// (effect, share supporting the claim, 95% Wilson interval low, high).
    pub points: Vec<(f64, f64, f64, f64)>,
}

/// The power curve as an SVG document, or why it could not be drawn.
///
/// # Errors
/// A plotting error, as text.
pub fn power_curve(r: &Rehearsed) -> Result<String, String> {
    let series: Vec<PowerSeries> = r
        .hypotheses
        .iter()
        .map(|(id, h)| PowerSeries {
            id: id.clone(),
            points: h
                .curve
                .iter()
                .map(|c| (c.effect, c.power.share, c.power.low, c.power.high))
                .collect(),
        })
        .collect();
    power_curve_svg(&r.effects, r.target_power, &series)
}

/// The chart the curve is drawn on: effect against power.
type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// The power curve of `series` over `effects` with the `target` line, as an SVG document
/// (also drawn in a run's report.html from the power its ledger records for a rehearsal).
///
/// # Errors
/// A plotting error, as text.
pub fn power_curve_svg(
    effects: &[f64],
    target: f64,
    series: &[PowerSeries],
) -> Result<String, String> {
    let xmax = effects.iter().copied().fold(0.0_f64, f64::max);
    let xpad = (xmax * 0.04).max(1e-9);
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let mut chart = ChartBuilder::on(&root)
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(48)
            .build_cartesian_2d(-xpad..xmax + xpad, 0.0..1.0)
            .map_err(|e| e.to_string())?;
        draw_axes(&mut chart)?;
        chart
            .draw_series(DashedLineSeries::new(
                vec![(-xpad, target), (xmax + xpad, target)],
                6,
                4,
                BLACK.mix(0.6).stroke_width(1),
            ))
            .map_err(|e| e.to_string())?
            .label(format!("target power {target}"))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], BLACK.mix(0.6)));
        for (i, s) in series.iter().enumerate() {
            draw_one(&mut chart, PALETTE[i % PALETTE.len()], s)?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.3))
            .label_font(("sans-serif", 12))
            .draw()
            .map_err(|e| e.to_string())?;
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(out)
}

/// The grid, the tick labels and the axis titles.
fn draw_axes(chart: &mut Chart<'_, '_>) -> Result<(), String> {
    chart
        .configure_mesh()
        .light_line_style(BLACK.mix(0.06))
        .x_desc("effect (the plan's effect scale)")
        .y_desc("share of data sets supporting the claim")
        .x_labels(8)
        .y_labels(6)
        .y_label_formatter(&|y| format!("{y:.1}"))
        .x_label_formatter(&|x| format!("{x}"))
        .label_style(("sans-serif", 12))
        .draw()
        .map_err(|e| e.to_string())
}

/// One series in `color`: its line (with a legend entry), its interval bars and its points.
fn draw_one(chart: &mut Chart<'_, '_>, color: RGBColor, s: &PowerSeries) -> Result<(), String> {
    let points: Vec<(f64, f64)> = s.points.iter().map(|p| (p.0, p.1)).collect();
    chart
        .draw_series(LineSeries::new(points.clone(), color.stroke_width(2)))
        .map_err(|e| e.to_string())?
        .label(crate::escape::line(&s.id))
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], color.stroke_width(2)));
    chart
        .draw_series(s.points.iter().map(|p| {
            PathElement::new(vec![(p.0, p.2), (p.0, p.3)], color.mix(0.7).stroke_width(1))
        }))
        .map_err(|e| e.to_string())?;
    chart
        .draw_series(points.iter().map(|&p| Circle::new(p, 3, color.filled())))
        .map_err(|e| e.to_string())?;
    Ok(())
}

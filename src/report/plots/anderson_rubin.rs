//! The Anderson–Rubin figure of each IV specification: the set on the coefficient's line
//! beside the Wald interval, beneath the AR statistic against the coefficient with its
//! critical line (results.json's `anderson_rubin.curve`; nothing is recomputed).

use super::super::format::num;
use super::chart::{
    estimator_color, mesh, row_labels, Caption, Chart, DrawResult, Figure, FigureTitle, WIDTH,
};
use crate::results::{AndersonRubinResult, ArCurve, ArShape, Results, Term};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// One AR set on the coefficient's line: thick pieces for the set (rays run to the edge), the
/// Wald interval thin beneath it, the estimate as a dot.
fn ar_svg(
    ar: &AndersonRubinResult,
    wald: &Term,
    color: RGBColor,
    heading: &str,
) -> DrawResult<String> {
    let curve = ar.curve.as_ref().filter(|c| c.coefficient.len() > 1);
    let (xlo, xhi) = ar_range(ar, wald);
    let curve_height = if curve.is_some() { CURVE_HEIGHT } else { 0 };
    let mut out = String::new();
    {
        let whole =
            SVGBackend::with_string(&mut out, (WIDTH, 130 + curve_height)).into_drawing_area();
        whole.fill(&WHITE).map_err(|e| e.to_string())?;
        let (top, root) = whole.split_vertically(curve_height);
        if let Some(c) = curve {
            draw_curve(&top, c, ar.critical_value, ar.confidence, (xlo, xhi))?;
        }
        let mut chart = ChartBuilder::on(&root)
            .caption(heading, ("sans-serif", 14))
            .margin(6)
            .x_label_area_size(22)
            .y_label_area_size(210)
            .build_cartesian_2d(xlo..xhi, -0.5..1.5)
            .map_err(|e| e.to_string())?;
        mesh(&mut chart)?;
        let labels = [
            "Anderson–Rubin set".to_string(),
            "Wald interval".to_string(),
        ];
        row_labels(&root, &chart, xlo, &labels, |i| 1.0 - i as f64)?;
        draw_set_and_wald(&mut chart, ar, wald, color, (xlo, xhi))?;
        whole.present().map_err(|e| e.to_string())?;
    }
    Ok(out)
}

/// The horizontal range of an AR figure: with a curve, the curve's grid (both charts share
/// it); else the set's finite ends, the Wald interval, the estimate and 0, padded by 15%.
fn ar_range(ar: &AndersonRubinResult, wald: &Term) -> (f64, f64) {
    if let Some(c) = ar.curve.as_ref().filter(|c| c.coefficient.len() > 1) {
        return (c.coefficient[0], c.coefficient[c.coefficient.len() - 1]);
    }
    let mut finite: Vec<f64> = ar
        .set
        .iter()
        .flat_map(|p| [p.lower, p.upper])
        .flatten()
        .chain([wald.estimate, wald.ci[0], wald.ci[1], 0.0])
        .filter(|v| v.is_finite())
        .collect();
    finite.sort_by(f64::total_cmp);
    let (lo, hi) = (finite[0], finite[finite.len() - 1]);
    let pad = ((hi - lo) * 0.15).max(1e-9 * lo.abs().max(hi.abs()).max(1.0));
    (lo - pad, hi + pad)
}

/// The set's pieces as thick bars (rays cut at the edges), the Wald interval thin beneath
/// with the estimate as a dot, and a faint line at 0.
fn draw_set_and_wald<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    ar: &AndersonRubinResult,
    wald: &Term,
    color: RGBColor,
    (xlo, xhi): (f64, f64),
) -> DrawResult<()> {
    let ar_y = 1.0;
    for p in &ar.set {
        let a = p.lower.unwrap_or(xlo).max(xlo);
        let b = p.upper.unwrap_or(xhi).min(xhi);
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(a, ar_y), (b, ar_y)],
                BLACK.stroke_width(7),
            )))
            .map_err(|e| e.to_string())?;
    }
    let w_y = 0.0;
    if wald.ci.iter().all(|v| v.is_finite()) {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(wald.ci[0], w_y), (wald.ci[1], w_y)],
                color.stroke_width(2),
            )))
            .map_err(|e| e.to_string())?;
    }
    if wald.estimate.is_finite() {
        chart
            .draw_series(std::iter::once(Circle::new(
                (wald.estimate, w_y),
                4,
                color.filled(),
            )))
            .map_err(|e| e.to_string())?;
    }
    if xlo < 0.0 && 0.0 < xhi {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(0.0, -0.5), (0.0, 1.5)],
                BLACK.mix(0.35),
            )))
            .map_err(|e| e.to_string())?;
    }
    Ok(())
}

/// Height of the curve chart above an AR set.
const CURVE_HEIGHT: u32 = 250;

const RED: RGBColor = RGBColor(178, 34, 34);

/// The highest statistic drawn: the curve is cut at the top edge above this, so the region
/// near the critical value stays readable.
fn curve_top(curve: &ArCurve, critical: f64) -> f64 {
    let highest = curve
        .statistic
        .iter()
        .flatten()
        .copied()
        .fold(0.0_f64, f64::max);
    highest.min(5.0 * critical).max(2.0 * critical)
}

/// The AR statistic against the coefficient (from results.json, never recomputed), with the
/// critical value as a dashed line: the set is where the curve lies on or under it.
fn draw_curve<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    curve: &ArCurve,
    critical: f64,
    confidence: f64,
    (xlo, xhi): (f64, f64),
) -> DrawResult<()> {
    let top = curve_top(curve, critical);
    let mut chart = ChartBuilder::on(area)
        .caption(
            "Anderson–Rubin statistic against the hypothesised coefficient",
            ("sans-serif", 14),
        )
        .margin(6)
        .x_label_area_size(22)
        .y_label_area_size(210)
        .build_cartesian_2d(xlo..xhi, 0.0..top)
        .map_err(|e| e.to_string())?;
    curve_mesh(&mut chart)?;
    let label = format!(
        "critical value {} ({:.0}% set)",
        num(critical),
        100.0 * confidence
    );
    let style = ("sans-serif", 12)
        .into_text_style(area)
        .color(&RED)
        .pos(Pos::new(HPos::Left, VPos::Bottom));
    chart
        .draw_series(std::iter::once(Text::new(
            label,
            (xlo + 0.01 * (xhi - xlo), critical + 0.02 * top),
            style,
        )))
        .map_err(|e| e.to_string())?;
    draw_runs(&mut chart, curve, top, xhi)?;
    chart
        .draw_series(DashedLineSeries::new(
            [(xlo, critical), (xhi, critical)],
            6,
            4,
            RED.stroke_width(2),
        ))
        .map_err(|e| e.to_string())?;
    if xlo < 0.0 && 0.0 < xhi {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(0.0, 0.0), (0.0, top)],
                BLACK.mix(0.35),
            )))
            .map_err(|e| e.to_string())?;
    }
    Ok(())
}

/// The curve chart's grid: faint horizontal and vertical lines, numbers on both axes.
fn curve_mesh<DB: DrawingBackend>(chart: &mut Chart<'_, DB>) -> DrawResult<()> {
    chart
        .configure_mesh()
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(BLACK.mix(0.08))
        .x_label_formatter(&|x| num(*x))
        .y_label_formatter(&|y| num(*y))
        .x_labels(6)
        .y_labels(5)
        .y_desc("AR statistic")
        .axis_desc_style(("sans-serif", 12))
        .label_style(("sans-serif", 12))
        .draw()
        .map_err(|e| e.to_string())
}

/// The curve as one line per run of computed points (a null statistic breaks the line),
/// cut at `top`.
fn draw_runs<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    curve: &ArCurve,
    top: f64,
    xhi: f64,
) -> DrawResult<()> {
    let mut run: Vec<(f64, f64)> = Vec::new();
    let points = curve.coefficient.iter().zip(&curve.statistic);
    for (x, v) in points
        .map(|(x, v)| (*x, v.map(|v| v.min(top))))
        .chain([(xhi, None)])
    {
        match v {
            Some(v) => run.push((x, v)),
            None if !run.is_empty() => {
                chart
                    .draw_series(LineSeries::new(
                        std::mem::take(&mut run),
                        BLACK.stroke_width(2),
                    ))
                    .map_err(|e| e.to_string())?;
            }
            None => {}
        }
    }
    Ok(())
}

pub(super) fn anderson_rubin(plan: &crate::plan::Plan, r: &Results) -> Vec<Figure> {
    let mut out = Vec::new();
    for s in &plan.specifications {
        let Some(res) = r.specifications.get(&s.id) else {
            continue;
        };
        let (Some(ar), Some(x)) = (&res.anderson_rubin, s.endogenous.first()) else {
            continue;
        };
        let Some(wald) = res.terms.get(x) else {
            continue;
        };
        let heading = crate::escape::line(&format!("{}: coefficient on {x}", s.id));
        let title = FigureTitle::AndersonRubin {
            level: format!("{:.0}", 100.0 * ar.confidence),
            id: crate::escape::line(&s.id),
        };
        let caption = Caption::AndersonRubin {
            curve: ar
                .curve
                .as_ref()
                .map(|c| (c.coefficient.len(), num(curve_top(c, ar.critical_value)))),
            set: super::super::format::set_text(&ar.set),
            shape: ar.shape.to_string(),
            reading: match ar.shape {
                ArShape::Bounded => "bounded",
                ArShape::WholeLine => "whole_line",
                ArShape::Empty => "empty",
                _ => "unbounded",
            },
            estimator: res.estimator.label(),
        };
        out.push(
            match ar_svg(ar, wald, estimator_color(res.estimator), &heading) {
                Ok(svg) => Figure {
                    title,
                    svg,
                    caption,
                },
                Err(e) => Figure {
                    title,
                    svg: String::new(),
                    caption: Caption::Failed {
                        error: crate::escape::line(&e),
                    },
                },
            },
        );
    }
    out
}

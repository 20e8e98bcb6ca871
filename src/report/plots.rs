//! Figures for the HTML report, drawn as inline SVG by plotters' SVG backend: estimates with
//! intervals for each declared table (one panel per row term, its columns side by side so OLS
//! sits beside IV), each IV specification's first stage (the instruments' coefficients on the
//! endogenous regressor) and each Anderson–Rubin set drawn on the coefficient's line beside the
//! Wald interval, beneath the AR statistic against the coefficient with its critical line
//! (the curve's values are results.json's `anderson_rubin.curve`; nothing is recomputed). Every label passes through [`crate::escape::line`] and then the SVG backend's
//! own text escaping; a figure that cannot be drawn says so instead of disappearing. Output
//! depends only on the results, so it re-derives byte for byte.

use super::format::num;
use crate::results::{AndersonRubinResult, ArCurve, Results, SpecResult, Term};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

/// One figure: a heading, the SVG markup, and a caption saying how to read it.
#[derive(Debug, Serialize)]
pub(super) struct Figure {
    pub title: String,
    pub svg: String,
    pub caption: String,
}

/// One interval row of a panel.
struct Bar {
    label: String,
    estimate: f64,
    lo: f64,
    hi: f64,
    color: RGBColor,
}

/// One panel: a heading and its rows, drawn over a shared horizontal axis.
struct Panel {
    heading: String,
    bars: Vec<Bar>,
}

const WIDTH: u32 = 720;
const ROW: u32 = 26;
const PANEL_EXTRA: u32 = 58;
const GREY: RGBColor = RGBColor(110, 110, 110);
const BLUE: RGBColor = RGBColor(31, 95, 168);
const ORANGE: RGBColor = RGBColor(192, 90, 0);

fn estimator_color(estimator: &str) -> RGBColor {
    match estimator {
        "ols" => GREY,
        "2sls" => BLUE,
        _ => ORANGE,
    }
}

fn bar(label: String, t: &Term, color: RGBColor) -> Option<Bar> {
    t.estimate.is_finite().then(|| Bar {
        label: crate::escape::line(&label),
        estimate: t.estimate,
        lo: t.ci[0],
        hi: t.ci[1],
        color,
    })
}

/// The horizontal range covering every finite value of the bars and zero, padded by 8%.
fn x_range(bars: &[Bar]) -> (f64, f64) {
    let values = bars
        .iter()
        .flat_map(|b| [b.estimate, b.lo, b.hi])
        .filter(|v| v.is_finite())
        .chain(std::iter::once(0.0));
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let pad = ((hi - lo) * 0.08).max(1e-9 * lo.abs().max(hi.abs()).max(1.0));
    (lo - pad, hi + pad)
}

type DrawResult<T> = std::result::Result<T, String>;

type Chart<'a, DB> = ChartContext<
    'a,
    DB,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// The horizontal axis with our number format; no horizontal grid and no vertical axis labels
/// (rows are labelled by [`row_labels`]).
fn mesh<DB: DrawingBackend>(chart: &mut Chart<'_, DB>) -> DrawResult<()> {
    chart
        .configure_mesh()
        .disable_y_mesh()
        .light_line_style(WHITE.mix(0.0))
        .y_labels(0)
        .x_label_formatter(&|x| num(*x))
        .x_labels(6)
        .label_style(("sans-serif", 12))
        .draw()
        .map_err(|e| e.to_string())
}

/// Each row's label, right-aligned just left of the plotting area at the row's height.
fn row_labels<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    chart: &Chart<'_, DB>,
    xlo: f64,
    labels: &[String],
    row_y: impl Fn(usize) -> f64,
) -> DrawResult<()> {
    let base = area.get_base_pixel();
    let style = ("sans-serif", 12)
        .into_text_style(area)
        .pos(Pos::new(HPos::Right, VPos::Center));
    for (i, label) in labels.iter().enumerate() {
        let (px, py) = chart.backend_coord(&(xlo, row_y(i)));
        area.draw(&Text::new(
            label.clone(),
            (px - base.0 - 8, py - base.1),
            style.clone(),
        ))
        .map_err(|e| e.to_string())?;
    }
    Ok(())
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    p: &Panel,
) -> DrawResult<()> {
    let (xlo, xhi) = x_range(&p.bars);
    let n = p.bars.len() as i32;
    let labels: Vec<String> = p.bars.iter().map(|b| b.label.clone()).collect();
    let mut chart = ChartBuilder::on(area)
        .caption(&p.heading, ("sans-serif", 14))
        .margin(6)
        .x_label_area_size(22)
        .y_label_area_size(210)
        .build_cartesian_2d(xlo..xhi, -0.5..(f64::from(n) - 0.5))
        .map_err(|e| e.to_string())?;
    mesh(&mut chart)?;
    // The first row sits at the top.
    let row_y = |i: usize| f64::from(n) - 1.0 - i as f64;
    row_labels(area, &chart, xlo, &labels, row_y)?;
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(0.0, -0.5), (0.0, f64::from(n) - 0.5)],
            BLACK.mix(0.35),
        )))
        .map_err(|e| e.to_string())?;
    for (i, b) in p.bars.iter().enumerate() {
        let y = row_y(i);
        if b.lo.is_finite() && b.hi.is_finite() {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(b.lo, y), (b.hi, y)],
                    b.color.stroke_width(2),
                )))
                .map_err(|e| e.to_string())?;
        }
        chart
            .draw_series(std::iter::once(Circle::new(
                (b.estimate, y),
                4,
                b.color.filled(),
            )))
            .map_err(|e| e.to_string())?;
    }
    Ok(())
}

/// Draw panels stacked vertically into one SVG.
fn svg(panels: &[Panel]) -> DrawResult<String> {
    let heights: Vec<u32> = panels
        .iter()
        .map(|p| PANEL_EXTRA + ROW * p.bars.len() as u32)
        .collect();
    let total: u32 = heights.iter().sum::<u32>().max(1);
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (WIDTH, total)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let mut rest = root.clone();
        for (p, h) in panels.iter().zip(&heights) {
            let (top, bottom) = rest.split_vertically(*h);
            draw_panel(&top, p)?;
            rest = bottom;
        }
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(out)
}

fn figure(title: String, panels: Vec<Panel>, caption: String) -> Option<Figure> {
    let panels: Vec<Panel> = panels.into_iter().filter(|p| !p.bars.is_empty()).collect();
    if panels.is_empty() {
        return None;
    }
    Some(match svg(&panels) {
        Ok(svg) => Figure {
            title,
            svg,
            caption,
        },
        Err(e) => Figure {
            title,
            svg: String::new(),
            caption: format!("The figure could not be drawn: {}", crate::escape::line(&e)),
        },
    })
}

/// Every figure of a run, in report order.
pub(super) fn figures(plan: &crate::plan::Plan, r: &Results) -> Vec<Figure> {
    let mut out = Vec::new();
    for t in &plan.tables {
        let specs: Vec<(&String, &SpecResult)> = t
            .columns
            .iter()
            .filter_map(|c| r.specifications.get(c).map(|s| (c, s)))
            .collect();
        let panels = t
            .rows
            .iter()
            .map(|term| Panel {
                heading: crate::escape::line(term),
                bars: specs
                    .iter()
                    .filter_map(|(id, s)| {
                        let t = s.terms.get(term)?;
                        bar(
                            format!("{id} ({})", s.estimator.to_uppercase()),
                            t,
                            estimator_color(s.estimator),
                        )
                    })
                    .collect(),
            })
            .collect();
        out.extend(figure(
            format!("Table: {}", crate::escape::line(&t.title)),
            panels,
            "Dots are estimates and lines their intervals at each specification's confidence level; one panel per term, on its own scale; grey OLS, blue 2SLS, orange LIML or Fuller; the vertical line marks zero.".into(),
        ));
    }
    out.extend(first_stages(plan, r));
    out.extend(anderson_rubin(plan, r));
    out
}

fn first_stages(plan: &crate::plan::Plan, r: &Results) -> Option<Figure> {
    let mut panels = Vec::new();
    for s in &plan.specifications {
        let Some(res) = r.specifications.get(&s.id) else {
            continue;
        };
        for (x, fs) in res.first_stage.iter().flatten() {
            panels.push(Panel {
                heading: crate::escape::line(&format!("{}: {x} on the instruments", s.id)),
                bars: s
                    .instruments
                    .iter()
                    .filter_map(|z| bar(z.clone(), fs.terms.get(z)?, BLUE))
                    .collect(),
            });
        }
        if let (Some(t), Some(by)) = (&res.arms.take_up, &res.arms.by) {
            panels.push(Panel {
                heading: crate::escape::line(&format!(
                    "{}: mean of {} in each arm of {by}",
                    s.id, t[0].variable
                )),
                bars: t
                    .iter()
                    .filter(|m| m.mean.is_finite())
                    .map(|m| Bar {
                        label: crate::escape::line(&format!("{by} = {}", m.arm)),
                        estimate: m.mean,
                        lo: m.ci[0],
                        hi: m.ci[1],
                        color: GREY,
                    })
                    .collect(),
            });
        }
    }
    figure(
        "First stages".into(),
        panels,
        "How far each instrument shifts the endogenous regressor (take-up), holding the controls fixed: dots are first-stage coefficients, lines their intervals with the specification's errors. An interval reaching zero is a first stage the data cannot distinguish from none. Where the instrument is a 0/1 assignment, a grey panel shows take-up itself in each arm (the endogenous regressor's mean over the rows estimated on, with a normal-approximation interval at the specification's level from the standard error of the mean; results.json `arms`).".into(),
    )
}

/// One AR set on the coefficient's line: thick pieces for the set (rays run to the edge), the
/// Wald interval thin beneath it, the estimate as a dot.
fn ar_svg(
    ar: &AndersonRubinResult,
    wald: &Term,
    color: RGBColor,
    heading: &str,
) -> DrawResult<String> {
    let set = &ar.set;
    let mut finite: Vec<f64> = set
        .iter()
        .flat_map(|p| [p.lower, p.upper])
        .flatten()
        .chain([wald.estimate, wald.ci[0], wald.ci[1], 0.0])
        .filter(|v| v.is_finite())
        .collect();
    finite.sort_by(f64::total_cmp);
    let (lo, hi) = (finite[0], finite[finite.len() - 1]);
    let pad = ((hi - lo) * 0.15).max(1e-9 * lo.abs().max(hi.abs()).max(1.0));
    // With a curve, both charts share the curve's grid as their horizontal range.
    let curve = ar.curve.as_ref().filter(|c| c.coefficient.len() > 1);
    let (xlo, xhi) = match curve {
        Some(c) => (c.coefficient[0], c.coefficient[c.coefficient.len() - 1]),
        None => (lo - pad, hi + pad),
    };
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
        let ar_y = 1.0;
        for p in set {
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
        whole.present().map_err(|e| e.to_string())?;
    }
    Ok(out)
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
        .map_err(|e| e.to_string())?;
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
    // One line per run of computed points (a null statistic breaks the line).
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

fn anderson_rubin(plan: &crate::plan::Plan, r: &Results) -> Vec<Figure> {
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
        let title = format!(
            "Anderson–Rubin {:.0}% set, {}",
            100.0 * ar.confidence,
            crate::escape::line(&s.id)
        );
        let curve = match &ar.curve {
            Some(c) => format!(
                "Above, the Anderson–Rubin statistic at {} coefficient values, as computed in the run (results.json), and the dashed critical value: the set is every value where the curve lies on or under the line, so a curve still under it at an edge means the set goes on past that edge; values above {} are cut at the top. ",
                c.coefficient.len(),
                num(curve_top(c, ar.critical_value))
            ),
            None => String::new(),
        };
        let caption = format!(
            "{curve}The thick bar is the set of coefficient values the Anderson–Rubin test does not reject ({}, shape: {}); a bar reaching an edge continues without end. Beneath it the {} estimate and its Wald interval, which rely on strong instruments. The set is {}.",
            super::format::set_text(&ar.set),
            ar.shape,
            res.estimator.to_uppercase(),
            match ar.shape {
                "bounded" => "bounded: the data bound the effect however weak the instruments",
                "whole-line" => "the whole line: the data cannot bound the effect",
                "empty" => "empty: the instruments reject each other at this level",
                _ => "unbounded: the data cannot bound the effect on at least one side",
            }
        );
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
                    caption: format!("The figure could not be drawn: {}", crate::escape::line(&e)),
                },
            },
        );
    }
    out
}

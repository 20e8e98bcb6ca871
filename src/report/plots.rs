//! Figures for the HTML report, drawn as inline SVG by plotters' SVG backend: estimates with
//! intervals for each declared table (one panel per row term, its columns side by side so OLS
//! sits beside IV), each IV specification's first stage (the instruments' coefficients on the
//! endogenous regressor) and each Anderson–Rubin set drawn on the coefficient's line beside the
//! Wald interval, beneath the AR statistic against the coefficient with its critical line
//! (the curve's values are results.json's `anderson_rubin.curve`; nothing is recomputed). Every label passes through [`crate::escape::line`] and then the SVG backend's
//! own text escaping; a figure that cannot be drawn says so instead of disappearing. Output
//! depends only on the results, so it re-derives byte for byte.

mod anderson_rubin;
mod chart;

pub(super) use chart::Figure;

use crate::results::{Results, SpecResult, Term};
use anderson_rubin::anderson_rubin;
use chart::{
    estimator_color, mesh, row_labels, Caption, DrawResult, FigureTitle, BLUE, GREY, PANEL_EXTRA,
    ROW, WIDTH,
};
use plotters::prelude::*;

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

fn figure(title: FigureTitle, panels: Vec<Panel>, caption: Caption) -> Option<Figure> {
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
            caption: Caption::Failed {
                error: crate::escape::line(&e),
            },
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
                            format!("{id} ({})", s.estimator.label()),
                            t,
                            estimator_color(s.estimator),
                        )
                    })
                    .collect(),
            })
            .collect();
        out.extend(figure(
            FigureTitle::Table {
                title: crate::escape::line(&t.title),
            },
            panels,
            Caption::Table,
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
    figure(FigureTitle::FirstStages, panels, Caption::FirstStages)
}

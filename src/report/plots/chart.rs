//! What every figure shares: the figure record, sizes and colours, and the chart helpers
//! (mesh, row labels).

use super::super::format::num;
use crate::results::EstimatorKind;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

/// One figure: a heading, the SVG markup, and a caption saying how to read it. The heading
/// and caption are typed; their words are the `fig_title` and `fig_caption` macros of
/// `templates/words.j2`. The labels drawn inside the SVG (panel headings, bar labels, axis
/// marks) are part of the picture, drawn here.
#[derive(Debug, Serialize)]
pub(in crate::report) struct Figure {
    pub title: FigureTitle,
    pub svg: String,
    pub caption: Caption,
}

/// A figure's heading.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(in crate::report) enum FigureTitle {
    Table {
        title: String,
    },
    FirstStages,
    /// `level` in percent.
    AndersonRubin {
        level: String,
        id: String,
    },
}

/// How to read a figure, or why it could not be drawn.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(in crate::report) enum Caption {
    Table,
    FirstStages,
    /// The AR set's figure: the curve's points and top when a curve was computed, the set,
    /// its shape (as results.json spells it, and `reading`: `bounded`, `whole_line`,
    /// `empty` or `unbounded`), the estimator.
    AndersonRubin {
        curve: Option<(usize, String)>,
        set: String,
        shape: String,
        reading: &'static str,
        estimator: &'static str,
    },
    Failed {
        error: String,
    },
}

pub(super) const WIDTH: u32 = 720;

pub(super) const ROW: u32 = 26;

pub(super) const PANEL_EXTRA: u32 = 58;

pub(super) const GREY: RGBColor = RGBColor(110, 110, 110);

pub(super) const BLUE: RGBColor = RGBColor(31, 95, 168);

pub(super) const ORANGE: RGBColor = RGBColor(192, 90, 0);

pub(super) fn estimator_color(estimator: EstimatorKind) -> RGBColor {
    match estimator {
        EstimatorKind::Ols => GREY,
        EstimatorKind::Tsls => BLUE,
        _ => ORANGE,
    }
}

pub(super) type DrawResult<T> = std::result::Result<T, String>;

pub(super) type Chart<'a, DB> = ChartContext<
    'a,
    DB,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// The horizontal axis with our number format; no horizontal grid and no vertical axis labels
/// (rows are labelled by [`row_labels`]).
pub(super) fn mesh<DB: DrawingBackend>(chart: &mut Chart<'_, DB>) -> DrawResult<()> {
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
pub(super) fn row_labels<DB: DrawingBackend>(
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

//! Probability weights (`weights = "column"`): every row of the design is scaled by the square
//! root of its weight once, here, before the fit. Least squares on the scaled rows is weighted
//! least squares (weighted 2SLS, LIML and Fuller for an IV specification), and the sandwich
//! covariances of the scaled fit (HC0, HC1, CR1) are those of probability weights, since a
//! scaled row's score is w·x·u. The fit, every diagnostic built on the same scaled problem
//! (first stages, reduced form, endogeneity, over-identification, effective F, Anderson–Rubin,
//! LM/CLR, the LIML alternative) therefore carries the weights. What is not weighted is
//! refused at `check` (plan/validate) or marked unavailable (arm means).

use super::resolve::Parts;
use super::Prepared;
use crate::data::Design;
use crate::error::Result;
use crate::estimate::LinearFit;
use nalgebra::{DMatrix, DVector, DVectorView};

/// Scale the rows of `d`'s outcome and of every column of `p` by √w (nothing for an
/// unweighted design; the design's own columns have moved to `p`). `d.y_raw` stays in the
/// data's units.
pub(super) fn scale_rows(d: &mut Design, p: &mut Parts) {
    let Some(w) = &d.weights else {
        return;
    };
    let root = w.map(f64::sqrt);
    // A weighted design reads its own blocks (module `data::shared_columns`), so these are
    // not copied here.
    let scale = |m: &mut std::sync::Arc<DMatrix<f64>>| {
        for mut c in std::sync::Arc::make_mut(m).column_iter_mut() {
            c.component_mul_assign(&root);
        }
    };
    d.y.component_mul_assign(&root);
    scale(&mut p.focal);
    scale(&mut p.exog);
    scale(&mut p.instruments);
}

/// The R² of `fit`, whose dependent variable is `scaled` (rows scaled by √w): against the
/// weighted total sum of squares Σ w (v − v̄_w)² when the model has a constant (the fit's
/// own centres the scaled values, which is not the weighted total), else the fit's own
/// (the uncentred total of the scaled values is already Σ w v²).
pub(super) fn r_squared(fit: &LinearFit, scaled: DVectorView<f64>, d: &Design) -> f64 {
    let Some(w) = d.weights.as_ref().filter(|_| d.has_constant) else {
        return fit.r_squared;
    };
    let v: DVector<f64> = scaled.component_div(&w.map(f64::sqrt));
    1.0 - fit.rss / weighted_total(w, &v)
}

/// The weighted total sum of squares Σ w (v − v̄_w)², v̄_w = Σ w v / Σ w.
fn weighted_total(w: &DVector<f64>, v: &DVector<f64>) -> f64 {
    let mean = w.dot(v) / w.sum();
    w.iter()
        .zip(v.iter())
        .map(|(w, v)| w * (v - mean).powi(2))
        .sum()
}

/// The R² in levels of a fit with absorbed fixed effects (as with explicit indicator
/// columns): against the outcome before sweeping, Σ (y − ȳ)², or Σ w (y − ȳ_w)² weighted.
/// The within R² is [`r_squared`] of the swept outcome (whose weighted mean is zero, so its
/// weighted total is Σ w ỹ²).
pub(super) fn levels_r_squared(fit: &LinearFit, d: &Design) -> f64 {
    let tss: f64 = match &d.weights {
        Some(w) => weighted_total(w, &d.y_raw),
        None => {
            let mean = d.y_raw.mean();
            d.y_raw.iter().map(|v| (v - mean) * (v - mean)).sum()
        }
    };
    1.0 - fit.rss / tss
}

/// For a weighted specification, its regressors `x` (rows scaled by √w) back in the data's
/// units, for a randomization test that re-draws `term`; `None` unweighted. The re-drawn
/// column is read from the table as it is (its distinct values label the assignments, so
/// they must be the data's own bits, not a quotient); the others are divided by √w, which
/// the test multiplies back. Only without fixed effects (the columns are then not swept;
/// `check` refuses the rest).
pub(super) fn unscaled_regressors(
    prepared: &Prepared,
    x: &DMatrix<f64>,
    term: &str,
) -> Result<Option<DMatrix<f64>>> {
    let (d, p, spec) = (&prepared.d, &prepared.p, prepared.spec);
    let Some(w) = &d.weights else {
        return Ok(None);
    };
    let names: Vec<&String> = p.focal_names.iter().chain(&p.exog_names).collect();
    let (Some(j), Some(column)) = (
        names.iter().position(|n| *n == term),
        data_units(prepared, term),
    ) else {
        return Err(super::est_err(spec, format!("term `{term}` cannot be re-drawn in the data's units (an error in sworn; please report it)")));
    };
    let root = w.map(f64::sqrt);
    let mut raw = x.clone();
    for mut c in raw.column_iter_mut() {
        c.component_div_assign(&root);
    }
    raw.set_column(j, &column);
    Ok(Some(raw))
}

/// Column `name` read from the table at the design's rows, in the data's units; `None` when
/// the table has no such numeric column or the design swept fixed effects (its columns are
/// then not the table's).
fn data_units(prepared: &Prepared, name: &str) -> Option<DVector<f64>> {
    let d = &prepared.d;
    let column = prepared.table.numeric.get(name)?;
    d.fixed_effects.is_empty().then(|| {
        DVector::from_iterator(
            d.rows.len(),
            d.rows.iter().map(|&r| column.get(r).unwrap_or(f64::NAN)),
        )
    })
}

/// A weighted IV specification's excluded instruments in the data's units, read from the
/// table at the design's rows (`None` unweighted), for a randomization test that re-draws
/// them among the units.
pub(super) fn unscaled_instruments(prepared: &Prepared) -> Result<Option<DMatrix<f64>>> {
    let (d, p, spec) = (&prepared.d, &prepared.p, prepared.spec);
    if d.weights.is_none() {
        return Ok(None);
    }
    let mut raw = DMatrix::zeros(d.rows.len(), p.instrument_names.len());
    for (j, name) in p.instrument_names.iter().enumerate() {
        let Some(column) = data_units(prepared, name) else {
            return Err(super::est_err(spec, format!("instrument `{name}` cannot be re-drawn in the data's units (an error in sworn; please report it)")));
        };
        raw.set_column(j, &column);
    }
    Ok(Some(raw))
}

/// Residuals in the data's units (a weighted fit's residuals are of the scaled rows).
pub(super) fn residuals(fit: &LinearFit, d: &Design) -> DVector<f64> {
    match &d.weights {
        Some(w) => fit.resid.component_div(&w.map(f64::sqrt)),
        None => fit.resid.clone(),
    }
}

#[cfg(test)]
mod tests {
    use crate::estimate::{self, Absorbed, CovSpec};
    use crate::testing::{fixture, rel_diff, FIXTURE_TOL};
    use nalgebra::{DMatrix, DVector};

    /// The fixture's used rows (weight present and positive): y, [1, x, c] and w.
    fn used() -> (DVector<f64>, DMatrix<f64>, DVector<f64>) {
        let f = fixture("weights.json");
        let col = |c: &str| -> Vec<Option<f64>> {
            f["data"][c]
                .as_array()
                .expect("column")
                .iter()
                .map(|v| v.as_f64())
                .collect()
        };
        let (y, x, c, w) = (col("y"), col("x"), col("c"), col("w"));
        let rows: Vec<usize> = (0..w.len())
            .filter(|&i| w[i].is_some_and(|v| v > 0.0))
            .collect();
        let get = |v: &[Option<f64>], i: usize| v[i].expect("value");
        let ys = DVector::from_iterator(rows.len(), rows.iter().map(|&i| get(&y, i)));
        let xs = DMatrix::from_fn(rows.len(), 3, |r, j| match j {
            0 => 1.0,
            1 => get(&x, rows[r]),
            _ => get(&c, rows[r]),
        });
        let ws = DVector::from_iterator(rows.len(), rows.iter().map(|&i| get(&w, i)));
        (ys, xs, ws)
    }

    /// Weighted OLS as OLS on √w-scaled rows, with HC0 and HC1 sandwich errors: statsmodels
    /// WLS with cov_type HC0 / HC1 (tests/reference/weights.py).
    #[test]
    fn scaled_rows_give_weighted_least_squares() {
        let f = fixture("weights.json");
        let e = &f["expected"]["ols"];
        let (y, x, w) = used();
        let root = w.map(f64::sqrt);
        let ys = y.component_mul(&root);
        let mut xs = x.clone();
        for mut c in xs.column_iter_mut() {
            c.component_mul_assign(&root);
        }
        for (cov, kind) in [(CovSpec::Hc0, "hc0"), (CovSpec::Hc1, "hc1")] {
            let fit = estimate::ols(&ys, &xs, true, &cov, &Absorbed::default()).expect("fit");
            for (j, name) in ["intercept", "x", "c"].iter().enumerate() {
                let b = e["coef"][*name].as_f64().expect("coef");
                let se = e["se"][kind][*name].as_f64().expect("se");
                assert!(rel_diff(fit.coef[j], b) < FIXTURE_TOL, "{kind} coef {name}");
                assert!(
                    rel_diff(fit.cov[(j, j)].sqrt(), se) < FIXTURE_TOL,
                    "{kind} se {name}"
                );
            }
        }
    }
}

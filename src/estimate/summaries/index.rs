//! Summary indices: components standardised against a reference group and combined as a
//! mean of z-scores or an inverse-covariance-weighted mean.

use nalgebra::{DMatrix, DVector};

use super::{check_len, moments, SummaryError};

/// z-scores of every component: (x − mean_ref)/sd_ref, sign flipped where `flip`, NaN kept.
fn standardise(
    components: &DMatrix<f64>,
    reference: &[bool],
    flip: &[bool],
) -> Result<DMatrix<f64>, SummaryError> {
    let (n, k) = components.shape();
    if n == 0 {
        return Err(SummaryError::Empty { what: "rows" });
    }
    if k == 0 {
        return Err(SummaryError::Empty { what: "components" });
    }
    check_len("reference", n, reference.len())?;
    check_len("flip", k, flip.len())?;
    if components.iter().any(|v| v.is_infinite()) {
        return Err(SummaryError::NotFinite);
    }
    let mut z = components.clone();
    for c in 0..k {
        let values: Vec<f64> = (0..n)
            .filter(|&i| reference[i] && !components[(i, c)].is_nan())
            .map(|i| components[(i, c)])
            .collect();
        let (available, mean, sd) = moments(&values);
        if available < 2 {
            return Err(SummaryError::ReferenceTooSmall {
                component: c,
                available,
            });
        }
        if sd <= 0.0 || !sd.is_finite() {
            return Err(SummaryError::ConstantInReference { component: Some(c) });
        }
        let sign = if flip[c] { -1.0 } else { 1.0 };
        for i in 0..n {
            z[(i, c)] = sign * (components[(i, c)] - mean) / sd;
        }
    }
    Ok(z)
}

/// Re-standardises a raw index by its reference-group mean and SD (NaN rows stay NaN).
fn restandardise(raw: Vec<f64>, reference: &[bool]) -> Result<DVector<f64>, SummaryError> {
    let values: Vec<f64> = raw
        .iter()
        .zip(reference)
        .filter(|(v, &r)| r && !v.is_nan())
        .map(|(v, _)| *v)
        .collect();
    let (_, mean, sd) = moments(&values);
    if !(sd > 0.0 && sd.is_finite()) {
        return Err(SummaryError::ConstantInReference { component: None });
    }
    Ok(DVector::from_iterator(
        raw.len(),
        raw.into_iter().map(|v| (v - mean) / sd),
    ))
}

/// Weighted available-case average of each row of `z` (NaN = missing); NaN when no
/// component is available or the available weights sum to zero.
fn weighted_rows(z: &DMatrix<f64>, weights: &[f64]) -> Vec<f64> {
    (0..z.nrows())
        .map(|i| {
            let (mut num, mut den) = (0.0, 0.0);
            for (c, &w) in weights.iter().enumerate() {
                let v = z[(i, c)];
                if !v.is_nan() {
                    num += w * v;
                    den += w;
                }
            }
            if den == 0.0 {
                f64::NAN
            } else {
                num / den
            }
        })
        .collect()
}

/// Equally weighted summary index of standardised components (Kling, Liebman and Katz 2007,
/// "Experimental analysis of neighborhood effects", Econometrica 75).
///
/// # Formula
/// For component c with reference-group mean μ_c and SD σ_c (n − 1 divisor, over the
/// reference rows where c is observed), z_ic = s_c (x_ic − μ_c)/σ_c with s_c = −1 where
/// `flip[c]` (so that larger always means better) and +1 otherwise. The raw index is the mean
/// of z_ic over the components observed in row i (available-case mean; a row with no
/// observed component is NaN), and the index is the raw index minus its reference-group
/// mean, divided by its reference-group SD, so it has mean 0 and SD 1 in the reference group.
///
/// `components` is n × K with NaN for a missing value; `reference[i]` marks the reference
/// (usually comparison) group.
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::Empty`], [`SummaryError::NotFinite`] (an
/// infinite value), [`SummaryError::ReferenceTooSmall`] and
/// [`SummaryError::ConstantInReference`].
pub fn mean_z(
    components: &DMatrix<f64>,
    reference: &[bool],
    flip: &[bool],
) -> Result<DVector<f64>, SummaryError> {
    let z = standardise(components, reference, flip)?;
    let raw = weighted_rows(&z, &vec![1.0; z.ncols()]);
    restandardise(raw, reference)
}

/// Inverse-covariance weighted summary index (Anderson 2008, "Multiple inference and gender
/// differences in the effects of early intervention", JASA 103).
///
/// # Formula
/// With z_ic the signed z-scores of [`mean_z`] and Σ̂ their sample covariance (n − 1
/// divisor) over the reference rows where every component is observed, the weights are
/// w = Σ̂⁻¹ 1 (the row sums of Σ̂⁻¹, solved through a Cholesky factor). The raw index of row
/// i is Σ_{c observed} w_c z_ic / Σ_{c observed} w_c, so a row's weights sum to one over its
/// available components (Anderson's rule for missing components); a row with no observed
/// component, or whose available weights sum to zero, is NaN. The raw index is then
/// re-standardised by its reference-group mean and SD.
///
/// # Errors
/// Those of [`mean_z`], plus [`SummaryError::TooFewCompleteRows`] (at most K complete
/// reference rows) and [`SummaryError::SingularCovariance`].
pub fn inverse_covariance(
    components: &DMatrix<f64>,
    reference: &[bool],
    flip: &[bool],
) -> Result<DVector<f64>, SummaryError> {
    let z = standardise(components, reference, flip)?;
    let k = z.ncols();
    let complete: Vec<usize> = (0..z.nrows())
        .filter(|&i| reference[i] && (0..k).all(|c| !z[(i, c)].is_nan()))
        .collect();
    if complete.len() <= k {
        return Err(SummaryError::TooFewCompleteRows {
            complete: complete.len(),
            components: k,
        });
    }
    let rows = DMatrix::from_fn(complete.len(), k, |r, c| z[(complete[r], c)]);
    let means: Vec<f64> = (0..k).map(|c| rows.column(c).mean()).collect();
    let centered = DMatrix::from_fn(rows.nrows(), k, |r, c| rows[(r, c)] - means[c]);
    let sigma = centered.transpose() * &centered / (complete.len() - 1) as f64;
    let chol = sigma.cholesky().ok_or(SummaryError::SingularCovariance)?;
    let w = chol.solve(&DVector::from_element(k, 1.0));
    if w.iter().any(|v| !v.is_finite()) {
        return Err(SummaryError::SingularCovariance);
    }
    let raw = weighted_rows(&z, w.as_slice());
    restandardise(raw, reference)
}

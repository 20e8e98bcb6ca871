//! Wald quadratic forms for joint hypotheses on coefficient subsets.
//!
//! Role: b_Sᵀ V_S^{-1} b_S for an index set S, computed through a Cholesky factor of V_S
//! (never an explicit inverse). Invariant: the tested block must be positive definite.

use nalgebra::{DMatrix, DVector};

use super::EstimateError;

/// The Wald statistic b_Sᵀ V_S^{-1} b_S for the coefficients listed in `indices`.
///
/// # Formula
/// With V_S = L Lᵀ (Cholesky) and L z = b_S, the statistic is zᵀz (Wald 1943). Dividing by
/// |S| gives the F form used for joint tests.
///
/// # Errors
/// [`EstimateError::IndexOutOfRange`] for an index past the coefficients (or a `cov` of the
/// wrong size), [`EstimateError::NotFinite`] for non-finite input, and
/// [`EstimateError::SingularCovariance`] when V_S is not positive definite.
pub fn wald(
    coef: &DVector<f64>,
    cov: &DMatrix<f64>,
    indices: &[usize],
) -> Result<f64, EstimateError> {
    let k = coef.len();
    if cov.shape() != (k, k) {
        let index = cov.nrows().max(cov.ncols());
        return Err(EstimateError::IndexOutOfRange { index, k });
    }
    if let Some(&index) = indices.iter().find(|&&i| i >= k) {
        return Err(EstimateError::IndexOutOfRange { index, k });
    }
    let b = DVector::from_iterator(indices.len(), indices.iter().map(|&i| coef[i]));
    let v = DMatrix::from_fn(indices.len(), indices.len(), |r, c| {
        cov[(indices[r], indices[c])]
    });
    if b.iter().chain(v.iter()).any(|x| !x.is_finite()) {
        return Err(EstimateError::NotFinite);
    }
    let singular = || EstimateError::SingularCovariance {
        indices: indices.to_vec(),
    };
    let chol = v.cholesky().ok_or_else(singular)?;
    let z = chol.l().solve_lower_triangular(&b).ok_or_else(singular)?;
    Ok(z.norm_squared())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: b = (1, 2), V = [[2, 1], [1, 2]], V^{-1} = [[2, −1], [−1, 2]]/3,
    /// so bᵀV^{-1}b = (2 − 4 + 8)/3 = 2.
    #[test]
    fn two_by_two_by_hand() {
        let b = DVector::from_vec(vec![1.0, 2.0, 9.0]);
        let v = DMatrix::from_row_slice(3, 3, &[2.0, 1.0, 0.0, 1.0, 2.0, 0.0, 0.0, 0.0, 1.0]);
        let w = wald(&b, &v, &[0, 1]).expect("positive definite");
        assert!((w - 2.0).abs() < 1e-14, "{w}");
        let single = wald(&b, &v, &[2]).expect("positive definite");
        assert!((single - 81.0).abs() < 1e-12, "{single}");
    }

    /// A singular block and a bad index are errors, not numbers.
    #[test]
    fn singular_and_out_of_range() {
        let b = DVector::from_vec(vec![1.0, 1.0]);
        let v = DMatrix::from_row_slice(2, 2, &[1.0, 1.0, 1.0, 1.0]);
        assert!(matches!(
            wald(&b, &v, &[0, 1]),
            Err(EstimateError::SingularCovariance { .. })
        ));
        assert!(matches!(
            wald(&b, &v, &[2]),
            Err(EstimateError::IndexOutOfRange { index: 2, k: 2 })
        ));
    }
}

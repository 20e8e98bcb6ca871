//! A robust covariance as an exact quadratic form in the weights of two residual vectors.
//!
//! Role: the Anderson–Rubin set search evaluates the coefficient covariance at thousands of
//! residual vectors u = a·e₁ − b·e₂ that are combinations of the same two vectors. Every
//! sandwich estimator of module `covariance` except the eigenvalue-clamped two-way one is a
//! quadratic form in u, so its meat is, exactly in real arithmetic,
//! A(a, b) = a² M₁₁ − a b (M₁₂ + M₁₂ᵀ) + b² M₂₂, with
//! * HC0–HC3: M_rs = Σᵢ ωᵢ e_r,ᵢ e_s,ᵢ qᵢ qᵢᵀ, ωᵢ = 1, 1/(1 − hᵢ) or 1/(1 − hᵢ)²;
//! * one-way clusters: M_rs = Σ_g S_r,g S_s,gᵀ with S_r,g = Σ_{i∈g} qᵢ e_r,ᵢ.
//!
//! Built in one O(n·k²) pass, each evaluation then costs O(k³) instead of O(n·k²), and needs
//! no n-sized buffer. Invariant: the factors (HC1's n/(n − k), CR1's) and the errors (too few clusters, unit leverage, refused leverage) are those of
//! `covariance::covariance` for the same inputs. Rounding differs from a direct evaluation
//! only in the order of summation (a few units in the last place of the covariance).

use nalgebra::{DMatrix, DVector};

use super::covariance::{cluster_sums, cr1_factor, hc_weights, CovSpec, Leverage};
use super::qr::{combine_lanes, PivotedQr};
use super::{Absorbed, EstimateError};

/// The three meat blocks, the bread factor B ([`PivotedQr::bread`]) and the small-sample
/// factor.
pub(crate) struct QuadraticMeat {
    bread: DMatrix<f64>,
    m11: DMatrix<f64>,
    m12: DMatrix<f64>,
    m22: DMatrix<f64>,
    factor: f64,
}

impl QuadraticMeat {
    /// The coefficient covariance at residuals a·e₁ − b·e₂.
    pub(crate) fn covariance(&self, a: f64, b: f64) -> DMatrix<f64> {
        let cross = &self.m12 + self.m12.transpose();
        let meat = &self.m11 * (a * a) - cross * (a * b) + &self.m22 * (b * b);
        &self.bread * meat * self.bread.transpose() * self.factor
    }

    /// The joint covariance of the coefficients from residuals e₁ and e₂: the blocks
    /// [[Σ₁₁, Σ₁₂], [Σ₂₁, Σ₂₂]], Σ_rs = B M_rs Bᵀ · factor (Σ₂₁ = Σ₁₂ᵀ; M₁₂ is not symmetric
    /// when clustered). `covariance(a, b)` = a²Σ₁₁ − ab(Σ₁₂ + Σ₂₁) + b²Σ₂₂.
    pub(crate) fn blocks(&self) -> [[DMatrix<f64>; 2]; 2] {
        let side = |m: &DMatrix<f64>| &self.bread * m * self.bread.transpose() * self.factor;
        let cross = side(&self.m12);
        let cross_t = cross.transpose();
        [[side(&self.m11), cross], [cross_t, side(&self.m22)]]
    }
}

/// Builds the quadratic form for the design `x` factorised in `qr` and residual vectors `e1`,
/// `e2`; `None` for the classical, two-way and HAC covariances (evaluated directly).
///
/// # Errors
/// As `covariance::covariance`: cluster ids of the wrong length, fewer than two clusters,
/// HC2/HC3 where refused or at a unit-leverage observation.
pub(crate) fn quadratic_meat(
    qr: &PivotedQr,
    x: &DMatrix<f64>,
    e1: &DVector<f64>,
    e2: &DVector<f64>,
    spec: &CovSpec,
    leverage: Leverage,
    absorbed: &Absorbed,
) -> Result<Option<QuadraticMeat>, EstimateError> {
    if matches!(
        spec,
        CovSpec::Classical | CovSpec::TwoWay { .. } | CovSpec::Hac { .. }
    ) {
        return Ok(None);
    }
    let q1 = qr.q_rows();
    let n = e1.len();
    let k = qr.ncols() + absorbed.df;
    let k_cluster = k - absorbed.nested_df;
    let (m11, m12, m22, factor) = match spec {
        CovSpec::Cluster { ids } => {
            let (s1, g) = cluster_sums(&q1, e1, ids)?;
            let (s2, _) = cluster_sums(&q1, e2, ids)?;
            let blocks = (s1.tr_mul(&s1), s1.tr_mul(&s2), s2.tr_mul(&s2));
            (blocks.0, blocks.1, blocks.2, cr1_factor(g, n, k_cluster))
        }
        _ => {
            let ones = DVector::from_element(n, 1.0);
            let omega = hc_weights(qr, &ones, spec, leverage, absorbed)?;
            let grams = q1.folded(
                |start, q| {
                    Ok::<_, EstimateError>(weighted_grams(q, |r| {
                        let i = start + r;
                        [
                            omega[i] * e1[i] * e1[i],
                            omega[i] * e1[i] * e2[i],
                            omega[i] * e2[i] * e2[i],
                        ]
                    }))
                },
                |[a, b, c], [x, y, z]| [a + x, b + y, c + z],
            )?;
            let width = q1.ncols();
            let [m11, m12, m22] =
                grams.unwrap_or_else(|| std::array::from_fn(|_| DMatrix::zeros(width, width)));
            let factor = if *spec == CovSpec::Hc1 {
                n as f64 / (n - k) as f64
            } else {
                1.0
            };
            (m11, m12, m22, factor)
        }
    };
    Ok(Some(QuadraticMeat {
        bread: qr.bread(x),
        m11,
        m12,
        m22,
        factor,
    }))
}

/// The weighted Gram matrices Σᵢ w_r(i) qᵢ qᵢᵀ (r = 0, 1, 2) of the rows qᵢ of `q1`, in one
/// pass over `q1`.
///
/// Each is the same bits as `q1.tr_mul(&s_r)` with s_r = `q1`, row i multiplied by w_r(i):
/// entry (a, b) is nalgebra's dot product of column a with column b of s_r, whose terms
/// q_ia · (q_ib · w_r(i)) are summed in eight running sums over the first n − n mod 8 rows
/// (row i into sum i mod 8), combined as nalgebra combines them (`qr::combine_lanes`), then
/// the last rows added one by one; a test compares with nalgebra. That product took an n × k copy and k² passes over n-vectors
/// per matrix.
fn weighted_grams(q1: &DMatrix<f64>, weights: impl Fn(usize) -> [f64; 3]) -> [DMatrix<f64>; 3] {
    let (n, k) = q1.shape();
    let main = n - n % 8;
    let q = q1.as_slice();
    // lanes[(r · k + a) · k + b][t]
    let mut lanes = vec![[0.0; 8]; 3 * k * k];
    let mut scaled = [[0.0; 8]; 3];
    for start in (0..main).step_by(8) {
        let w: [[f64; 3]; 8] = std::array::from_fn(|t| weights(start + t));
        for b in 0..k {
            let qb = &q[b * n + start..b * n + start + 8];
            for r in 0..3 {
                for t in 0..8 {
                    scaled[r][t] = qb[t] * w[t][r];
                }
            }
            for a in 0..k {
                let qa = &q[a * n + start..a * n + start + 8];
                for (r, s) in scaled.iter().enumerate() {
                    let acc = &mut lanes[(r * k + a) * k + b];
                    for t in 0..8 {
                        acc[t] += qa[t] * s[t];
                    }
                }
            }
        }
    }
    let tail: Vec<[f64; 3]> = (main..n).map(&weights).collect();
    std::array::from_fn(|r| {
        DMatrix::from_fn(k, k, |a, b| {
            let mut res = combine_lanes(&lanes[(r * k + a) * k + b]);
            for (i, w) in (main..n).zip(&tail) {
                res += q[a * n + i] * (q[b * n + i] * w[r]);
            }
            res
        })
    })
}

#[cfg(test)]
mod tests {
    use super::super::covariance::covariance;
    use super::*;

    /// A generated design of 60 rows and three columns (invented data), two residual
    /// vectors, its factorisation and ten clusters of six rows.
    fn generated() -> (
        DMatrix<f64>,
        DVector<f64>,
        DVector<f64>,
        PivotedQr,
        Vec<usize>,
    ) {
        let n = 60;
        let x = DMatrix::from_fn(n, 3, |i, j| match j {
            0 => 1.0,
            1 => ((i * 7 % 13) as f64).sin(),
            _ => (i as f64 * 0.37).cos() + 0.1 * (i % 5) as f64,
        });
        let e1 = DVector::from_fn(n, |i, _| ((i * 11 % 17) as f64 - 8.0) / 5.0);
        let e2 = DVector::from_fn(n, |i, _| ((i * 5 % 7) as f64 - 3.0) / 2.0 + 0.01 * i as f64);
        let qr = PivotedQr::new(&x).expect("full rank");
        let ids: Vec<usize> = (0..n).map(|i| i / 6).collect();
        (x, e1, e2, qr, ids)
    }

    /// The quadratic form reproduces a direct evaluation of every estimator it covers, on a
    /// generated design (invented data), to rounding: the identity is exact in real
    /// arithmetic (expansion of a squared difference), so this checks the bookkeeping.
    #[test]
    fn matches_direct_covariance() {
        let (x, e1, e2, qr, ids) = generated();
        let specs = [
            CovSpec::Hc0,
            CovSpec::Hc1,
            CovSpec::Hc2,
            CovSpec::Hc3,
            CovSpec::Cluster { ids },
        ];
        for spec in &specs {
            let quad = quadratic_meat(&qr, &x, &e1, &e2, spec, Leverage::Allowed, &Absorbed::NONE)
                .expect("valid")
                .expect("covered");
            for (a, b) in [(1.0, 0.0), (0.6, 0.8), (-0.3, 2.5)] {
                let u = &e1 * a - &e2 * b;
                let direct = covariance(&qr, &x, &u, spec, Leverage::Allowed, &Absorbed::NONE)
                    .expect("valid");
                let v = quad.covariance(a, b);
                let scale = direct.cov.amax();
                assert!(
                    (v - &direct.cov).amax() <= 1e-13 * scale,
                    "{spec:?} at {a}, {b}"
                );
            }
        }
    }

    /// The one-pass Gram matrices are the bits of nalgebra's `tr_mul` on the row-scaled
    /// copies, for row counts on both sides of every multiple of eight.
    #[test]
    fn weighted_grams_are_nalgebras_bits() {
        for n in [1, 5, 8, 13, 16, 31, 200] {
            let k = 3;
            let q1 = DMatrix::from_fn(n, k, |i, j| {
                ((i * 31 + j * 17) as f64 * 0.77).sin() * (1.0 + j as f64)
            });
            let w = |i: usize| {
                let x = (i as f64 * 1.3).cos();
                [x * x, x * 0.3 - 0.1, 1.0 / (1.0 + i as f64)]
            };
            let got = weighted_grams(&q1, w);
            for (r, m) in got.iter().enumerate() {
                let mut scaled = q1.clone();
                for (i, mut row) in scaled.row_iter_mut().enumerate() {
                    row *= w(i)[r];
                }
                let expected = q1.tr_mul(&scaled);
                let same = m
                    .iter()
                    .zip(expected.iter())
                    .all(|(x, y)| x.to_bits() == y.to_bits());
                assert!(same, "n = {n}, r = {r}");
            }
        }
    }

    /// Covariances that are not evaluated as this quadratic form (HAC's kernel-weighted meat
    /// among them) are left to the direct evaluation, never approximated by an HC form.
    #[test]
    fn hac_two_way_and_classical_are_evaluated_directly() {
        let n = 12;
        let x = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { (i as f64).sqrt() });
        let e = DVector::from_fn(n, |i, _| (i % 3) as f64 - 1.0);
        let qr = PivotedQr::new(&x).expect("full rank");
        for spec in [
            CovSpec::Classical,
            CovSpec::Hac {
                positions: (0..n).collect(),
                bandwidth: 3.0,
            },
        ] {
            let quad = quadratic_meat(&qr, &x, &e, &e, &spec, Leverage::Allowed, &Absorbed::NONE);
            assert!(matches!(quad, Ok(None)), "{spec:?}");
        }
    }
}

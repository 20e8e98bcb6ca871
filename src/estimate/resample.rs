//! Resampling inference: randomization tests and the restricted wild cluster bootstrap.
//!
//! Role: p-values that do not lean on an asymptotic reference distribution. Everything here
//! is pure numerics over nalgebra matrices, deterministic given the inputs and the seed.
//!
//! # Draws and random numbers
//! A plan ([`Draws`]) gives the number of random draws B, a seed and the threshold
//! `exact_below`. When the number of distinct re-draws (assignments, or sign vectors) is at
//! most `exact_below`, all of them are enumerated, each counting once, and no random numbers
//! are used. Otherwise draw 0 is the observed assignment (the all-ones weight vector for the
//! bootstrap) and draws 1..=B are random, so `draws_used` = B + 1 (minus skipped draws).
//!
//! The random numbers of draw b are a pure function of (seed, b): a SplitMix64 stream
//! (Steele, Lea and Flood 2014, OOPSLA, "Fast splittable pseudorandom number generators";
//! the constants are Vigna's reference ones, quoted from memory) started at
//! `seed ⊕ mix(0x9E3779B97F4A7C15 · (b + 1))`, where `mix` is the SplitMix64 finaliser.
//! Uniform integers below m use Lemire's (2019, ACM TOMACS 29) multiply-and-reject method,
//! so they are exactly uniform. Draws are computed in parallel (rayon) and reduced in draw
//! order, so results are bit-identical whatever the thread count.
//!
//! # p-values (the project's contract)
//! With T the observed statistic and T*_b the statistic of draw b (the observed draw
//! included), p = #{b : |T*_b| ≥ |T|} / (number of draws), where "≥" allows a relative tie
//! tolerance [`TIE_TOLERANCE`]: |T*| ≥ |T|·(1 − 1e-12). The one-sided versions count
//! T* ≥ T − 1e-12·|T| (upper) and T* ≤ T + 1e-12·|T| (lower). A draw whose statistic cannot
//! be computed (a re-drawn regressor in the span of the controls, or a zero variance) is
//! skipped and reported in `skipped`; since the observed draw is never degenerate, this is
//! the randomization test conditional on the set of non-degenerate assignments, which is
//! still exact (that set does not depend on the outcome).
//!
//! # Submodules
//! * `assignment`: designs, counting and enumerating assignments, random permutations.
//! * `partial`: the regression of a fixed outcome on re-drawn columns after partialling out
//!   fixed controls once (Frisch–Waugh–Lovell), with every covariance of [`CovSpec`].
//! * `cells`: the same regression when the re-drawn columns are constant within clusters,
//!   from cell-level statistics computed once, so a draw costs O(G·k²) rather than O(n).
//! * `randomization`: [`randomization_test`] and [`randomization_ar`].
//! * `wild`: [`wild_cluster_bootstrap`].
//!
//! * `wre`: [`wild_restricted_efficient`], the wild restricted efficient bootstrap for 2SLS
//!   (Davidson and MacKinnon 2010, JBES 28).
//!
//! [`CovSpec`]: super::CovSpec

mod assignment;
mod cells;
mod family;
mod interval;
mod partial;
mod randomization;
mod wild;
mod wre;

#[cfg(test)]
mod family_tests;
#[cfg(test)]
mod reference_tests;
#[cfg(test)]
mod tests;
#[cfg(test)]
mod weighted_tests;

use nalgebra::{DMatrix, DVector};
use rayon::prelude::*;

use super::EstimateError;

pub use assignment::{count_assignments, AssignmentDesign};
pub use interval::{randomization_interval, IntervalProblem, RandomizationInterval};
pub use randomization::{randomization_ar, randomization_test, RiStatistic, WeightedRedraw};
pub use wild::{wild_cluster_bootstrap, Weights};
pub use wre::wild_restricted_efficient;

/// The columns of a least-squares problem a resampled test refits, borrowed: the outcome
/// and the regressors, and the rows' probability weights for a weighted problem.
#[derive(Debug, Clone, Copy)]
pub struct OlsColumns<'a> {
    pub y: &'a DVector<f64>,
    pub x: &'a DMatrix<f64>,
    /// Probability weights (`None`: unweighted). With weights, `y` and `x` are in the data's
    /// units and the test fits weighted least squares, scaling every row by √w itself; a
    /// re-drawn column is scaled by the weights of the units it lands on (the weights stay
    /// with their units).
    pub weights: Option<&'a DVector<f64>>,
}

impl<'a> OlsColumns<'a> {
    pub fn new(y: &'a DVector<f64>, x: &'a DMatrix<f64>) -> Self {
        OlsColumns {
            y,
            x,
            weights: None,
        }
    }

    /// The same columns with probability weights `w` (one per row, positive).
    pub fn weighted(self, w: &'a DVector<f64>) -> Self {
        OlsColumns {
            weights: Some(w),
            ..self
        }
    }

    /// √w of each row (`None` unweighted).
    pub(crate) fn root_weights(&self) -> Option<DVector<f64>> {
        self.weights.map(|w| w.map(f64::sqrt))
    }

    /// The outcome and regressors with every row scaled by √w (`None` unweighted), after
    /// checking the weights (one per row, finite and positive).
    pub(crate) fn scaled(&self) -> Result<Option<Scaled>, EstimateError> {
        randomization::check_weights(self.weights, self.y.len())?;
        Ok(self.root_weights().map(|r| {
            (
                self.y.component_mul(&r),
                scale_rows(self.x.clone(), Some(&r)),
            )
        }))
    }
}

/// An outcome and regressors with their rows scaled by √w.
pub(crate) type Scaled = (DVector<f64>, DMatrix<f64>);

/// `m` with every row multiplied by its entry of `root` (unchanged for `None`).
pub(crate) fn scale_rows(mut m: DMatrix<f64>, root: Option<&DVector<f64>>) -> DMatrix<f64> {
    if let Some(r) = root {
        for mut c in m.column_iter_mut() {
            c.component_mul_assign(r);
        }
    }
    m
}

/// The coefficient a resampled test is about (its column in the regressors) and the value
/// the null hypothesis gives it.
#[derive(Debug, Clone, Copy)]
pub struct Tested {
    pub index: usize,
    pub null: f64,
}

impl Tested {
    pub fn new(index: usize, null: f64) -> Self {
        Tested { index, null }
    }

    /// The coefficient is one of `k` and the null value is finite.
    ///
    /// # Errors
    /// [`EstimateError::IndexOutOfRange`], then [`EstimateError::NotFinite`].
    pub(crate) fn check(&self, k: usize) -> Result<(), EstimateError> {
        if self.index >= k {
            return Err(EstimateError::IndexOutOfRange {
                index: self.index,
                k,
            });
        }
        if !self.null.is_finite() {
            return Err(EstimateError::NotFinite);
        }
        Ok(())
    }
}

/// Relative tolerance under which two statistics count as tied (tied draws count as at
/// least as extreme): one value for single resampled p-values and the step-down.
pub use crate::inference::TIE_TOLERANCE;

/// Draws computed so far by this process, across all resampling tests: a counter the
/// caller may read from another thread to show progress (this module never prints).
pub static DRAWS_DONE: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

fn counted<T>(f: impl Fn(u64) -> T + Sync + Send) -> impl Fn(u64) -> T + Sync + Send {
    move |i| {
        let out = f(i);
        DRAWS_DONE.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        out
    }
}

/// The default `exact_below`: enumerate when there are at most this many distinct draws.
pub const DEFAULT_EXACT_BELOW: u64 = 100_000;

/// How many draws to make and when to enumerate instead.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Draws {
    /// Random draws B besides the observed one (used only when not enumerating).
    pub draws: usize,
    /// Seed of the counter-based generator.
    pub seed: u64,
    /// Enumerate every distinct draw when their number is at most this.
    pub exact_below: u64,
}

/// The outcome of a resampling test.
#[derive(Debug, Clone, PartialEq)]
pub struct ResampleResult {
    /// The observed statistic.
    pub observed: f64,
    /// Two-sided p-value: share of draws with |T*| ≥ |T|.
    pub p_value: f64,
    /// Upper one-sided p-value: share of draws with T* ≥ T.
    pub p_upper: f64,
    /// Lower one-sided p-value: share of draws with T* ≤ T.
    pub p_lower: f64,
    /// Draws in the denominators (the observed one included, skipped ones excluded).
    pub draws_used: usize,
    /// Draws whose statistic could not be computed (degenerate re-draws), left out.
    pub skipped: usize,
    /// Whether every distinct draw was enumerated (no random numbers used).
    pub exact: bool,
    /// The statistic of every draw in draw order (`None`: skipped). Random mode: draw 0 is the
    /// observed one; exact mode: the enumeration order, which depends only on the design, so
    /// tests on the same units and design line up draw by draw (for Romano–Wolf).
    pub statistics: Vec<Option<f64>>,
}

/// Why a resampling test could not be run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ResampleError {
    /// The underlying estimate failed.
    #[error(transparent)]
    Estimate(#[from] EstimateError),
    /// Block or cluster ids not one per observation.
    #[error("{what} has {got} entries for {n} observations")]
    IdLength {
        /// "blocks" or "clusters".
        what: &'static str,
        /// Observations.
        n: usize,
        /// Entries given.
        got: usize,
    },
    /// A cluster-randomised design whose treatment varies inside a cluster.
    #[error("the treatment is not constant within cluster {cluster}")]
    VariesWithinCluster {
        /// The caller's cluster id.
        cluster: usize,
    },
    /// A cluster that spans several blocks in a blocked, cluster-randomised design.
    #[error("cluster {cluster} spans more than one block")]
    ClusterSpansBlocks {
        /// The caller's cluster id.
        cluster: usize,
    },
    /// Random draws requested but B = 0 and the draws are too many to enumerate.
    #[error(
        "no random draws requested and the distinct draws are too many to enumerate ({count:?})"
    )]
    NoDraws {
        /// The number of distinct draws (`None`: more than 2^128 − 1).
        count: Option<u128>,
    },
    /// The observed statistic is not finite (e.g. a zero standard error).
    #[error("the observed statistic is not finite")]
    ObservedNotFinite,
}

/// The observed statistic, every draw's statistic in draw order (`None`: skipped), and
/// whether the draws were enumerated.
pub(crate) type DrawStats = (f64, Vec<Option<f64>>, bool);

/// The random stream of one draw: SplitMix64 started from (seed, draw) by
/// [`SplitMix64::for_draw`](crate::random::SplitMix64::for_draw).
pub(crate) use crate::random::SplitMix64 as Stream;

/// Computes the statistic of every draw: all `count` of them when `count ≤ exact_below`
/// (`exact(i)` for i in 0..count), else the observed one and B random ones (`random(b)` for
/// b in 1..=B, `observed` for draw 0). Returns the statistics in draw order and whether the
/// draws were enumerated.
pub(crate) fn run_draws<T, E, R>(
    count: Option<u128>,
    plan: &Draws,
    observed: T,
    exact: E,
    random: R,
) -> Result<(Vec<Option<T>>, bool), ResampleError>
where
    T: Send,
    E: Fn(u64) -> Option<T> + Sync + Send,
    R: Fn(u64) -> Option<T> + Sync + Send,
{
    match count {
        Some(c) if c <= u128::from(plan.exact_below) => {
            // c ≤ exact_below ≤ u64::MAX.
            let c = c as u64;
            Ok(((0..c).into_par_iter().map(counted(exact)).collect(), true))
        }
        _ if plan.draws == 0 => Err(ResampleError::NoDraws { count }),
        _ => {
            let b = plan.draws as u64;
            let mut stats = Vec::with_capacity(plan.draws + 1);
            stats.push(Some(observed));
            stats.par_extend((1..=b).into_par_iter().map(counted(random)));
            Ok((stats, false))
        }
    }
}

/// The two-sided p-value under the contract in the module documentation, counted from the
/// statistics as they come (`None`: skipped); [`summarise`] and the randomization interval's
/// candidates use it.
pub(crate) fn two_sided_p(observed: f64, stats: impl Iterator<Item = Option<f64>>) -> f64 {
    let tol = TIE_TOLERANCE * observed.abs();
    let (mut two, mut used) = (0usize, 0usize);
    for s in stats.flatten() {
        used += 1;
        two += usize::from(s.abs() >= observed.abs() - tol);
    }
    two as f64 / used as f64
}

/// Turns the draw statistics into p-values under the contract in the module documentation.
pub(crate) fn summarise(observed: f64, stats: &[Option<f64>], exact: bool) -> ResampleResult {
    let tol = TIE_TOLERANCE * observed.abs();
    let (mut upper, mut lower, mut used) = (0usize, 0usize, 0usize);
    for s in stats.iter().flatten() {
        used += 1;
        upper += usize::from(*s >= observed - tol);
        lower += usize::from(*s <= observed + tol);
    }
    let share = |c: usize| c as f64 / used as f64;
    ResampleResult {
        observed,
        p_value: two_sided_p(observed, stats.iter().copied()),
        p_upper: share(upper),
        p_lower: share(lower),
        draws_used: used,
        skipped: stats.len() - used,
        exact,
        statistics: stats.to_vec(),
    }
}

//! Lee (2009) bounds on the effect among units that respond under either arm, with
//! their standard errors and the Imbens–Manski (2004) interval.

use super::{arm_counts, check_len, SummaryError};

/// Which arm Lee bounds trim.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TrimmedArm {
    /// The treated arm had the higher observed share.
    Treated,
    /// The comparison arm had the higher observed share.
    Comparison,
}

/// Lee (2009) bounds on the treatment effect among units observed whatever their arm.
#[derive(Debug, Clone, PartialEq)]
pub struct LeeBounds {
    /// Lower bound on the effect.
    pub lower: f64,
    /// Upper bound on the effect.
    pub upper: f64,
    /// Trimming share p = (q_high − q_low)/q_high (0 when the shares are equal).
    pub trim_share: f64,
    /// The arm that was trimmed (treated when the shares are equal; p = 0 then).
    pub trimmed_arm: TrimmedArm,
    /// Observed share in the treated arm.
    pub observed_share_treated: f64,
    /// Observed share in the comparison arm.
    pub observed_share_comparison: f64,
    /// Observed outcomes in the treated arm.
    pub n_observed_treated: usize,
    /// Observed outcomes in the comparison arm.
    pub n_observed_comparison: usize,
    /// Standard error of `lower` (Lee 2009, Proposition 3; see [`lee_bounds`]).
    pub se_lower: f64,
    /// Standard error of `upper`.
    pub se_upper: f64,
}

/// Mean, variance (divisor = the kept mass) and the value at the cut of the lowest `kept`
/// mass of the ascending `sorted` values, the boundary observation weighted fractionally as
/// in [`lower_trimmed_mean`].
fn lower_trimmed_moments(sorted: &[f64], kept: f64) -> (f64, f64, f64) {
    let mean = lower_trimmed_mean(sorted, kept);
    let (mut remaining, mut ss, mut cut) = (kept, 0.0, f64::NAN);
    for &v in sorted {
        if remaining <= 0.0 {
            break;
        }
        let w = remaining.min(1.0);
        ss += w * (v - mean) * (v - mean);
        cut = v;
        remaining -= w;
    }
    (mean, ss / kept, cut)
}

/// Sampling variance of a trimmed mean of the trimmed arm (Lee 2009, Proposition 3): the
/// truncated-mean term [σ² + p (y_cut − μ)²] / K and the term of the estimated trimming
/// share ((y_cut − μ)/(1 − p))² Var(p̂).
fn trimmed_mean_variance(moments: (f64, f64, f64), p: f64, kept: f64, var_p: f64) -> f64 {
    let (mean, var, cut) = moments;
    let gap = cut - mean;
    (var + p * gap * gap) / kept + (gap / (1.0 - p)).powi(2) * var_p
}

/// Mean of the lowest share `keep` (in (0, 1]) of the ascending `sorted` values, with the
/// boundary observation weighted fractionally: (1/(keep·n)) ∫₀^{keep·n} y_(⌈u⌉) du.
fn lower_trimmed_mean(sorted: &[f64], kept: f64) -> f64 {
    let mut remaining = kept;
    let mut total = 0.0;
    for &v in sorted {
        if remaining <= 0.0 {
            break;
        }
        let w = remaining.min(1.0);
        total += w * v;
        remaining -= w;
    }
    total / kept
}

/// Lee (2009, "Training, wages, and sample selection: estimating sharp bounds on treatment
/// effects", Review of Economic Studies 76) bounds for a binary arm under monotone selection.
///
/// # Formula
/// With q_t, q_c the observed shares by arm, the arm with the higher share (h) is trimmed by
/// p = (q_h − q_l)/q_h. Its observed outcomes y_(1) ≤ … ≤ y_(n) keep mass K = n(1 − p)
/// (= N_h q_l): the mean of the lowest K is (1/K) ∫₀^K y_(⌈u⌉) du, i.e. the lowest ⌊K⌋ values
/// in full and the next with weight K − ⌊K⌋, the empirical version of Lee's
/// E[Y | Y ≤ y_{1−p}] (equal to it when K is an integer and there is no tie at the cut); the
/// mean of the highest K is the mirror image. With the treated arm trimmed, lower = (mean of
/// its lowest K) − ȳ_c and upper = (mean of its highest K) − ȳ_c; with the comparison arm
/// trimmed, lower = ȳ_t − (mean of its highest K) and upper = ȳ_t − (mean of its lowest K).
///
/// Standard errors (Lee 2009, Proposition 3, typed from memory and re-derived here by the
/// delta method from the influence functions of a truncated mean and of p̂; the two are
/// uncorrelated because p̂ depends only on who is observed): with m_t, m_c the observed
/// counts, Var(p̂) = (1 − p)² [(1 − q_l)/m_l + (1 − q_h)/m_h]; for a trimmed mean μ̂ of the
/// trimmed arm with kept mass K, kept values' variance σ̂² (fractional weights, divisor K) and
/// the value at the cut y_cut (the last kept value), Var(μ̂) = [σ̂² + p (y_cut − μ̂)²]/K +
/// ((y_cut − μ̂)/(1 − p))² Var(p̂); the untrimmed arm's mean adds s²/m (divisor m). A bound's
/// variance is the sum for the trimmed mean it uses and the untrimmed mean. Units are taken
/// as sampled independently (no clusters), and at p = 0 the estimator sits at a kink of the
/// trimming, where the normal approximation is poorest.
///
/// `outcome` is read only where `observed` is true (it may be NaN elsewhere).
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::EmptyArm`] (an arm without observations or
/// without observed outcomes) and [`SummaryError::NotFinite`] (a non-finite observed
/// outcome).
pub fn lee_bounds(
    outcome: &[f64],
    observed: &[bool],
    treated: &[bool],
) -> Result<LeeBounds, SummaryError> {
    let n = outcome.len();
    check_len("observed", n, observed.len())?;
    check_len("treated", n, treated.len())?;
    let (nt, nc) = arm_counts(treated)?;
    let sorted_arm = |arm: bool| -> Result<Vec<f64>, SummaryError> {
        let mut v: Vec<f64> = (0..n)
            .filter(|&i| treated[i] == arm && observed[i])
            .map(|i| outcome[i])
            .collect();
        if v.iter().any(|x| !x.is_finite()) {
            return Err(SummaryError::NotFinite);
        }
        if v.is_empty() {
            return Err(SummaryError::EmptyArm {
                arm: if arm { "treated" } else { "comparison" },
                what: "observed outcomes",
            });
        }
        v.sort_by(f64::total_cmp);
        Ok(v)
    };
    let yt = sorted_arm(true)?;
    let yc = sorted_arm(false)?;
    let qt = yt.len() as f64 / nt as f64;
    let qc = yc.len() as f64 / nc as f64;
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let (trimmed_arm, high, n_high, q_low, q_high) = if qt >= qc {
        (TrimmedArm::Treated, &yt, nt, qc, qt)
    } else {
        (TrimmedArm::Comparison, &yc, nc, qt, qc)
    };
    let trim_share = (q_high - q_low) / q_high;
    // Kept mass N_h q_l, never above the n observed (guards the rounding of equal shares).
    let kept = (n_high as f64 * q_low).min(high.len() as f64);
    let low = lower_trimmed_moments(high, kept);
    let reversed: Vec<f64> = high.iter().rev().copied().collect();
    let top = lower_trimmed_moments(&reversed, kept);
    let (low_mean, high_mean) = (low.0, top.0);
    let (lower, upper) = match trimmed_arm {
        TrimmedArm::Treated => (low_mean - mean(&yc), high_mean - mean(&yc)),
        TrimmedArm::Comparison => (mean(&yt) - high_mean, mean(&yt) - low_mean),
    };
    // Var(p̂) for p̂ = 1 − q_l/q_h by the delta method: (1 − p)² Σ_arms (1 − q)/m, m the
    // arm's observed count.
    let (m_low, m_high) = match trimmed_arm {
        TrimmedArm::Treated => (yc.len(), yt.len()),
        TrimmedArm::Comparison => (yt.len(), yc.len()),
    };
    let var_p = (1.0 - trim_share).powi(2)
        * ((1.0 - q_low) / m_low as f64 + (1.0 - q_high) / m_high as f64);
    let untrimmed = if trimmed_arm == TrimmedArm::Treated {
        &yc
    } else {
        &yt
    };
    let u_mean = mean(untrimmed);
    let var_untrimmed = untrimmed
        .iter()
        .map(|v| (v - u_mean) * (v - u_mean))
        .sum::<f64>()
        / (untrimmed.len() as f64).powi(2);
    let var_low = trimmed_mean_variance(low, trim_share, kept, var_p) + var_untrimmed;
    let var_high = trimmed_mean_variance(top, trim_share, kept, var_p) + var_untrimmed;
    // The lower bound uses the lower trimmed mean when the treated arm is trimmed and the
    // upper one when the comparison arm is.
    let (se_lower, se_upper) = match trimmed_arm {
        TrimmedArm::Treated => (var_low.sqrt(), var_high.sqrt()),
        TrimmedArm::Comparison => (var_high.sqrt(), var_low.sqrt()),
    };
    Ok(LeeBounds {
        lower,
        upper,
        trim_share,
        trimmed_arm,
        observed_share_treated: qt,
        observed_share_comparison: qc,
        n_observed_treated: yt.len(),
        n_observed_comparison: yc.len(),
        se_lower,
        se_upper,
    })
}

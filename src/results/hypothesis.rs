//! Hypothesis results, how a resampled p-value was obtained, and decision rules' outcomes.

use super::kinds::{
    BootstrapVariant, BootstrapWeights, CountingRule, DrawStatistic, EstimatorKind,
    HypothesisRegistration, Procedure, ResampleMode, TestMethod, Trigger, Verdict,
};
use super::spec::SetPiece;
use serde::Serialize;

/// One hypothesis.
#[derive(Debug, Clone, Serialize)]
pub struct HypothesisResult {
    /// The claim in words.
    pub claim: String,
    /// Specification id.
    pub specification: String,
    /// Term.
    pub term: String,
    /// Direction.
    pub direction: crate::inference::Direction,
    /// Null value.
    pub null: f64,
    /// Estimate (null when undetermined).
    pub estimate: Option<f64>,
    /// Standard error.
    pub std_error: Option<f64>,
    /// (estimate − null) / std_error.
    pub statistic: Option<f64>,
    /// p-value in the stated direction.
    pub p_value: Option<f64>,
    /// p-value after the family's correction.
    pub adjusted_p_value: Option<f64>,
    /// Level.
    pub alpha: f64,
    /// Family.
    pub family: Option<String>,
    /// Correction used.
    pub correction: crate::inference::Correction,
    /// "t" | "normal" | "anderson-rubin" | "clr" | "tf" | "randomization" | "wild-bootstrap".
    pub method: TestMethod,
    /// Estimator of the tested estimate ("ols", "2sls", "liml", "fuller").
    pub estimator: EstimatorKind,
    /// Specification whose estimate was tested (differs from `specification` when an
    /// endogeneity contingency substituted an OLS specification).
    pub tested_specification: String,
    /// The contingency that changed this hypothesis's inference, if any.
    pub contingency: Option<String>,
    /// Degrees of freedom of the t reference.
    pub df: Option<f64>,
    /// Confidence set for the term at the specification's confidence level (one piece for an
    /// ordinary interval; the Anderson–Rubin set may have unbounded or several pieces).
    pub ci: Option<Vec<SetPiece>>,
    /// One-sided hypotheses tested with a t or normal reference: the (1 − alpha) one-sided
    /// bound the test implies, before any family correction (a lower bound for `greater`, an
    /// upper bound for `less`; the null lies beyond it exactly when the unadjusted test
    /// rejects). Null for two-sided hypotheses and for tests that imply no such bound
    /// (resampled, Anderson–Rubin, tF).
    pub one_sided_bound: Option<f64>,
    /// Randomization tests of an OLS coefficient: the constant effects the two-sided test
    /// does not reject at the plan's alpha, found by test inversion on common draws.
    pub randomization_interval: Option<RandomizationIntervalResult>,
    /// Resampled tests: the number of draws used (the observed one included).
    pub draws: Option<usize>,
    /// Resampled tests: whether every possible draw was enumerated.
    pub exact: Option<bool>,
    /// Resampled tests: how the p-value was obtained (procedure, design re-drawn, draws,
    /// seed, counting rule); null for every other test. The reports' Resampling section is
    /// written from this object.
    pub resampling: Option<ResamplingInfo>,
    /// supported | not-supported | undetermined.
    pub verdict: Verdict,
    /// Why a verdict is undetermined.
    pub reason: Option<String>,
    /// False when the specification is not pre-registered.
    pub pre_registered: bool,
    /// `registered` (in the registered version: the fields above are its result as
    /// registered), `added-after-data`, `removed-after-data` (the registered result of a
    /// hypothesis the executed plan no longer has) or `not-registered` (no registration point).
    pub registration: HypothesisRegistration,
    /// The executed plan's result, when it differs from the registered one.
    pub as_amended: Option<Box<HypothesisResult>>,
}

/// How a resampled p-value was obtained: everything needed to repeat it.
#[derive(Debug, Clone, Serialize)]
pub struct ResamplingInfo {
    /// "randomization" (the assignment re-drawn) | "wild-bootstrap" (cluster weights drawn).
    pub procedure: Procedure,
    /// The bootstrap's variant: "restricted-wild-cluster" (OLS; Cameron, Gelbach and Miller
    /// 2008) | "wild-restricted-efficient" (2SLS; Davidson and MacKinnon 2010); null for
    /// randomization.
    pub bootstrap: Option<BootstrapVariant>,
    /// Bootstrap weights per cluster: "rademacher" | "webb"; null for randomization.
    pub weights: Option<BootstrapWeights>,
    /// What each draw recomputes: "t" (the coefficient over its standard error with the
    /// specification's errors), "estimate" (the coefficient), "anderson-rubin" (the AR
    /// statistic of a 2SLS specification at the null) or "cr1-t" (the bootstrap's
    /// CR1-studentized coefficient).
    pub statistic: DrawStatistic,
    /// The coefficient value imposed on every draw (the sharp null, or the bootstrap's
    /// restricted null).
    pub null_imposed: f64,
    /// What is re-drawn.
    pub redrawn: Redrawn,
    /// "exact": every possible draw enumerated, the seed not used | "sampled": random draws.
    pub mode: ResampleMode,
    /// Random draws the plan asks for (`[resampling].draws`), besides the observed one.
    pub draws_requested: usize,
    /// Enumerate instead when the possible draws number at most this (`exact_below`).
    pub exact_below: u64,
    /// Draws in the p-value's denominator: sampled mode, the requested draws plus the observed
    /// one minus `draws_skipped`; exact mode, every possible draw minus `draws_skipped`.
    pub draws_used: usize,
    /// Whether the observed assignment (the bootstrap's original sample, all weights 1) is
    /// one of `draws_used`: always true (sampled mode adds it as draw 0; exact mode
    /// enumerates it among all draws).
    pub observed_counted: bool,
    /// Draws whose statistic could not be computed (a degenerate re-draw), left out.
    pub draws_skipped: usize,
    /// `[resampling].seed`.
    pub seed: u64,
    /// Whether the seed drew anything (false in exact mode).
    pub seed_used: bool,
    /// Which draws count towards the p-value, as a formula over the draw statistic T* and the
    /// observed T: "|T*| >= |T|" (two-sided), "T* >= T" (greater), "T* <= T" (less), or
    /// "AR* >= AR, 1 if the estimate is on the other side" (a one-sided hypothesis tested by
    /// randomizing the Anderson–Rubin statistic). p = counted draws / `draws_used`.
    pub p_value_counts: CountingRule,
    /// Relative tolerance within which a draw ties with the observed statistic (ties count).
    pub tie_tolerance: f64,
}

/// What a resampled test re-draws.
#[derive(Debug, Clone, Serialize)]
pub struct Redrawn {
    /// Randomization: "complete" | "blocked" | "clustered" | "blocked-clustered" (the
    /// registered `[assignment].design`); bootstrap: "cluster-weights".
    pub design: String,
    /// Randomization: the assigned variable re-drawn; null for the bootstrap.
    pub variable: Option<String>,
    /// Randomization: the block variable within which it is re-drawn (null: none).
    pub blocks: Option<String>,
    /// The cluster variable whose clusters are re-assigned whole (randomization) or get one
    /// weight each (bootstrap); null: units are re-drawn one by one.
    pub clusters: Option<String>,
    /// Bootstrap: the number of clusters weighted; null for randomization.
    pub cluster_count: Option<usize>,
}

/// A randomization-inference interval by test inversion.
#[derive(Debug, Clone, Serialize)]
pub struct RandomizationIntervalResult {
    /// Lower end (null: no rejection found below the estimate out to 4096 standard errors).
    pub lower: Option<f64>,
    /// Upper end (null: likewise above).
    pub upper: Option<f64>,
    /// 1 − alpha, alpha the plan's `[inference]` level.
    pub level: f64,
    /// Each end lies within this of an effect the test rejects.
    pub tolerance: f64,
    /// Candidate effects tested (each on the same draws).
    pub evaluations: usize,
}

/// The outcome of one `[[contingency]]` rule.
#[derive(Debug, Clone, Serialize)]
pub struct ContingencyResult {
    /// Rule id.
    pub id: String,
    /// Specification watched.
    pub specification: String,
    /// "weak_instruments" | "endogeneity" | "clusters".
    pub trigger: Trigger,
    /// The threshold written in the plan.
    pub threshold: f64,
    /// The value that decided it (effective F, p-value, cluster count).
    pub value: Option<f64>,
    /// Whether the trigger held.
    pub invoked: bool,
    /// The action as written in the plan.
    pub action: String,
    /// Hypotheses whose inference the action changed.
    pub hypotheses: Vec<String>,
    /// Why, in words.
    pub reason: String,
}

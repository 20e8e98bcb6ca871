//! The closed sets of words results.json writes: one enum per field whose value is one of a
//! fixed list (estimator, error type, verdict, set shape …).
//!
//! Each variant owns its JSON spelling, given once in [`spelled!`]: serde writes it and
//! `as_str` returns it, so code branches on variants and results.json keeps the same bytes.
//! Labels for a reader live in `report/labels.rs`.
//!
//! This file is over 500 lines on purpose: it is one list of about thirty short enums, read
//! top to bottom like the field list of results.json; splitting it would scatter that list.

use serde::Serialize;

/// Declares an enum whose variants serialize as the given strings, with `as_str` returning
/// the same strings and `Display` writing them.
macro_rules! spelled {
    (
        $(#[$meta:meta])*
        pub enum $name:ident {
            $( $(#[$vmeta:meta])* $variant:ident = $text:literal, )+
        }
    ) => {
        $(#[$meta])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
        pub enum $name {
            $( $(#[$vmeta])* #[serde(rename = $text)] $variant, )+
        }

        impl $name {
            /// Every variant, in declaration order.
            #[allow(dead_code)]
            pub const ALL: &'static [$name] = &[$($name::$variant),+];

            /// The spelling results.json writes.
            pub fn as_str(self) -> &'static str {
                match self {
                    $( $name::$variant => $text, )+
                }
            }
        }

        impl std::fmt::Display for $name {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.as_str())
            }
        }
    };
}

spelled! {
    /// How the executed plan stands against the ledger.
    pub enum Integrity {
        /// The plan's bytes match the last ledger entry.
        SealedUnchanged = "sealed-unchanged",
        /// Only comments or layout changed since the last ledger entry.
        SealedCosmeticChange = "sealed-cosmetic-change",
        /// The plan's content matches no ledger entry.
        Changed = "changed",
        /// The ledger holds no seal.
        NotSealed = "not-sealed",
        /// The ledger's hash chain does not verify.
        LedgerBroken = "ledger-broken",
    }
}

spelled! {
    /// How the registered version was recorded.
    pub enum RecordedAs {
        /// By `sworn seal`.
        Sealed = "sealed",
        /// By `sworn amend`.
        Amended = "amended",
    }
}

spelled! {
    /// When a rehearsal came relative to the registration point.
    pub enum RehearsalTiming {
        /// Before the registered version's seal or amendment.
        BeforeRegistration = "before-registration",
        /// After it, before the data were seen.
        AfterRegistration = "after-registration",
        /// After the data were inspected.
        AfterDataInspected = "after-data-inspected",
        /// After results were computed.
        AfterResultsComputed = "after-results-computed",
        /// The run has no registered version.
        NoRegistration = "no-registration",
    }
}

spelled! {
    /// The ledger event of a moment.
    pub enum MomentEvent {
        /// A `data-inspected` entry.
        DataInspected = "data-inspected",
        /// A `data-first-read` entry.
        DataFirstRead = "data-first-read",
    }
}

spelled! {
    /// How one plan element stands against the registered version.
    pub enum ElementStatus {
        /// Same content.
        Unchanged = "unchanged",
        /// Some key differs.
        Changed = "changed",
        /// Not in the registered version.
        Added = "added",
        /// Only in the registered version.
        Removed = "removed",
    }
}

impl From<crate::plan::compare::Kind> for ElementStatus {
    fn from(k: crate::plan::compare::Kind) -> Self {
        use crate::plan::compare::Kind as K;
        match k {
            K::Added => ElementStatus::Added,
            K::Removed => ElementStatus::Removed,
            K::Changed => ElementStatus::Changed,
        }
    }
}

spelled! {
    /// The moment a change to a plan element followed.
    pub enum ChangedAfter {
        /// After the data were inspected.
        DataInspected = "data-inspected",
        /// After results were computed.
        ResultsComputed = "results-computed",
    }
}

impl From<crate::ledger::Moment> for ChangedAfter {
    fn from(m: crate::ledger::Moment) -> Self {
        match m {
            crate::ledger::Moment::DataInspected => ChangedAfter::DataInspected,
            crate::ledger::Moment::ResultsComputed => ChangedAfter::ResultsComputed,
        }
    }
}

spelled! {
    /// The kernel of HAC errors.
    pub enum HacKernel {
        /// Weight 1 − d/b at lag d.
        Bartlett = "bartlett",
    }
}

spelled! {
    /// Where a HAC bandwidth came from.
    pub enum BandwidthRule {
        /// Written in the plan.
        Stated = "stated",
        /// Chosen from the data (Newey and West 1994).
        NeweyWest1994 = "newey-west-1994",
    }
}

spelled! {
    /// The small-sample factor of a HAC sandwich.
    pub enum SmallSampleFactor {
        /// n/(n − K).
        Plain = "n/(n − K)",
        /// n/(n − K − absorbed), with absorbed fixed effects.
        Absorbed = "n/(n − K − absorbed)",
    }
}

spelled! {
    /// A Stock–Yogo criterion.
    pub enum StockYogoCriterion {
        /// 2SLS relative bias.
        RelativeBias = "relative-bias",
        /// 2SLS Wald test size.
        WaldSize = "wald-size",
        /// LIML Wald test size.
        LimlWaldSize = "liml-wald-size",
    }
}

impl StockYogoCriterion {
    /// The criterion `estimate::stock_yogo` names `name` (`None` for a name it never uses).
    pub fn from_table_name(name: &str) -> Option<Self> {
        Self::ALL.iter().copied().find(|c| c.as_str() == name)
    }
}

spelled! {
    /// The shape of a confidence set from an inverted test (Anderson–Rubin, LM, CLR).
    pub enum ArShape {
        /// One bounded interval.
        Bounded = "bounded",
        /// Two rays, each unbounded on one side.
        TwoRays = "two-rays",
        /// Every value.
        WholeLine = "whole-line",
        /// No value.
        Empty = "empty",
        /// Any other union of pieces.
        Union = "union",
    }
}

spelled! {
    /// The error assumption of the LM and CLR tests.
    pub enum LmClrErrors {
        /// Classical errors: Kleibergen's (2002) LM and Moreira's (2003) CLR.
        Homoskedastic = "homoskedastic",
        /// HC0–HC3 errors: Kleibergen's (2005) K and GMM-CLR with the specification's
        /// sandwich.
        HeteroskedasticityRobust = "heteroskedasticity-robust",
        /// One-way clustered errors: the same with the CR1 sandwich.
        ClusterRobust = "cluster-robust",
    }
}

spelled! {
    /// An estimator.
    pub enum EstimatorKind {
        /// Ordinary least squares.
        Ols = "ols",
        /// Two-stage least squares.
        Tsls = "2sls",
        /// Limited-information maximum likelihood.
        Liml = "liml",
        /// Fuller's modified LIML.
        Fuller = "fuller",
    }
}

impl EstimatorKind {
    /// Whether the estimator uses excluded instruments.
    pub fn is_iv(self) -> bool {
        self != EstimatorKind::Ols
    }
}

impl From<crate::plan::Estimator> for EstimatorKind {
    fn from(e: crate::plan::Estimator) -> Self {
        use crate::plan::Estimator as E;
        match e {
            E::Ols => EstimatorKind::Ols,
            E::Tsls => EstimatorKind::Tsls,
            E::Liml => EstimatorKind::Liml,
            E::Fuller => EstimatorKind::Fuller,
        }
    }
}

spelled! {
    /// A standard-error type.
    pub enum ErrorKind {
        /// Homoskedastic.
        Classical = "classical",
        /// White.
        Hc0 = "hc0",
        /// White with n/(n − k).
        Hc1 = "hc1",
        /// Leverage-adjusted.
        Hc2 = "hc2",
        /// Squared-leverage-adjusted.
        Hc3 = "hc3",
        /// Cluster-robust (one or two ways).
        Cluster = "cluster",
        /// Heteroskedasticity and autocorrelation consistent.
        Hac = "hac",
    }
}

impl From<&crate::plan::Errors> for ErrorKind {
    fn from(e: &crate::plan::Errors) -> Self {
        use crate::plan::Errors as E;
        match e {
            E::Classical => ErrorKind::Classical,
            E::Hc0 => ErrorKind::Hc0,
            E::Hc1 => ErrorKind::Hc1,
            E::Hc2 => ErrorKind::Hc2,
            E::Hc3 => ErrorKind::Hc3,
            E::Cluster(_) => ErrorKind::Cluster,
            E::Hac { .. } => ErrorKind::Hac,
        }
    }
}

spelled! {
    /// How a summary index combines its components.
    pub enum IndexMethod {
        /// Inverse-covariance weighted (Anderson 2008).
        Anderson = "anderson",
        /// Mean of z-scores (Kling, Liebman and Katz 2007).
        MeanZ = "mean-z",
    }
}

spelled! {
    /// How a summary index treats missing components.
    pub enum IndexMissing {
        /// Observed components averaged.
        Available = "available",
        /// Complete rows only.
        Complete = "complete",
    }
}

spelled! {
    /// The arm Lee bounds trim.
    pub enum TrimmedArm {
        /// The treated arm.
        Treated = "treated",
        /// The comparison arm.
        Comparison = "comparison",
    }
}

spelled! {
    /// What a decision rule watches.
    pub enum Trigger {
        /// The effective first-stage F.
        WeakInstruments = "weak_instruments",
        /// The endogeneity test.
        Endogeneity = "endogeneity",
        /// The number of clusters.
        Clusters = "clusters",
    }
}

spelled! {
    /// Why a column defines a specification's arms.
    pub enum ArmRole {
        /// The single excluded instrument.
        Instrument = "instrument",
        /// The `[assignment]` variable.
        Assignment = "assignment",
        /// The single regressor of interest.
        Regressor = "regressor",
    }
}

spelled! {
    /// The standard error of an arm mean.
    pub enum ArmStdError {
        /// CR1 by the specification's first cluster variable.
        Cluster = "cluster",
        /// s/√n.
        Unclustered = "unclustered",
    }
}

spelled! {
    /// The short reason take-up by arm is not shown.
    pub enum TakeUpMissing {
        /// An OLS specification.
        Ols = "ols",
        /// Not exactly one excluded instrument.
        Instruments = "instruments",
        /// Not exactly one endogenous regressor.
        Endogenous = "endogenous",
        /// The instrument is not 0/1.
        NotBinary = "not-binary",
        /// Only one arm has rows.
        OneArm = "one-arm",
        /// An arm with fewer than two rows or in one cluster.
        SmallArm = "small-arm",
        /// The variable is not a column.
        NotAColumn = "not-a-column",
        /// Not exactly one regressor of interest.
        Regressors = "regressors",
        /// A weighted specification (arm summaries are computed unweighted only).
        Weighted = "weighted",
    }
}

spelled! {
    /// The reference distribution of coefficient tests.
    pub enum CoefDistribution {
        /// Student's t.
        T = "t",
        /// Standard normal.
        Normal = "normal",
    }
}

spelled! {
    /// How a hypothesis was tested.
    pub enum TestMethod {
        /// A t reference.
        T = "t",
        /// A normal reference.
        Normal = "normal",
        /// The Anderson–Rubin test.
        AndersonRubin = "anderson-rubin",
        /// Moreira's conditional likelihood ratio test (homoskedastic).
        Clr = "clr",
        /// The tF procedure.
        Tf = "tf",
        /// A randomization test.
        Randomization = "randomization",
        /// The wild cluster bootstrap.
        WildBootstrap = "wild-bootstrap",
    }
}

impl From<CoefDistribution> for TestMethod {
    fn from(d: CoefDistribution) -> Self {
        match d {
            CoefDistribution::T => TestMethod::T,
            CoefDistribution::Normal => TestMethod::Normal,
        }
    }
}

impl From<Procedure> for TestMethod {
    fn from(p: Procedure) -> Self {
        match p {
            Procedure::Randomization => TestMethod::Randomization,
            Procedure::WildBootstrap => TestMethod::WildBootstrap,
        }
    }
}

spelled! {
    /// A hypothesis's verdict.
    pub enum Verdict {
        /// The test rejects at the hypothesis's level.
        Supported = "supported",
        /// It does not.
        NotSupported = "not-supported",
        /// No test could be done.
        Undetermined = "undetermined",
    }
}

spelled! {
    /// How a hypothesis stands against the registered version.
    pub enum HypothesisRegistration {
        /// In the registered version.
        Registered = "registered",
        /// Added after the data were seen.
        AddedAfterData = "added-after-data",
        /// Removed after the data were seen (its registered result).
        RemovedAfterData = "removed-after-data",
        /// No registration point.
        NotRegistered = "not-registered",
    }
}

spelled! {
    /// A resampling procedure.
    pub enum Procedure {
        /// The assignment re-drawn.
        Randomization = "randomization",
        /// Cluster weights drawn.
        WildBootstrap = "wild-bootstrap",
    }
}

spelled! {
    /// A wild bootstrap's variant.
    pub enum BootstrapVariant {
        /// OLS (Cameron, Gelbach and Miller 2008).
        RestrictedWildCluster = "restricted-wild-cluster",
        /// 2SLS (Davidson and MacKinnon 2010).
        WildRestrictedEfficient = "wild-restricted-efficient",
    }
}

spelled! {
    /// Bootstrap weights per cluster.
    pub enum BootstrapWeights {
        /// ±1 with equal probability.
        Rademacher = "rademacher",
        /// Webb's six-point weights.
        Webb = "webb",
    }
}

spelled! {
    /// What each resampled draw recomputes.
    pub enum DrawStatistic {
        /// The coefficient over its standard error.
        T = "t",
        /// The coefficient.
        Estimate = "estimate",
        /// The Anderson–Rubin statistic at the null.
        AndersonRubin = "anderson-rubin",
        /// The CR1-studentized coefficient.
        Cr1T = "cr1-t",
    }
}

spelled! {
    /// How resampled draws were made.
    pub enum ResampleMode {
        /// Every possible draw enumerated.
        Exact = "exact",
        /// Random draws.
        Sampled = "sampled",
    }
}

spelled! {
    /// Which draws count towards a resampled p-value.
    pub enum CountingRule {
        /// Two-sided.
        TwoSided = "|T*| >= |T|",
        /// Greater.
        Greater = "T* >= T",
        /// Less.
        Less = "T* <= T",
        /// A one-sided hypothesis tested by randomizing the Anderson–Rubin statistic.
        ArOneSided = "AR* >= AR, 1 if the estimate is on the other side",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// serde's spelling and `as_str` come from the same literal; this checks the macro keeps
    /// them equal for a few enums of each kind.
    #[test]
    fn serde_writes_as_str() {
        for v in CountingRule::ALL {
            assert_eq!(
                serde_json::to_string(v).expect("json"),
                serde_json::to_string(v.as_str()).expect("json")
            );
        }
        for v in EstimatorKind::ALL {
            assert_eq!(serde_json::to_string(v).expect("json"), format!("\"{v}\""));
        }
    }
}

//! Arm summaries of a specification's estimation sample: the outcome's mean in the comparison
//! arm and, for IV specifications, take-up (the endogenous regressor's mean) in each arm of a
//! binary instrument. The tables' `comparison-mean` and `take-up-by-arm` rows only format
//! these numbers (contract in `results::ArmSummary`).

use crate::data::{Design, Numbers, Table};
use crate::plan::Spec;
use crate::results::{ArmMean, ArmSummary};

/// A short reason code and the sentence saying why a summary is not available.
type Why = (crate::results::TakeUpMissing, String);

/// The arm summaries of `spec` fitted on design `d` of `table`; `assigned` is the plan's
/// `[assignment]` variable.
pub fn summarise(spec: &Spec, table: &Table, d: &Design, assigned: Option<&str>) -> ArmSummary {
    let z = crate::inference::quantile(
        &crate::distribution::Reference::Normal,
        0.5 + spec.confidence / 2.0,
    );
    let clusters = d.clusters.first().map(|(ids, _)| ids.as_slice());
    let mut out = unsummarised(spec, clusters.is_some());
    let iv = spec.estimator.is_iv();
    if !iv {
        out.take_up_note = Some("an OLS specification has no instrument".to_string());
        out.take_up_missing = Some(crate::results::TakeUpMissing::Ols);
    }
    let arms = weighted(spec)
        .and_then(|()| choose_by(spec, assigned))
        .and_then(|(by, role)| Ok((by, role, arm_of(table, by, &d.rows)?)));
    let (by, role, arm) = match arms {
        Ok(a) => a,
        Err((code, why)) => {
            out.comparison_note = Some(why.clone());
            if iv {
                out.take_up_note = Some(why);
                out.take_up_missing = Some(code);
            }
            return out;
        }
    };
    out.by = Some(by.to_string());
    out.by_role = Some(role);
    let y: Vec<f64> = d.y_raw.iter().copied().collect();
    match arm_mean(&spec.outcome, &y, &arm, 0, clusters, z) {
        Ok(m) => out.comparison_mean = Some(m),
        Err((_, why)) => out.comparison_note = Some(why),
    }
    if iv {
        let take_up = take_up(spec, table, d, &arm, clusters, z);
        match take_up {
            Ok(t) => out.take_up = Some(t),
            Err((code, why)) => {
                out.take_up_note = Some(why);
                out.take_up_missing = Some(code);
            }
        }
    }
    out
}

/// Arm summaries are computed unweighted only: a weighted specification's are marked
/// unavailable with the reason rather than computed without its weights.
fn weighted(spec: &Spec) -> Result<(), Why> {
    match &spec.weights {
        Some(w) => Err((
            crate::results::TakeUpMissing::Weighted,
            format!("not computed: the specification is weighted by `{w}`, and arm summaries are computed unweighted only"),
        )),
        None => Ok(()),
    }
}

/// The summary before any arm is found: how its standard errors are computed (clustered
/// by the specification's first cluster column when the design has clusters), nothing else.
fn unsummarised(spec: &Spec, clustered: bool) -> ArmSummary {
    ArmSummary {
        by: None,
        by_role: None,
        std_error_kind: if clustered {
            crate::results::ArmStdError::Cluster
        } else {
            crate::results::ArmStdError::Unclustered
        },
        cluster_by: match &spec.errors {
            crate::plan::Errors::Cluster(by) if clustered => by.first().cloned(),
            _ => None,
        },
        comparison_mean: None,
        comparison_note: None,
        take_up: None,
        take_up_note: None,
        take_up_missing: None,
    }
}

/// The binary column that defines the arms, and its role.
fn choose_by<'s>(
    spec: &'s Spec,
    assigned: Option<&'s str>,
) -> Result<(&'s str, crate::results::ArmRole), Why> {
    if spec.estimator.is_iv() {
        return match spec.instruments.as_slice() {
            [z] => Ok((z.as_str(), crate::results::ArmRole::Instrument)),
            zs => Err((
                crate::results::TakeUpMissing::Instruments,
                format!(
                    "the specification has {} instruments; arms need a single binary instrument",
                    zs.len()
                ),
            )),
        };
    }
    if let Some(a) = assigned.filter(|a| spec.regressors.iter().any(|r| r == a)) {
        return Ok((a, crate::results::ArmRole::Assignment));
    }
    match spec.regressors.as_slice() {
        [x] => Ok((x.as_str(), crate::results::ArmRole::Regressor)),
        xs => Err((crate::results::TakeUpMissing::Regressors, format!(
            "the specification has {} regressors of interest and none is the [assignment] variable; arms need one binary regressor",
            xs.len()
        ))),
    }
}

/// The value of `col` in row `r`, `None` when missing or past the column's end.
fn cell(col: &Numbers, r: usize) -> Option<f64> {
    (r < col.len()).then(|| col.get(r)).flatten()
}

/// The arm (0 or 1) of each estimation row, or why `by` does not split them in two.
fn arm_of(table: &Table, by: &str, rows: &[usize]) -> Result<Vec<u8>, Why> {
    let col = table.numeric.get(by).ok_or_else(|| {
        (
            crate::results::TakeUpMissing::NotAColumn,
            format!("`{by}` is not a numeric data column, so it defines no arms"),
        )
    })?;
    let mut arm = Vec::with_capacity(rows.len());
    for &r in rows {
        match cell(col, r) {
            Some(0.0) => arm.push(0),
            Some(1.0) => arm.push(1),
            _ => {
                return Err((crate::results::TakeUpMissing::NotBinary, format!(
                    "`{by}` takes values other than 0 and 1 in the estimation sample, so it has no arms"
                )))
            }
        }
    }
    if !arm.contains(&0) || !arm.contains(&1) {
        return Err((
            crate::results::TakeUpMissing::OneArm,
            format!(
                "`{by}` takes only one value in the estimation sample, so there is no second arm"
            ),
        ));
    }
    Ok(arm)
}

/// The endogenous regressor's mean in each arm of the instrument.
fn take_up(
    spec: &Spec,
    table: &Table,
    d: &Design,
    arm: &[u8],
    clusters: Option<&[usize]>,
    z: f64,
) -> Result<[ArmMean; 2], Why> {
    let [x] = spec.endogenous.as_slice() else {
        return Err((
            crate::results::TakeUpMissing::Endogenous,
            format!(
                "the specification has {} endogenous regressors; take-up by arm needs one",
                spec.endogenous.len()
            ),
        ));
    };
    let col = table.numeric.get(x).ok_or_else(|| {
        (
            crate::results::TakeUpMissing::NotAColumn,
            format!("`{x}` is not a numeric data column"),
        )
    })?;
    let values: Vec<f64> = d
        .rows
        .iter()
        .map(|&r| cell(col, r).unwrap_or(f64::NAN))
        .collect();
    Ok([
        arm_mean(x, &values, arm, 0, clusters, z)?,
        arm_mean(x, &values, arm, 1, clusters, z)?,
    ])
}

/// Mean, SD and standard error of `values` over the rows in arm `which`.
///
/// # Formula
/// mean m = Σx/n, sd = √(Σ(x − m)²/(n − 1)); unclustered SE = sd/√n; cluster-robust SE =
/// √(G/(G − 1) · Σ_g (Σ_{i∈g} (x_i − m))²) / n, the CR1 standard error of the intercept in a
/// regression of x on a constant (Cameron and Miller 2015, JHR 50, eq. 12, with k = 1);
/// interval m ± z·SE with z the normal quantile of the specification's confidence level.
fn arm_mean(
    variable: &str,
    values: &[f64],
    arm: &[u8],
    which: u8,
    clusters: Option<&[usize]>,
    z: f64,
) -> Result<ArmMean, Why> {
    // The arm's rows, walked again for each sum rather than collected (an index vector the
    // size of the sample per arm and variable).
    let idx = || (0..values.len()).filter(move |&i| arm[i] == which);
    let n = idx().count();
    if n < 2 {
        return Err((
            crate::results::TakeUpMissing::SmallArm,
            format!("arm {which} has fewer than two rows, so no spread can be estimated"),
        ));
    }
    if idx().any(|i| !values[i].is_finite()) {
        return Err((
            crate::results::TakeUpMissing::NotAColumn,
            format!("`{variable}` has a value that is not finite in arm {which}"),
        ));
    }
    let nf = n as f64;
    let mean = idx().map(|i| values[i]).sum::<f64>() / nf;
    let ss: f64 = idx().map(|i| (values[i] - mean).powi(2)).sum();
    let sd = (ss / (nf - 1.0)).sqrt();
    let (std_error, g) = match clusters {
        None => (sd / nf.sqrt(), None),
        Some(ids) => {
            let mut sums = std::collections::BTreeMap::new();
            for i in idx() {
                *sums.entry(ids[i]).or_insert(0.0) += values[i] - mean;
            }
            let g = sums.len();
            if g < 2 {
                return Err((crate::results::TakeUpMissing::SmallArm, format!(
                    "arm {which} lies in a single cluster, so no cluster-robust standard error exists"
                )));
            }
            let gf = g as f64;
            let meat: f64 = sums.values().map(|s: &f64| s * s).sum();
            ((gf / (gf - 1.0) * meat).sqrt() / nf, Some(g))
        }
    };
    Ok(ArmMean {
        variable: variable.to_string(),
        arm: which,
        n,
        clusters: g,
        mean,
        sd,
        std_error,
        ci: [mean - z * std_error, mean + z * std_error],
    })
}

//! Decision rules (`[[contingency]]`) and weak-instrument inference through the whole tool:
//! validation at check, each trigger and action at run, and each shape of the
//! Anderson–Rubin confidence set as printed in the report.

use crate::common::Edit;
use crate::common::Study;
use serde_json::Value;
use std::fmt::Write;

/// Invented IV data: `z` instruments the continuous endogenous `d` with first-stage slope
/// `strength`; `y = 1 + beta·d + 0.5·x + 2u + e`, where `u` also drives `d` (endogeneity)
/// unless `exogenous`. A second instrument `z2` with its own slope `strength2` and a direct
/// effect `direct2` on y (an invalid instrument when non-zero) serves over-identified cases.
/// `noise` scales the idiosyncratic errors of `d` and `y`: a small value makes the first-stage
/// and structural errors almost perfectly correlated.
pub struct Gen {
    pub noise: f64,
    pub n: usize,
    pub strength: f64,
    pub strength2: f64,
    pub direct2: f64,
    pub beta: f64,
    pub exogenous: bool,
    pub seed: u64,
}

impl Default for Gen {
    fn default() -> Self {
        Gen {
            noise: 1.0,
            n: 400,
            strength: 1.0,
            strength2: 0.0,
            direct2: 0.0,
            beta: 1.0,
            exogenous: false,
            seed: 7,
        }
    }
}

impl Gen {
    pub fn csv(&self) -> String {
        let mut state = self.seed;
        let mut next = move || {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut normal = move || {
            let (a, b) = (next().max(1e-300), next());
            (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
        };
        let mut out = String::from("id,grp,z,z2,d,x,y\n");
        for i in 0..self.n {
            let g = i % 20;
            let z = normal();
            let z2 = normal();
            let u = normal();
            let x = normal();
            let link = if self.exogenous { 0.0 } else { 1.0 };
            let d = self.strength * z + self.strength2 * z2 + link * u + self.noise * normal();
            let y =
                1.0 + self.beta * d + 0.5 * x + self.direct2 * z2 + 2.0 * u + self.noise * normal();
            let _ = writeln!(out, "r{i:04},g{g:02},{z:.6},{z2:.6},{d:.6},{x:.6},{y:.6}");
        }
        out
    }
}

/// A plan over [`Gen`] data: one 2SLS spec `iv` (instruments as given), an OLS spec `ols`,
/// a hypothesis on `d` in `iv`, and the extra TOML `rules` appended.
pub fn plan(instruments: &str, errors: &str, rules: &str) -> String {
    format!(
        r#"format = 1

[study]
title = "Decision-rule test study"

[data.main]
path = "data.csv"

[data.main.columns]
id  = {{ kind = "id" }}
grp = {{ kind = "category" }}
z   = {{ kind = "number" }}
z2  = {{ kind = "number" }}
d   = {{ kind = "number" }}
x   = {{ kind = "number" }}
y   = {{ kind = "number" }}

[[specification]]
id = "ols"
estimator = "ols"
outcome = "y"
regressors = ["d"]
controls = ["x"]
errors = {errors}

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["d"]
instruments = {instruments}
controls = ["x"]
errors = {errors}
diagnostics = ["first_stage", "weak_instruments"]

[[hypothesis]]
id = "H1"
claim = "d raises y"
specification = "iv"
term = "d"
direction = "greater"
{rules}
"#
    )
}

pub(crate) fn weak_rule(then: &str) -> String {
    format!(
        "\n[[contingency]]\nid = \"weak\"\nspecification = \"iv\"\nwhen = {{ weak_instruments = {{ below = 10.0 }} }}\nthen = \"{then}\"\n"
    )
}

pub(crate) fn run(plan: &str, data: &str) -> (Study, Value) {
    let s = Study::with(plan, data);
    let v = s.seal_and_run();
    (s, v)
}

pub(crate) fn check_fails(plan: &str, expect: &[&str]) {
    let s = Study::with(plan, &Gen::default().csv());
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2, "expected exit 2: {}{}", r.stdout, r.stderr);
    for e in expect {
        assert!(r.stderr.contains(e), "stderr lacks `{e}`: {}", r.stderr);
    }
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
}

#[test]
fn rule_naming_an_unknown_specification_fails_at_check() {
    let rules =
        weak_rule("anderson-rubin").edit("specification = \"iv\"", "specification = \"ivv\"");
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &rules),
        &[
            "contingency[weak].specification",
            "unknown specification `ivv`",
            "`iv`",
        ],
    );
}

#[test]
fn impossible_thresholds_fail_at_check() {
    let below = weak_rule("anderson-rubin").edit("below = 10.0", "below = -1.0");
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &below),
        &["contingency[weak].when", "positive"],
    );
    let endo = "\n[[contingency]]\nid = \"ex\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 1.5 } }\nthen = \"ols\"\n";
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", endo),
        &["contingency[ex].when", "between 0 and 1"],
    );
    let few = "\n[[contingency]]\nid = \"g\"\nspecification = \"iv\"\nwhen = { clusters = { fewer_than = 1 } }\nthen = \"wild-bootstrap\"\n";
    check_fails(
        &plan("[\"z\"]", "{ kind = \"cluster\", by = \"grp\" }", few),
        &["contingency[g].when", "at least 3"],
    );
    let unknown = weak_rule("anderson-rubin").edit(
        "weak_instruments = { below = 10.0 }",
        "first_stage = { below = 10.0 }",
    );
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &unknown),
        &["unknown trigger `first_stage`"],
    );
}

#[test]
fn actions_that_do_not_fit_the_specification_fail_at_check() {
    // Anderson–Rubin on an OLS specification.
    let on_ols =
        weak_rule("anderson-rubin").edit("specification = \"iv\"", "specification = \"ols\"");
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &on_ols),
        &["instrumental-variable specification", "`ols`"],
    );
    // tF needs a just-identified specification.
    check_fails(
        &plan("[\"z\", \"z2\"]", "\"hc1\"", &weak_rule("tf")),
        &["contingency[weak].then", "just-identified"],
    );
    // An endogeneity rule must substitute an OLS specification.
    let to_iv = "\n[[contingency]]\nid = \"ex\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 0.05 } }\nthen = \"iv\"\n";
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", to_iv),
        &["contingency[ex].then", "OLS specification"],
    );
    let to_nothing = to_iv.edit("then = \"iv\"", "then = \"olss\"");
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &to_nothing),
        &["unknown specification `olss`"],
    );
    // An unknown action for a weak-instrument rule.
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &weak_rule("ignore")),
        &["contingency[weak].then", "anderson-rubin"],
    );
    // Resampling does not exist yet: a wild-bootstrap rule is refused with a clear message.
    let wild = "\n[[contingency]]\nid = \"g\"\nspecification = \"iv\"\nwhen = { clusters = { fewer_than = 30 } }\nthen = \"wild-bootstrap\"\n";
    check_fails(
        &plan("[\"z\"]", "{ kind = \"cluster\", by = \"grp\" }", wild),
        &["contingency[g].then", "resampling"],
    );
    // Two rules on the same trigger and specification.
    let twice = format!(
        "{}{}",
        weak_rule("liml"),
        weak_rule("tf").edit("id = \"weak\"", "id = \"weak2\"")
    );
    check_fails(
        &plan("[\"z\"]", "\"hc1\"", &twice),
        &["already watches the same trigger"],
    );
}

pub(crate) fn spec<'a>(v: &'a Value, id: &str) -> &'a Value {
    &v["specifications"][id]
}

#[test]
fn a_strong_instrument_leaves_the_rule_idle_and_the_ar_set_bounded() {
    let (s, v) = run(
        &plan("[\"z\"]", "\"hc1\"", &weak_rule("anderson-rubin")),
        &Gen::default().csv(),
    );
    let w = &spec(&v, "iv")["weak_instruments"];
    assert_eq!(w["weak"], false, "{w}");
    let c = &v["contingencies"][0];
    assert_eq!(c["invoked"], false, "{c}");
    assert!(c["reason"].as_str().unwrap_or("").contains('≥'), "{c}");
    assert_eq!(v["hypotheses"]["H1"]["method"], "t");
    let ar = &spec(&v, "iv")["anderson_rubin"];
    assert_eq!(ar["shape"], "bounded", "{ar}");
    let ci = ar["ci"].as_array().expect("bounded interval");
    let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
    let est = spec(&v, "iv")["terms"]["d"]["estimate"].as_f64().unwrap();
    assert!(
        lo < est && est < hi,
        "[{lo}, {hi}] should contain the 2SLS estimate {est}"
    );
    let report = s.read("out/report.md");
    assert!(
        report.contains("Decision rules fixed in the plan"),
        "{report}"
    );
    assert!(
        report.contains(&format!("[{:.3}, {:.3}]", lo, hi)),
        "{report}"
    );
}

#[test]
fn a_weak_instrument_invokes_anderson_rubin_with_two_rays() {
    // A first stage too weak to bound the set (F below the AR critical value), with
    // first-stage and structural errors almost collinear: y − βd is then nearly free of error
    // at one β away from the truth, where AR rejects sharply, leaving two rays.
    let g = Gen {
        strength: 0.05,
        noise: 0.1,
        ..Gen::default()
    };
    let (s, v) = run(
        &plan("[\"z\"]", "\"hc1\"", &weak_rule("anderson-rubin")),
        &g.csv(),
    );
    let w = &spec(&v, "iv")["weak_instruments"];
    assert_eq!(w["weak"], true, "{w}");
    let c = &v["contingencies"][0];
    assert_eq!(c["invoked"], true, "{c}");
    assert_eq!(c["hypotheses"][0], "H1", "{c}");
    let ar = &spec(&v, "iv")["anderson_rubin"];
    assert_eq!(ar["shape"], "two-rays", "{ar}");
    let set = ar["set"].as_array().expect("pieces");
    assert!(
        set[0]["lower"].is_null() && set[1]["upper"].is_null(),
        "{ar}"
    );
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["method"], "anderson-rubin", "{h}");
    assert_eq!(h["contingency"], "weak", "{h}");
    assert_eq!(
        h["verdict"], "undetermined",
        "an unbounded AR set gives no verdict: {h}"
    );
    let report = s.read("out/report.md");
    assert!(report.contains("∪") && report.contains("∞)"), "{report}");
    assert!(report.contains("Anderson–Rubin"), "{report}");
}

#[test]
fn an_irrelevant_instrument_gives_the_whole_line() {
    let g = Gen {
        strength: 0.0,
        beta: 0.0,
        exogenous: false,
        ..Gen::default()
    };
    let (s, v) = run(
        &plan("[\"z\"]", "\"hc1\"", &weak_rule("anderson-rubin")),
        &g.csv(),
    );
    let ar = &spec(&v, "iv")["anderson_rubin"];
    assert_eq!(ar["shape"], "whole-line", "{ar}");
    assert_eq!(v["hypotheses"]["H1"]["verdict"], "undetermined");
    assert!(s.read("out/report.md").contains("the whole line"));
}

#[test]
fn an_invalid_overidentified_pair_gives_an_empty_set() {
    // Classical errors: the homoskedastic AR set with two instruments, one of which has a
    // large direct effect on the outcome, rejects every coefficient value.
    let g = Gen {
        strength: 1.0,
        strength2: 1.0,
        direct2: -3.0,
        ..Gen::default()
    };
    let (s, v) = run(
        &plan(
            "[\"z\", \"z2\"]",
            "\"classical\"",
            &weak_rule("anderson-rubin"),
        ),
        &g.csv(),
    );
    let ar = &spec(&v, "iv")["anderson_rubin"];
    assert_eq!(ar["shape"], "empty", "{ar}");
    assert!(s.read("out/report.md").contains("∅ (empty)"));
}

#[test]
fn a_weak_instrument_can_switch_to_liml_or_tf() {
    let g = Gen {
        strength: 0.08,
        ..Gen::default()
    };
    let (_, v) = run(&plan("[\"z\"]", "\"hc1\"", &weak_rule("liml")), &g.csv());
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["estimator"], "liml", "{h}");
    let liml = &spec(&v, "iv")["liml"];
    assert_eq!(
        h["estimate"], liml["terms"]["d"]["estimate"],
        "the hypothesis uses the LIML estimate"
    );
    let (_, v) = run(&plan("[\"z\"]", "\"hc1\"", &weak_rule("tf")), &g.csv());
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["method"], "tf", "{h}");
    assert!(h["p_value"].as_f64().is_some(), "{h}");
}

#[test]
fn an_undetected_endogeneity_promotes_the_ols_specification() {
    let rule = "\n[[contingency]]\nid = \"ex\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 0.05 } }\nthen = \"ols\"\n";
    let exo = Gen {
        exogenous: true,
        ..Gen::default()
    };
    let (s, v) = run(&plan("[\"z\"]", "\"hc1\"", rule), &exo.csv());
    let c = &v["contingencies"][0];
    assert_eq!(c["invoked"], true, "{c}");
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["tested_specification"], "ols", "{h}");
    assert_eq!(h["estimate"], spec(&v, "ols")["terms"]["d"]["estimate"]);
    assert!(s
        .read("out/report.md")
        .contains("in ols, by contingency ex"));
    // With real endogeneity the test rejects and the rule stays idle.
    let (_, v) = run(&plan("[\"z\"]", "\"hc1\"", rule), &Gen::default().csv());
    assert_eq!(v["contingencies"][0]["invoked"], false);
    assert_eq!(v["hypotheses"]["H1"]["tested_specification"], "iv");
}

#[test]
fn the_first_rule_that_fires_decides_and_a_later_one_is_superseded() {
    let rules = format!(
        "{}\n[[contingency]]\nid = \"ex\"\nspecification = \"iv\"\nwhen = {{ endogeneity = {{ not_rejected_at = 0.05 }} }}\nthen = \"ols\"\n",
        weak_rule("anderson-rubin")
    );
    // A weak instrument and an exogenous regressor: both triggers hold.
    let g = Gen {
        strength: 0.05,
        exogenous: true,
        ..Gen::default()
    };
    let (_, v) = run(&plan("[\"z\"]", "\"hc1\"", &rules), &g.csv());
    let cs = v["contingencies"].as_array().expect("two rules");
    assert_eq!(cs[0]["invoked"], true, "{}", cs[0]);
    assert_eq!(cs[1]["invoked"], true, "{}", cs[1]);
    assert!(
        cs[1]["reason"]
            .as_str()
            .unwrap_or("")
            .contains("superseded by contingency `weak`"),
        "{}",
        cs[1]
    );
    assert_eq!(cs[1]["hypotheses"].as_array().map(Vec::len), Some(0));
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["contingency"], "weak");
    assert_eq!(h["method"], "anderson-rubin");
    assert_eq!(h["tested_specification"], "iv");
}

#[test]
fn lm_and_clr_tests_follow_the_errors_and_two_way_clusters_say_why_not() {
    // Classical errors, two instruments: both tests are computed and reported.
    let (s, v) = run(
        &plan("[\"z\", \"z2\"]", "\"classical\"", ""),
        &Gen::default().csv(),
    );
    let lc = &spec(&v, "iv")["lm_clr"];
    assert_eq!(lc["errors"], "homoskedastic", "{lc}");
    assert_eq!(lc["lm"]["distribution"]["name"], "chi-square", "{lc}");
    for p in [&lc["lm"]["p_value"], &lc["clr_p_value"]] {
        let p = p.as_f64().expect("p-value");
        assert!((0.0..=1.0).contains(&p), "{lc}");
    }
    assert!(lc["clr_statistic"].as_f64().expect("clr") >= 0.0, "{lc}");
    assert!(lc["clr_conditioning"].as_f64().expect("q_t") > 0.0, "{lc}");
    for key in ["lm", "clr"] {
        let shape = lc[format!("{key}_shape")].as_str().expect("shape");
        assert!(
            ["bounded", "two-rays", "whole-line", "empty", "union"].contains(&shape),
            "{lc}"
        );
        assert!(lc[format!("{key}_set")].is_array(), "{lc}");
    }
    assert_eq!(lc["confidence"], 0.95, "{lc}");
    let report = s.read("out/report.md");
    assert!(report.contains("Kleibergen LM test of `d` = 0"), "{report}");
    assert!(
        report.contains("Kleibergen LM 95% confidence set")
            && report.contains("Moreira conditional LR 95% confidence set"),
        "{report}"
    );
    assert!(
        report.contains("Moreira conditional LR test of `d` = 0"),
        "{report}"
    );

    // One instrument: CLR = LM = L·AR, and L = 1 (Moreira 2003, section 3).
    let (_, v) = run(&plan("[\"z\"]", "\"classical\"", ""), &Gen::default().csv());
    let iv = spec(&v, "iv");
    let ar = iv["anderson_rubin"]["statistic"].as_f64().expect("ar");
    let clr = iv["lm_clr"]["clr_statistic"].as_f64().expect("clr");
    let lm = iv["lm_clr"]["lm"]["statistic"].as_f64().expect("lm");
    assert!(
        (clr - ar).abs() <= 1e-9 * ar && (lm - ar).abs() <= 1e-9 * ar,
        "{ar} {clr} {lm}"
    );
    // ... so the two sets are the same set {Q_S ≤ χ²(1) quantile}, one found exactly and
    // one by the scan.
    let (lm_set, clr_set) = (&iv["lm_clr"]["lm_set"], &iv["lm_clr"]["clr_set"]);
    let ends = |v: &Value| -> Vec<Option<f64>> {
        let pieces = v.as_array().expect("pieces");
        pieces
            .iter()
            .flat_map(|p| [p["lower"].as_f64(), p["upper"].as_f64()])
            .collect()
    };
    let (a, b) = (ends(lm_set), ends(clr_set));
    assert_eq!(a.len(), b.len(), "{lm_set} {clr_set}");
    for (x, y) in a.iter().zip(&b) {
        match (x, y) {
            (Some(x), Some(y)) => assert!((x - y).abs() <= 1e-9 * x.abs().max(1.0), "{x} {y}"),
            _ => assert_eq!(x, y),
        }
    }

    // HC1 and one-way clustered errors: the robust forms (Kleibergen 2005).
    for (errors, form) in [
        ("\"hc1\"", "heteroskedasticity-robust"),
        ("{ kind = \"cluster\", by = \"grp\" }", "cluster-robust"),
    ] {
        let (s, v) = run(&plan("[\"z\", \"z2\"]", errors, ""), &Gen::default().csv());
        let lc = &spec(&v, "iv")["lm_clr"];
        assert_eq!(lc["errors"], form, "{lc}");
        let report = s.read("out/report.md");
        assert!(report.contains("(Kleibergen 2005)"), "{report}");
    }
    // Two-way clusters: not computed, and the report says why.
    let two_way = "{ kind = \"cluster\", by = [\"grp\", \"id\"] }";
    let (s, v) = run(&plan("[\"z\"]", two_way, ""), &Gen::default().csv());
    assert!(spec(&v, "iv")["lm_clr"].is_null());
    let report = s.read("out/report.md");
    assert!(
        report.contains("sworn has no form of them for two-way clustered errors"),
        "{report}"
    );
}

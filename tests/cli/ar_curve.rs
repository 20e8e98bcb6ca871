//! The Anderson–Rubin curve of results.json and its figure in report.html: 101 points that
//! cover the set's finite ends and the estimate, lying under the critical value exactly inside
//! the set (the shape the figure shows), and drawn in the HTML report.

use crate::common::run_in;
use serde_json::Value;

fn inside(set: &[Value], b: f64) -> bool {
    set.iter().any(|p| {
        p["lower"].as_f64().is_none_or(|lo| lo <= b) && p["upper"].as_f64().is_none_or(|hi| b <= hi)
    })
}

#[test]
fn demo_curves_match_their_sets_and_are_drawn() {
    let dir = tempfile::tempdir().expect("temp dir");
    let d = run_in(dir.path(), &["demo", "--out", "demo"]);
    assert_eq!(d.code, 0, "{}{}", d.stdout, d.stderr);
    let mut shapes = Vec::new();
    for plan in ["cool-roofs", "grid-demand"] {
        let out = dir.path().join("demo/out").join(plan);
        let v: Value = serde_json::from_str(
            &std::fs::read_to_string(out.join("results.json")).expect("results.json"),
        )
        .expect("json");
        let html = std::fs::read_to_string(out.join("report.html")).expect("report.html");
        for (id, s) in v["specifications"].as_object().expect("specifications") {
            let ar = &s["anderson_rubin"];
            if ar.is_null() {
                continue;
            }
            let c = ar["critical_value"].as_f64().expect("critical value");
            let grid: Vec<f64> = ar["curve"]["coefficient"]
                .as_array()
                .expect("grid")
                .iter()
                .map(|x| x.as_f64().expect("number"))
                .collect();
            let stats = ar["curve"]["statistic"].as_array().expect("statistics");
            assert_eq!(grid.len(), 101, "{id}");
            assert_eq!(stats.len(), 101, "{id}");
            let set = ar["set"].as_array().expect("set");
            let x = s["first_stage"]
                .as_object()
                .and_then(|f| f.keys().next())
                .expect("endogenous regressor");
            let estimate = s["terms"][x]["estimate"].as_f64().expect("estimate");
            let ends = set
                .iter()
                .flat_map(|p| [p["lower"].as_f64(), p["upper"].as_f64()])
                .flatten();
            for x in ends.chain([estimate]) {
                assert!(grid[0] < x && x < grid[100], "{id}: {x} outside the grid");
            }
            for (b, st) in grid.iter().zip(stats) {
                let st = st.as_f64().expect("finite statistic");
                // Away from the ends, under the critical value exactly inside the set.
                if (st - c).abs() > 1e-6 * c {
                    assert_eq!(st <= c, inside(set, *b), "{id} at {b}: AR {st}, c {c}");
                }
            }
            shapes.push(ar["shape"].as_str().unwrap_or_default().to_string());
            assert!(
                html.contains(&format!("Anderson–Rubin {:.0}% set, {id}", 100.0 * 0.95)),
                "{id}"
            );
        }
        assert!(html.contains("Anderson–Rubin statistic against the hypothesised coefficient"));
        assert!(html.contains("the dashed critical value"));
    }
    shapes.sort();
    // One bounded set (grid-demand's LIML) and one whole line (the weak reminder call).
    assert_eq!(shapes, ["bounded", "whole-line"], "{shapes:?}");
}

//! What the tests of `read passes` share: the demo's numeric recipe, and
//! the comparison of a run in passes with the same recipe read whole.

use super::case::Case;

/// The demo's numeric recipe with its preparation `prepare`.
pub fn recipe_with(input: &str, read: &str, prepare: &str) -> String {
    format!(
        r#"recipe "passes" records "members"
seed 2026
input "{input}" key member_id{read}
features tenure_months, visits_per_month, basket_value,
         share_fresh, share_bulk, share_prepared,
         online_ratio, coupon_rate
{prepare}
tally spend_12m, contactable
kmeans k 2..6 restarts 10 sample 2000 by key
choose k by silhouette
save assignments "out/member_segments.csv"
save profiles "out/segment_profiles.csv"
save profiles "out/segment_profiles.json"
save centroids "out/segment_centroids.csv"
save model "out/segment_model.json"
save scoring "out/segment_scoring.sql"
save report "out/segment_report.html"
"#
    )
}

/// Lines of a file, sorted (assignments come in the input's order in
/// passes, in key order read whole with `by key`).
fn sorted_lines(text: &str) -> Vec<String> {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    lines.sort();
    lines
}

/// The columns of a profiles table every record decides: segment, label,
/// size, share and the means.
fn sizes_and_means(text: &str) -> Vec<Vec<String>> {
    let rows: Vec<Vec<String>> = text
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    let keep: Vec<usize> = (rows[0].iter().enumerate())
        .filter(|(_, h)| {
            ["segment", "label", "size", "share"].contains(&h.as_str()) || h.ends_with("_mean")
        })
        .map(|(i, _)| i)
        .collect();
    rows.iter()
        .map(|r| keep.iter().map(|&i| r[i].clone()).collect())
        .collect()
}

/// Runs `whole.assort` then `passes.assort` in `case` (with `env`) and
/// checks that they give the same segments: every record's segment, the
/// centres, each segment's size, share and means, the model's parameters
/// and centres to the last digit, and the `tally` columns' counts, means,
/// totals and shares. Returns the records segmented.
pub fn same_segments(case: &Case, env: &[(&str, &str)]) -> usize {
    case.assort(&["run", "whole.assort"], env).ok();
    let whole = |f: &str| case.read(&format!("out/{f}"));
    let (assigned, centres, profiles, model) = (
        whole("member_segments.csv"),
        whole("segment_centroids.csv"),
        whole("segment_profiles.csv"),
        whole("segment_model.json"),
    );
    let profiles_json = whole("segment_profiles.json");
    case.assort(&["run", "passes.assort"], env)
        .ok()
        .stdout_has("the records were read in passes");
    let passes = |f: &str| case.read(&format!("out/{f}"));
    same_lines(
        &sorted_lines(&passes("member_segments.csv")),
        &sorted_lines(&assigned),
        "the assignments",
    );
    same_lines(
        &passes("segment_centroids.csv")
            .lines()
            .map(str::to_string)
            .collect::<Vec<_>>(),
        &whole("segment_centroids.csv")
            .lines()
            .map(str::to_string)
            .collect::<Vec<_>>(),
        "the centres",
    );
    assert_eq!(passes("segment_centroids.csv"), centres);
    assert_eq!(
        sizes_and_means(&passes("segment_profiles.csv")),
        sizes_and_means(&profiles)
    );
    // The model less its drift reference (the sample's, in passes) and
    // the input's name and digest.
    let scoring_part = |m: &str| -> serde_json::Value {
        let mut v: serde_json::Value = serde_json::from_str(m).unwrap();
        let o = v.as_object_mut().unwrap();
        o.remove("drift");
        o["provenance"].as_object_mut().unwrap().remove("input");
        o["provenance"]
            .as_object_mut()
            .unwrap()
            .remove("input_sha256");
        v
    };
    assert_eq!(
        scoring_part(&passes("segment_model.json")),
        scoring_part(&model),
        "the parameters, centres and segments' means to the last digit"
    );
    // The tallies' counts, means, totals and shares over every record.
    let tallied = |json: &str| -> Vec<serde_json::Value> {
        let v: serde_json::Value = serde_json::from_str(json).unwrap();
        let mut out = Vec::new();
        for column in v["values"].as_array().unwrap() {
            let groups = std::iter::once(&column["overall"])
                .chain(column["segments"].as_array().unwrap().iter());
            for g in groups {
                let mut g = g.clone();
                let o = g.as_object_mut().unwrap();
                for sampled in ["median", "q1", "q3"] {
                    o.remove(sampled);
                }
                out.push(g);
            }
        }
        out
    };
    let (here, there) = (
        tallied(&passes("segment_profiles.json")),
        tallied(&profiles_json),
    );
    // Two columns, each over all records and at least two segments.
    assert!(here.len() >= 2 * 3, "{here:?}");
    assert_eq!(here, there);
    let kept = assigned.lines().count() - 1;
    assert_eq!(passes("member_segments.csv").lines().count() - 1, kept);
    kept
}

/// Two files' lines are the same; else the first that differ are shown.
#[track_caller]
fn same_lines(a: &[String], b: &[String], what: &str) {
    if let Some((x, y)) = a.iter().zip(b).find(|(x, y)| x != y) {
        panic!("{what} differ, in passes then read whole:\n{x}\n{y}");
    }
    assert_eq!(a.len(), b.len(), "{what}: lines");
}

//! Machine-readable output (`--json`): one JSON document per command on
//! standard output, documented in docs/json.md. Every document has a
//! `format` naming its kind and version, and `ok`.

use crate::check::diagnostic::Problem;
use crate::check::shown::clip_quotes;
use crate::run::comparison::Comparison;
use crate::run::Outcome;
use miette::Diagnostic;
use serde_json::{json, Value};

/// 1-based line and column (in characters) of a byte offset.
fn line_col(text: &str, offset: usize) -> Value {
    let offset = offset.min(text.len());
    let before = &text[..offset];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    json!({"line": line, "column": column})
}

/// A diagnostic as JSON: code, severity, message, help, the file and the
/// range of its first label.
pub fn diagnostic(p: &Problem, file: &str, text: &str) -> Value {
    let label = p.labels().and_then(|mut l| l.next());
    let range = label.map(|l| json!({"start": line_col(text, l.offset()), "end": line_col(text, l.offset() + l.len())}));
    json!({
        "code": p.code().map(|c| c.to_string()),
        "severity": if p.is_error() { "error" } else { "warning" },
        "message": clip_quotes(&p.to_string()),
        "help": p.help().map(|h| clip_quotes(&h.to_string())),
        "file": file,
        "range": range,
    })
}

pub fn diagnostics(problems: &[Problem], file: &str, text: &str) -> Value {
    Value::Array(problems.iter().map(|p| diagnostic(p, file, text)).collect())
}

/// A run-time error (no recipe span): code, message, help.
pub fn error(e: &dyn Diagnostic) -> Value {
    json!({
        "code": e.code().map(|c| c.to_string()),
        "severity": "error",
        "message": clip_quotes(&e.to_string()),
        "help": e.help().map(|h| clip_quotes(&h.to_string())),
    })
}

fn finite(v: f64) -> Value {
    if v.is_finite() {
        json!(v)
    } else {
        Value::Null
    }
}

/// What a run found, and the files it wrote.
pub fn run(o: &Outcome, written: &[String]) -> Value {
    let features: Vec<&str> = o
        .prepared
        .features
        .iter()
        .map(|f| f.column.as_str())
        .collect();
    json!({
        "chosen_k": o.chosen,
        "reason": o.reason,
        "disagreement": o.disagreement,
        "notes": o.notes,
        "advice": o.advice,
        "records": o.records,
        "segmented": o.prepared.kept.len(),
        "stages": o.stages,
        "record_weights": o.plan.record_weights,
        "weighted_members": o.overall.weighted,
        "sweep": o.sweep.iter().map(|r| json!({
            "k": r.k,
            "within_ss": finite(r.within_ss),
            "silhouette": finite(r.silhouette),
            "silhouette_se": r.silhouette_se,
            "calinski_harabasz": finite(r.calinski_harabasz),
            "davies_bouldin": finite(r.davies_bouldin),
            "gap": r.gap.map(|(g, _)| g),
            "gap_se": r.gap.map(|(_, s)| s),
            "stability": r.stability,
            "restarts_at_best": r.restarts.as_ref().map(|x| x.at_best),
            "restarts": r.restarts.as_ref().map(|x| x.of),
            "restarts_sample": r.restarts.as_ref().and_then(|x| x.sampled),
            "smallest": r.smallest,
            "smallest_weighted": r.smallest_weighted,
            "below_floor": r.below_floor,
        })).collect::<Vec<_>>(),
        "changes": super::changes::Changes::of(o),
        "features": features,
        "segments": o.profiles.iter().map(|p| json!({
            "segment": p.segment,
            "label": p.label,
            "size": p.size,
            "weighted_members": p.weighted,
            "share": p.share,
            "silhouette": p.silhouette,
            "stability": p.stability,
            "typical_member": p.medoid,
            "means": p.features.iter().map(|f| f.mean).collect::<Vec<_>>(),
            "medians": p.features.iter().map(|f| f.median).collect::<Vec<_>>(),
            "quartiles": p.features.iter().map(|f| [f.q1, f.q3]).collect::<Vec<_>>(),
            "std_diffs": p.features.iter().map(|f| f.std_diff).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
        "values": &o.values,
        "rules": &o.rules,
        "validation": o.validation.as_ref().map(|v| json!({"column": v.column, "adjusted_rand_index": v.adjusted_rand_index, "matched": v.matched})),
        "comparison": o.comparison.as_ref().map(comparison),
        "tree": o.tree.as_ref().map(|t| json!({"linkage": t.linkage.name(), "distance": t.distance.name(), "leaves": t.leaves, "cophenetic_correlation": finite(t.cophenetic), "cophenetic_over": t.cophenetic_leaves, "inversions": t.inversions})),
        "written": written,
    })
}

/// Two segmentations compared.
pub fn comparison(c: &Comparison) -> Value {
    json!({
        "old": c.old_name,
        "new": c.new_name,
        "in_both": c.both,
        "only_old": c.only_old,
        "only_new": c.only_new,
        "adjusted_rand_index": c.adjusted_rand_index,
        "key_note": c.key_note,
        "old_segments": c.migration.from,
        "new_segments": c.migration.to,
        "counts": c.migration.counts,
        "best_matches": c.best.iter().zip(&c.migration.from).map(|(&(j, jac), from)| json!({"old": from, "new": c.migration.to.get(j), "jaccard": jac})).collect::<Vec<_>>(),
    })
}

/// Prints a document on standard output.
pub fn print(doc: &Value) {
    println!("{}", serde_json::to_string_pretty(doc).unwrap_or_default());
}

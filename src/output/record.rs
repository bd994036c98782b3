//! The run record: what a run read, how, and what it wrote, with digests,
//! so a rerun can be verified bit for bit and a difference explained.
//!
//! Our own JSON format, versioned by its `format` field. It holds no
//! wall-clock time, so two identical runs write identical records.

use super::files::Rendered;
use crate::run::Outcome;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};

pub const RECORD_FORMAT: &str = "assort-run/1";

/// A file and the SHA-256 of its bytes.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct FileDigest {
    /// As the recipe names it (relative to the recipe's folder).
    pub path: String,
    pub sha256: String,
}

/// A data file the run read.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct InputDigest {
    /// `input` or `validate`.
    pub role: String,
    pub path: String,
    pub sha256: String,
    pub records: usize,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    pub format: String,
    pub assort_version: String,
    pub recipe: FileDigest,
    pub inputs: Vec<InputDigest>,
    pub seed: u64,
    pub generator: String,
    /// The fully resolved plan, every default written out, so a later
    /// version that changes a default cannot change a result unnoticed.
    pub plan: serde_json::Value,
    pub chosen_k: usize,
    /// With `previous`: how the segments were matched with last run's.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub matching: Option<serde_json::Value>,
    pub outputs: Vec<FileDigest>,
}

/// Lowercase hex SHA-256 of some bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    crate::text::hex(&Sha256::digest(bytes))
}

pub use crate::run::load::file_sha256;

/// Where a recipe's run record lives: beside its first output, or beside
/// the recipe when it saves nothing; named after the recipe file.
pub fn record_path(recipe: &Path, outputs: &[PathBuf]) -> PathBuf {
    let stem = recipe
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recipe".into());
    let dir = match outputs.first().and_then(|o| o.parent()) {
        Some(d) => d.to_path_buf(),
        None => recipe.parent().map(Path::to_path_buf).unwrap_or_default(),
    };
    dir.join(format!("{stem}.run.json"))
}

/// The data files a run read, with their digests and record counts.
pub fn input_digests(o: &Outcome) -> Vec<InputDigest> {
    let file = file_sha256(&o.plan.input.resolved);
    input_digests_with(o, file.or_else(|| o.read_digest.clone()))
}

/// [`input_digests`] with the input file's digest already computed (the
/// command line hashes it while the run computes).
pub fn input_digests_with(o: &Outcome, input_sha256: Option<String>) -> Vec<InputDigest> {
    let mut out = vec![InputDigest {
        role: "input".into(),
        path: match (o.plan.input.source(), &o.read_target) {
            (Some(source), Some(target)) => format!("{} ({target})", source.describe()),
            _ => o.plan.input.shown(),
        },
        sha256: input_sha256.unwrap_or_default(),
        records: o.records,
    }];
    if let (Some(c), Some(cmp)) = (&o.plan.compare, &o.comparison) {
        out.push(InputDigest {
            role: "compare".into(),
            path: c.path.clone(),
            sha256: file_sha256(&c.resolved).unwrap_or_default(),
            records: cmp.both + cmp.only_old,
        });
    }
    for d in o.then.iter().flat_map(|t| &t.digests) {
        out.push(InputDigest {
            role: d.role.into(),
            path: d.path.clone(),
            sha256: d.sha256.clone(),
            records: d.records,
        });
    }
    if let (Some(v), Some(val)) = (&o.plan.validate, &o.validation) {
        out.push(InputDigest {
            role: "validate".into(),
            path: v.path.clone(),
            sha256: file_sha256(&v.resolved).unwrap_or_default(),
            records: val.records,
        });
    }
    out
}

/// Builds the record of a run from what it read and the files it renders.
pub fn build(
    recipe_path: &str,
    recipe_text: &str,
    o: &Outcome,
    inputs: Vec<InputDigest>,
    files: &[Rendered],
) -> RunRecord {
    RunRecord {
        format: RECORD_FORMAT.into(),
        assort_version: env!("CARGO_PKG_VERSION").into(),
        recipe: FileDigest {
            path: recipe_path.into(),
            sha256: sha256_hex(recipe_text.as_bytes()),
        },
        inputs,
        seed: o.plan.seed,
        generator: crate::engine::rng::GENERATOR.into(),
        plan: serde_json::to_value(&o.plan).unwrap_or(serde_json::Value::Null),
        chosen_k: o.chosen,
        matching: o
            .matching
            .as_ref()
            .and_then(|m| serde_json::to_value(m).ok()),
        outputs: files
            .iter()
            .map(|f| FileDigest {
                path: f.shown.clone(),
                sha256: f
                    .staged
                    .as_ref()
                    .map_or_else(|| sha256_hex(&f.bytes), |s| s.sha256.clone()),
            })
            .collect(),
    }
}

/// The record as the bytes of its file.
pub fn to_bytes(record: &RunRecord) -> Vec<u8> {
    let mut bytes = serde_json::to_vec_pretty(record).unwrap_or_default();
    bytes.push(b'\n');
    bytes
}

/// One way in which a rerun differs from the record, in plain words.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Difference {
    RecipeChanged,
    VersionChanged { recorded: String, now: String },
    DataChanged { path: String, detail: String },
    ResultsDiffer { path: String },
    OutputEdited { path: String },
    OutputMissing { path: String },
    ChosenKChanged { recorded: usize, now: usize },
}

impl std::fmt::Display for Difference {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Difference::RecipeChanged => {
                write!(f, "recipe changed: its text is not the one recorded")
            }
            Difference::VersionChanged { recorded, now } => {
                write!(f, "assort version changed: recorded {recorded}, now {now}")
            }
            Difference::DataChanged { path, detail } => {
                write!(f, "data changed: `{path}` {detail}")
            }
            Difference::ResultsDiffer { path } => write!(
                f,
                "results differ: the rerun's `{path}` is not the recorded one"
            ),
            Difference::OutputEdited { path } => write!(
                f,
                "output edited: `{path}` on disk is not the file the run wrote"
            ),
            Difference::OutputMissing { path } => write!(
                f,
                "output missing: `{path}` is not on disk, though the run wrote it"
            ),
            Difference::ChosenKChanged { recorded, now } => write!(
                f,
                "results differ: the rerun chose k = {now}, the record k = {recorded}"
            ),
        }
    }
}

impl Difference {
    /// What to do about it, in plain words.
    pub fn advice(&self) -> String {
        match self {
            Difference::RecipeChanged => "the recipe was edited after the run: compare it with the version that ran (in version control), or run it again to record the new one".into(),
            Difference::VersionChanged { recorded, .. } => format!("verify with assort {recorded}, the version that ran, or run again to record this version's results"),
            Difference::DataChanged { path, .. } => format!("the run read another `{path}`: restore that file to verify; if it is next quarter's data and the recipe has `previous`, copy last run's model and assignments aside first and point `previous` at the copies (a rerun replaces them), change `period`, then run again and keep the new record"),
            Difference::ResultsDiffer { .. } | Difference::ChosenKChanged { .. } => "expected when the recipe, data or version changed (see above); if nothing else differs, keep both files and report it: reruns are meant to be identical".into(),
            Difference::OutputEdited { path } => format!("`{path}` was changed after the run: keep the edited copy under another name if it matters, then run again to write it afresh"),
            Difference::OutputMissing { path } => format!("`{path}` was deleted or moved after the run: run the recipe again to write it"),
        }
    }
}

/// Compares a recorded run with a rerun (`now`), and the recorded outputs
/// with the files on disk (`on_disk`: path as named, its current digest).
pub fn differences(
    recorded: &RunRecord,
    now: &RunRecord,
    on_disk: &[(String, Option<String>)],
) -> Vec<Difference> {
    let mut out = Vec::new();
    if recorded.assort_version != now.assort_version {
        out.push(Difference::VersionChanged {
            recorded: recorded.assort_version.clone(),
            now: now.assort_version.clone(),
        });
    }
    if recorded.recipe.sha256 != now.recipe.sha256 {
        out.push(Difference::RecipeChanged);
    }
    for old in &recorded.inputs {
        match now
            .inputs
            .iter()
            .find(|i| i.role == old.role && i.path == old.path)
        {
            Some(new) if new.sha256 == old.sha256 => {}
            Some(new) => out.push(Difference::DataChanged {
                path: old.path.clone(),
                detail: if new.records == old.records {
                    format!("has different bytes ({} records, as recorded)", new.records)
                } else {
                    format!("has {} records, the record {}", new.records, old.records)
                },
            }),
            None => out.push(Difference::DataChanged {
                path: old.path.clone(),
                detail: "is no longer read by the recipe".into(),
            }),
        }
    }
    if recorded.chosen_k != now.chosen_k {
        out.push(Difference::ChosenKChanged {
            recorded: recorded.chosen_k,
            now: now.chosen_k,
        });
    }
    for old in &recorded.outputs {
        let rerun_same = now
            .outputs
            .iter()
            .any(|o| o.path == old.path && o.sha256 == old.sha256);
        if !rerun_same {
            out.push(Difference::ResultsDiffer {
                path: old.path.clone(),
            });
        }
        let disk = on_disk
            .iter()
            .find(|(p, _)| *p == old.path)
            .and_then(|(_, d)| d.clone());
        match disk {
            None => out.push(Difference::OutputMissing {
                path: old.path.clone(),
            }),
            Some(d) if d != old.sha256 => out.push(Difference::OutputEdited {
                path: old.path.clone(),
            }),
            Some(_) => {}
        }
    }
    out
}

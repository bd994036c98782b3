//! What `read passes` takes: `kmeans ... sample N by key` over numeric
//! features. Everything else a recipe may ask for is refused at its
//! statement, with what to do instead, rather than run on the sample and
//! passed off as measured over every record.

use super::*;

impl Checker {
    /// Refuses, when the input says `read passes`, a method other than
    /// `kmeans ... sample N by key` and the statements reading in passes
    /// does not take yet.
    pub(super) fn passes_route(&mut self, stmts: &[Statement], method: Option<&MethodPlan>) {
        let Some(read) = self.read_passes else {
            return;
        };
        let method_words = match method {
            Some(MethodPlan::KMeans(km)) if km.by_key => None,
            Some(MethodPlan::KMeans(_)) => Some("`kmeans` without `sample N by key`"),
            Some(MethodPlan::Tree(_)) => Some("`tree`"),
            Some(MethodPlan::KMedoids(_)) => Some("`kmedoids`"),
            Some(MethodPlan::KPrototypes(_)) => Some("`kprototypes`"),
            None => None,
        };
        if let Some(m) = method_words {
            self.err(CheckError::NotWithMethod {
                what: "`read passes`".into(),
                method: m.into(),
                span: read,
                help: "reading in passes runs k-means's rounds over the input and its restarts on a sample drawn by key: write `kmeans k 2..8 sample 200000 by key`, or read the input whole".into(),
            });
        }
        for s in stmts {
            let refused = match &s.kind {
                StatementKind::Categories { .. } => Some("`categories` (text columns)"),
                StatementKind::Ordered { .. } => Some("`ordered` (a category with an order)"),
                StatementKind::Flags { .. } => Some("`flags` (columns of two values)"),
                StatementKind::Compare { .. } => Some("`compare`"),
                StatementKind::Validate { .. } => Some("`validate`"),
                StatementKind::Previous { .. } => Some("`previous`"),
                StatementKind::Save { what, .. } if what.node == "handoff" => {
                    Some("`save handoff`")
                }
                StatementKind::Transform {
                    action: TransformAction::Named(_),
                    ..
                } if self.database || self.cluster => {
                    let (method, help) = if self.database {
                        ("`read passes` on a database input", "read in passes, the database prepares every value for the rounds, and its `LN` and `SQRT` may differ from assort's in the last bit, which would change segments silently; compute the column in the recipe's query or a view (the database's own arithmetic then defines it), or read the table whole")
                    } else {
                        ("rounds on a cluster", "on a cluster, the executors prepare every value for the rounds, and their `LN` and `SQRT` may differ from assort's in the last bit, which would change segments silently; write the transformed column into the Parquet input, or run the rounds here (remove `cluster`)")
                    };
                    self.err(CheckError::NotWithMethod {
                        what: "a `transform` other than `clip`".into(),
                        method: method.into(),
                        span: s.span,
                        help: help.into(),
                    });
                    None
                }
                _ => None,
            };
            if let Some(what) = refused {
                self.err(CheckError::NotWithMethod {
                    what: what.into(),
                    method: "`read passes`".into(),
                    span: s.span,
                    help: "reading in passes takes numeric features and `tally` columns and writes the assignments, profiles, centres, model, SQL, rules and report, for now; read the input whole (`read whole`) for this".into(),
                });
            }
        }
    }
}

//! Readable rules for segments: a shallow classification tree (CART:
//! Breiman, Friedman, Olshen and Stone, *Classification and Regression
//! Trees*, 1984) fitted to tell one segment from the rest, with the
//! segment's best leaf read off as a rule of at most `depth` conditions.
//!
//! Splits minimise the weighted Gini impurity of the two sides; thresholds
//! sit midway between adjacent distinct values; ties go to the lower
//! feature and then the lower threshold, so the result is the same on
//! every machine. Of the leaves where the segment is the majority, the one
//! with the best F1 (the harmonic mean of coverage and precision) is the
//! rule; conditions on the same feature and side are merged to the
//! tightest.
//!
//! With record weights every count (a node's records, its segment's
//! records, the least a leaf holds) is a summed weight, so whole-number
//! weights give the tree of the repeated records.
//!
//! Cost: O(d n log n) to sort each feature once, then O(d n) per node, at
//! most 2^depth - 1 nodes.

use super::weights::Weights;
use ndarray::ArrayView2;
use rayon::prelude::*;

/// One condition: `x[feature] > threshold` when `above`, else `<=`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Condition {
    pub feature: usize,
    pub above: bool,
    pub threshold: f64,
}

impl Condition {
    pub fn holds(&self, v: f64) -> bool {
        if self.above {
            v > self.threshold
        } else {
            v <= self.threshold
        }
    }
}

/// Each feature's record order by value (then by record), with the values
/// in that order, computed once and shared by every segment's tree.
pub struct Sorted {
    order: Vec<Vec<u32>>,
    values: Vec<Vec<f64>>,
}

impl Sorted {
    pub fn new(x: ArrayView2<'_, f64>) -> Sorted {
        let n = x.nrows();
        let (order, values) = (0..x.ncols())
            .into_par_iter()
            .map(|f| {
                let column: Vec<f64> = x.column(f).to_vec();
                let mut o: Vec<u32> = (0..n as u32).collect();
                o.sort_by(|&a, &b| {
                    column[a as usize]
                        .total_cmp(&column[b as usize])
                        .then(a.cmp(&b))
                });
                let v = o.iter().map(|&i| column[i as usize]).collect();
                (o, v)
            })
            .unzip();
        Sorted { order, values }
    }
}

/// Per feature, records in its order and their values.
type Lists = (Vec<Vec<u32>>, Vec<Vec<f64>>);

/// An open node of a segment's tree: its conditions, its records in
/// record order, and per feature its records in that feature's order with
/// their values beside them (so the scans read memory in sequence).
struct Node {
    path: Vec<Condition>,
    members: Vec<u32>,
    order: Vec<Vec<u32>>,
    values: Vec<Vec<f64>>,
}

impl Node {
    /// The node's summed weight and that of its records in the segment,
    /// summed in record order.
    fn size_and_hits(&self, (target, w): (&[bool], Weights<'_>)) -> (f64, f64) {
        self.members.iter().fold((0.0, 0.0), |(s, h), &i| {
            let i = i as usize;
            (s + w.at(i), h + if target[i] { w.at(i) } else { 0.0 })
        })
    }

    /// The two children of a split at `x[feature] <= threshold`, each list
    /// kept in its order (a stable partition). `left` is scratch of one
    /// flag per record.
    fn split(self, feature: usize, threshold: f64, left: &mut [bool]) -> [Node; 2] {
        for (&i, &v) in self.order[feature].iter().zip(&self.values[feature]) {
            left[i as usize] = v <= threshold;
        }
        let goes_left = |i: u32| left[i as usize];
        let (lm, rm): (Vec<u32>, Vec<u32>) = self.members.iter().partition(|&&i| goes_left(i));
        let mut sides: [Lists; 2] = Default::default();
        for (o, vs) in self.order.iter().zip(&self.values) {
            let mut parts: [(Vec<u32>, Vec<f64>); 2] = [
                (Vec::with_capacity(lm.len()), Vec::with_capacity(lm.len())),
                (Vec::with_capacity(rm.len()), Vec::with_capacity(rm.len())),
            ];
            for (&i, &v) in o.iter().zip(vs) {
                let side = &mut parts[usize::from(!goes_left(i))];
                side.0.push(i);
                side.1.push(v);
            }
            for (side, (o, v)) in sides.iter_mut().zip(parts) {
                side.0.push(o);
                side.1.push(v);
            }
        }
        let [(lo, lv), (ro, rv)] = sides;
        let child = |above: bool, members, order, values| {
            let mut path = self.path.clone();
            path.push(Condition {
                feature,
                above,
                threshold,
            });
            Node {
                path,
                members,
                order,
                values,
            }
        };
        [child(false, lm, lo, lv), child(true, rm, ro, rv)]
    }
}

/// The rule that best tells the records with `target` set from the rest,
/// from a tree `depth` deep with leaves of at least `min_leaf` records
/// (summed weight, with record weights `w`); `None` when no leaf has the
/// segment as its majority. Each node keeps its records in every
/// feature's order (the presorted lists partitioned at each split), so a
/// level of the tree costs O(d n) whatever its number of nodes.
pub fn segment_rule(
    x: ArrayView2<'_, f64>,
    sorted: &Sorted,
    (target, w): (&[bool], Weights<'_>),
    depth: usize,
    min_leaf: f64,
) -> Option<Vec<Condition>> {
    let n = x.nrows();
    let total: f64 = (0..n).filter(|&i| target[i]).map(|i| w.at(i)).sum();
    let mut leaves: Vec<(Vec<Condition>, f64, f64)> = Vec::new();
    let mut open = vec![Node {
        path: Vec::new(),
        members: (0..n as u32).collect(),
        order: sorted.order.clone(),
        values: sorted.values.clone(),
    }];
    let mut left = vec![false; n];
    for level in 0..=depth {
        let mut children = Vec::new();
        for node in open {
            let (size, hits) = node.size_and_hits((target, w));
            let split = if level < depth && hits > 0.0 && hits < size {
                best_split(&node, (target, w), (size, hits), min_leaf)
            } else {
                None
            };
            match split {
                Some((feature, threshold)) => {
                    children.extend(node.split(feature, threshold, &mut left))
                }
                None => leaves.push((node.path, size, hits)),
            }
        }
        open = children;
        if open.is_empty() {
            break;
        }
    }
    let f1 = |size: f64, hits: f64| 2.0 * hits / (size + total);
    leaves
        .into_iter()
        .filter(|(_, size, hits)| 2.0 * hits > *size)
        .fold(None::<(Vec<Condition>, f64)>, |best, (path, size, hits)| {
            let score = f1(size, hits);
            match best {
                Some((_, b)) if b >= score => best,
                _ => Some((path, score)),
            }
        })
        .map(|(path, _)| merged(path))
}

/// The best split of `node`: (feature, threshold), or `None` when no split
/// leaves `min_leaf` records on both sides or lowers the impurity.
fn best_split(
    node: &Node,
    (target, w): (&[bool], Weights<'_>),
    (size, hits): (f64, f64),
    min_leaf: f64,
) -> Option<(usize, f64)> {
    let gini = |n: f64, h: f64| {
        if n <= 0.0 {
            return 0.0;
        }
        let p = h / n;
        n * 2.0 * p * (1.0 - p)
    };
    let mut best: Option<(f64, usize, f64)> = None;
    let parent = gini(size, hits);
    for (f, (order, values)) in node.order.iter().zip(&node.values).enumerate() {
        let (mut left, mut left_hits) = (0.0f64, 0.0f64);
        let mut prev: Option<f64> = None;
        for (&r, &v) in order.iter().zip(values) {
            let r = r as usize;
            if let Some(p) = prev {
                if v > p && left >= min_leaf && size - left >= min_leaf {
                    let cost = gini(left, left_hits) + gini(size - left, hits - left_hits);
                    if cost < parent - 1e-12 && best.is_none_or(|(b, _, _)| cost < b) {
                        best = Some((cost, f, p + (v - p) / 2.0));
                    }
                }
            }
            left += w.at(r);
            if target[r] {
                left_hits += w.at(r);
            }
            prev = Some(v);
        }
    }
    best.map(|(_, f, t)| (f, t))
}

/// Conditions on the same feature and side merged to the tightest, in the
/// order first met.
fn merged(path: Vec<Condition>) -> Vec<Condition> {
    let mut out: Vec<Condition> = Vec::new();
    for c in path {
        match out
            .iter_mut()
            .find(|o| o.feature == c.feature && o.above == c.above)
        {
            Some(o) if c.above => o.threshold = o.threshold.max(c.threshold),
            Some(o) => o.threshold = o.threshold.min(c.threshold),
            None => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn a_segment_set_apart_by_one_feature_gets_a_one_condition_rule() {
        // Records 4..8 are the segment: x0 above 5 tells them apart.
        let x = array![
            [1.0, 9.0],
            [2.0, 1.0],
            [3.0, 8.0],
            [4.0, 2.0],
            [6.0, 7.0],
            [7.0, 3.0],
            [8.0, 6.0],
            [9.0, 4.0]
        ];
        let target = [false, false, false, false, true, true, true, true];
        let rule = segment_rule(
            x.view(),
            &Sorted::new(x.view()),
            (&target, Weights::NONE),
            3,
            1.0,
        )
        .unwrap();
        assert_eq!(
            rule,
            [Condition {
                feature: 0,
                above: true,
                threshold: 5.0
            }]
        );
    }

    #[test]
    fn two_features_give_two_conditions_and_the_same_side_is_merged() {
        let c = |feature, above, threshold| Condition {
            feature,
            above,
            threshold,
        };
        assert_eq!(
            merged(vec![c(0, true, 1.0), c(1, false, 4.0), c(0, true, 2.5)]),
            [c(0, true, 2.5), c(1, false, 4.0)]
        );
        // The segment is the corner x0 > 5 and x1 > 5.
        let mut rows = Vec::new();
        let mut target = Vec::new();
        for a in 0..10 {
            for b in 0..10 {
                rows.extend([a as f64, b as f64]);
                target.push(a > 5 && b > 5);
            }
        }
        let x = ndarray::Array2::from_shape_vec((100, 2), rows).unwrap();
        let rule = segment_rule(
            x.view(),
            &Sorted::new(x.view()),
            (&target, Weights::NONE),
            3,
            2.0,
        )
        .unwrap();
        assert_eq!(rule, [c(0, true, 5.5), c(1, true, 5.5)]);
    }
}

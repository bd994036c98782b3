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

/// Each feature's record order by value (then by record), computed once
/// and shared by every segment's tree.
pub struct Sorted {
    order: Vec<Vec<u32>>,
}

impl Sorted {
    pub fn new(x: ArrayView2<'_, f64>) -> Sorted {
        let n = x.nrows();
        let order = (0..x.ncols())
            .map(|f| {
                let mut o: Vec<u32> = (0..n as u32).collect();
                o.sort_by(|&a, &b| {
                    x[[a as usize, f]]
                        .total_cmp(&x[[b as usize, f]])
                        .then(a.cmp(&b))
                });
                o
            })
            .collect();
        Sorted { order }
    }
}

/// The rule that best tells the records with `target` set from the rest,
/// from a tree `depth` deep with leaves of at least `min_leaf` records
/// (summed weight, with record weights `w`); `None` when no leaf has the
/// segment as its majority.
pub fn segment_rule(
    x: ArrayView2<'_, f64>,
    sorted: &Sorted,
    (target, w): (&[bool], Weights<'_>),
    depth: usize,
    min_leaf: f64,
) -> Option<Vec<Condition>> {
    let n = x.nrows();
    let total: f64 = (0..n).filter(|&i| target[i]).map(|i| w.at(i)).sum();
    // Node of each record; records of finished leaves are parked.
    let mut node = vec![0u32; n];
    let mut leaves: Vec<(Vec<Condition>, f64, f64)> = Vec::new();
    let mut open: Vec<(u32, Vec<Condition>)> = vec![(0, Vec::new())];
    let mut next_id = 1u32;
    for level in 0..=depth {
        let mut children = Vec::new();
        for (id, path) in open {
            let (size, hits) = (0..n)
                .filter(|&i| node[i] == id)
                .fold((0.0, 0.0), |(s, h), i| {
                    (s + w.at(i), h + if target[i] { w.at(i) } else { 0.0 })
                });
            let split = if level < depth && hits > 0.0 && hits < size {
                best_split(x, sorted, (target, w), &node, id, min_leaf)
            } else {
                None
            };
            match split {
                Some((feature, threshold)) => {
                    let (left, right) = (next_id, next_id + 1);
                    next_id += 2;
                    for i in 0..n {
                        if node[i] == id {
                            node[i] = if x[[i, feature]] <= threshold {
                                left
                            } else {
                                right
                            };
                        }
                    }
                    for (child, above) in [(left, false), (right, true)] {
                        let mut p = path.clone();
                        p.push(Condition {
                            feature,
                            above,
                            threshold,
                        });
                        children.push((child, p));
                    }
                }
                None => leaves.push((path, size, hits)),
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

/// The best split of node `id`: (feature, threshold), or `None` when no
/// split leaves `min_leaf` records on both sides or lowers the impurity.
fn best_split(
    x: ArrayView2<'_, f64>,
    sorted: &Sorted,
    (target, w): (&[bool], Weights<'_>),
    node: &[u32],
    id: u32,
    min_leaf: f64,
) -> Option<(usize, f64)> {
    let members: Vec<usize> = (0..node.len()).filter(|&i| node[i] == id).collect();
    let size: f64 = members.iter().map(|&i| w.at(i)).sum();
    let hits: f64 = (members.iter())
        .filter(|&&i| target[i])
        .map(|&i| w.at(i))
        .sum();
    let gini = |n: f64, h: f64| {
        if n <= 0.0 {
            return 0.0;
        }
        let p = h / n;
        n * 2.0 * p * (1.0 - p)
    };
    let mut best: Option<(f64, usize, f64)> = None;
    let parent = gini(size, hits);
    for (f, order) in sorted.order.iter().enumerate() {
        let (mut left, mut left_hits) = (0.0f64, 0.0f64);
        let mut prev: Option<f64> = None;
        for &r in order {
            let r = r as usize;
            if node[r] != id {
                continue;
            }
            let v = x[[r, f]];
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

//! Gower's dissimilarity against implementations that are not ours, on
//! outside data: the iris measurements (tests/data/iris.csv, see
//! tests/data/ATTRIBUTION.md) with the species as a category and the petal
//! length cut into an ordered band. The expected values come from
//! tests/reference/gower_fixture.py (pinned in gower-requirements.txt):
//! the `gower` 0.1.2 package for the table without gaps, Gower's formula
//! written out in numpy for the table with gaps.

mod common;

use assort::engine::gower::{ordered_score, Column, Gower, Mixed, GAP};
use common::measurements;

struct Reference {
    weights: Vec<f64>,
    pairs: Vec<(usize, usize)>,
    full: Vec<f64>,
    gaps: Vec<f64>,
}

fn reference() -> Reference {
    let text = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/gower_reference.json"),
    )
    .unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let floats = |name: &str| -> Vec<f64> {
        v[name]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    Reference {
        weights: floats("weights"),
        pairs: v["pairs"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| {
                (
                    p[0].as_u64().unwrap() as usize,
                    p[1].as_u64().unwrap() as usize,
                )
            })
            .collect(),
        full: floats("full"),
        gaps: floats("gaps"),
    }
}

/// The fixture's table, derived by the same rules: sepal length and width,
/// the species (codes 0, 1, 2 in file order: setosa, versicolor,
/// virginica), and the petal band scored (r - 1)/(M - 1). With `gaps`,
/// sepal width is missing on every 7th record, the species on every 11th
/// and the band on every 13th.
fn iris_table(gaps: bool) -> Mixed {
    let m = measurements("iris.csv");
    let n = m.nrows();
    let gap = |i: usize, every: usize| gaps && i.is_multiple_of(every);
    let species = (0..n)
        .map(|i| if gap(i, 11) { GAP } else { (i / 50) as u32 })
        .collect();
    let band = (0..n)
        .map(|i| {
            let petal = m[[i, 2]];
            let rank = if petal < 2.5 {
                1
            } else if petal < 5.0 {
                2
            } else {
                3
            };
            if gap(i, 13) {
                f64::NAN
            } else {
                ordered_score(rank, 3)
            }
        })
        .collect();
    Mixed::new(vec![
        Column::Interval((0..n).map(|i| m[[i, 0]]).collect()),
        Column::Interval(
            (0..n)
                .map(|i| if gap(i, 7) { f64::NAN } else { m[[i, 1]] })
                .collect(),
        ),
        Column::Nominal(species),
        Column::Interval(band),
    ])
    .unwrap()
}

#[test]
fn gower_matches_the_gower_package_on_iris_with_an_ordered_band() {
    let r = reference();
    let t = iris_table(false);
    let g = Gower::fit(&t, &r.weights);
    let (m, apart) = g.matrix(&t);
    assert_eq!(apart, 0);
    let mut worst = 0.0f64;
    for (&(i, j), &want) in r.pairs.iter().zip(&r.full) {
        worst = worst.max((m.get(i, j) - want).abs());
    }
    // The package computes in float32.
    assert!(
        worst < 1e-6,
        "largest difference {worst:e} over {} pairs",
        r.pairs.len()
    );
}

#[test]
fn gower_with_gaps_compares_only_the_columns_a_pair_shares() {
    let r = reference();
    let t = iris_table(true);
    let g = Gower::fit(&t, &r.weights);
    let (m, _) = g.matrix(&t);
    let mut worst = 0.0f64;
    for (&(i, j), &want) in r.pairs.iter().zip(&r.gaps) {
        worst = worst.max((m.get(i, j) - want).abs());
        assert_eq!(m.get(i, j), g.between(&t, i, &t, j));
    }
    assert!(
        worst < 1e-12,
        "largest difference {worst:e} over {} pairs",
        r.pairs.len()
    );
    // The gaps changed the answer: the check is not the no-gap one again.
    let differs = r
        .full
        .iter()
        .zip(&r.gaps)
        .filter(|(a, b)| (*a - *b).abs() > 1e-6)
        .count();
    assert!(differs > 50, "only {differs} pairs differ with gaps");
}

//! No input makes assort panic, and the engine keeps its promises on
//! generated data.

use assort::check::{check, RecipeSource};
use assort::engine::{criteria, dist2, kmeans, rng::Stream};
use ndarray::Array2;
use std::path::{Path, PathBuf};

fn demo_recipe() -> RecipeSource {
    RecipeSource::read(&Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes/coop-members.assort"))
        .unwrap()
}

fn with_text(base: &RecipeSource, text: String) -> RecipeSource {
    RecipeSource {
        path: base.path.clone(),
        text,
    }
}

#[test]
fn every_truncation_of_the_demo_recipe_is_checked_without_panic() {
    let base = demo_recipe();
    let mut cut_points: Vec<usize> = (0..=base.text.len())
        .filter(|&i| base.text.is_char_boundary(i))
        .collect();
    cut_points.dedup();
    for i in cut_points {
        let checked = check(&with_text(&base, base.text[..i].to_string()));
        // A plan comes only without errors.
        assert_eq!(checked.plan.is_some(), !checked.has_errors(), "cut at {i}");
    }
}

#[test]
fn mangled_recipes_are_checked_without_panic() {
    let base = demo_recipe();
    let alphabet: Vec<char> = "abk_0129.,\"# \n\t-+e..é\u{feff}".chars().collect();
    let mut s = Stream::new(99, 0);
    let tree_text = base.text.replace(
        "kmeans k 2..8 restarts 50",
        "tree linkage ward k 2..8 micro 300 distance euclidean",
    );
    assert_ne!(
        tree_text, base.text,
        "the demo recipe changed; update this test"
    );
    for round in 0..600 {
        let height_text = base.text.replace(
            "kmeans k 2..8 restarts 50",
            "tree linkage average height 2.5",
        );
        let source = match round % 3 {
            0 => &base.text,
            1 => &tree_text,
            _ => &height_text,
        };
        let mut chars: Vec<char> = source.chars().collect();
        for _ in 0..1 + s.below(6) {
            let at = s.below(chars.len() + 1);
            match s.below(3) {
                0 if at < chars.len() => {
                    chars.remove(at);
                }
                1 => chars.insert(at, alphabet[s.below(alphabet.len())]),
                _ => {
                    // Swap two lines' worth of text around.
                    let b = s.below(chars.len() + 1);
                    let (lo, hi) = (at.min(b), at.max(b));
                    chars[lo..hi].reverse();
                }
            }
        }
        let text: String = chars.into_iter().collect();
        let checked = check(&with_text(&base, text.clone()));
        assert_eq!(
            checked.plan.is_some(),
            !checked.has_errors(),
            "round {round}:\n{text}"
        );
    }
}

#[test]
fn arbitrary_bytes_as_a_recipe_do_not_panic() {
    let base = demo_recipe();
    let mut s = Stream::new(5, 1);
    for _ in 0..300 {
        let len = s.below(200);
        let text: String = (0..len)
            .map(|_| char::from_u32(s.below(0x250) as u32).unwrap_or('?'))
            .collect();
        let checked = check(&with_text(&base, text));
        assert_eq!(checked.plan.is_some(), !checked.has_errors());
    }
}

// ------------------------------------------------------------- engine --

/// Generated data: n records, d features, drawn around `groups` centres.
/// Values are continuous draws, so records are distinct (a precondition of
/// the "every segment non-empty" promise).
fn generated(seed: u64, n: usize, d: usize, groups: usize) -> Array2<f64> {
    let mut s = Stream::new(seed, 0);
    let centres: Vec<Vec<f64>> = (0..groups)
        .map(|_| (0..d).map(|_| s.unit() * 10.0).collect())
        .collect();
    let mut x = Array2::zeros((n, d));
    for i in 0..n {
        let c = &centres[s.below(groups)];
        for f in 0..d {
            x[[i, f]] = c[f] + s.unit();
        }
    }
    x
}

fn settings(k: usize, seeding: kmeans::Seeding) -> kmeans::KMeansSettings {
    kmeans::KMeansSettings {
        k,
        restarts: 4,
        max_rounds: 500,
        tolerance: 0.0,
        seeding,
        seed: 3,
        sample: None,
        start: None,
    }
}

#[test]
fn kmeans_keeps_its_promises_on_generated_data() {
    for case in 0..60u64 {
        let mut s = Stream::new(1000 + case, 0);
        let n = 2 + s.below(120);
        let d = 1 + s.below(5);
        let k = 1 + s.below(n.min(8));
        let seeding = if case % 2 == 0 {
            kmeans::Seeding::KMeansPlusPlus
        } else {
            kmeans::Seeding::RandomPartition
        };
        let x = generated(case, n, d, 1 + s.below(5));
        let fit = kmeans::kmeans(x.view(), &settings(k, seeding)).unwrap();

        // Every segment is used, and numbered by decreasing size.
        let mut sizes = vec![0usize; k];
        fit.labels.iter().for_each(|&l| sizes[l as usize] += 1);
        assert!(
            sizes.iter().all(|&m| m > 0),
            "case {case}: empty segment {sizes:?}"
        );
        assert!(
            sizes.windows(2).all(|w| w[0] >= w[1]),
            "case {case}: not by size {sizes:?}"
        );

        // Every record sits with its nearest centre (ties to the lower).
        for (i, row) in x.outer_iter().enumerate() {
            let row = row.to_vec();
            let own = dist2(&row, &fit.centroids.row(fit.labels[i] as usize).to_vec());
            for j in 0..k {
                let other = dist2(&row, &fit.centroids.row(j).to_vec());
                assert!(own <= other, "case {case}: record {i} is nearer centre {j}");
            }
        }

        // Converged: the centres are the means, so the reported within-SS
        // equals the within-SS about the means.
        if fit.converged {
            let about_means = criteria::within_ss(x.view(), &fit.labels, k);
            assert!(
                (fit.inertia - about_means).abs() <= 1e-9 * (1.0 + about_means),
                "case {case}: {} vs {about_means}",
                fit.inertia
            );
        }
        assert!(fit.restarts_at_best >= 1 && fit.restarts_at_best <= fit.restarts);
    }
}

#[test]
fn kmeans_and_silhouette_do_not_depend_on_the_thread_count() {
    // Big enough for the parallel assignment step to split the work.
    let x = generated(7, 40_000, 4, 6);
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let fit =
                kmeans::kmeans(x.view(), &settings(6, kmeans::Seeding::KMeansPlusPlus)).unwrap();
            let sil = criteria::silhouette(x.view(), &fit.labels, 6, 3, 1);
            (
                fit.labels,
                fit.inertia.to_bits(),
                sil.mean.to_bits(),
                fit.centroids,
            )
        })
    };
    let one = run(1);
    for threads in [2, 3, 8] {
        assert!(run(threads) == one, "{threads} threads changed the result");
    }
}

// -------------------------------------------------------------- tidy --

fn rust_files(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(rust_files(&p));
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
    out
}

#[test]
fn the_engine_knows_nothing_of_the_language() {
    let engine = Path::new(env!("CARGO_MANIFEST_DIR")).join("src/engine");
    for f in rust_files(&engine) {
        let text = std::fs::read_to_string(&f).unwrap();
        for (n, line) in text.lines().enumerate() {
            for stage in ["syntax", "check", "plan", "run", "output"] {
                assert!(
                    !line.contains(&format!("crate::{stage}")),
                    "{}:{}: the engine reaches into `{stage}`",
                    f.display(),
                    n + 1
                );
            }
            assert!(
                !line.contains("std::fs") && !line.contains("std::io"),
                "{}:{}: the engine does no I/O",
                f.display(),
                n + 1
            );
        }
    }
}

#[test]
fn every_module_says_what_it_owns() {
    for f in rust_files(&Path::new(env!("CARGO_MANIFEST_DIR")).join("src")) {
        let text = std::fs::read_to_string(&f).unwrap();
        assert!(
            text.starts_with("//!"),
            "{} has no `//!` header",
            f.display()
        );
        for banned in ["dbg!(", "todo!(", "unimplemented!("] {
            assert!(!text.contains(banned), "{} contains {banned}", f.display());
        }
    }
}

#[test]
fn mangled_data_files_are_checked_and_run_without_panic() {
    let dir = tempfile::tempdir().unwrap();
    let recipe_path = dir.path().join("r.assort");
    std::fs::write(
        &recipe_path,
        "input \"d.csv\" key id\nfeatures a, b\ncategories c\nmissing fill median\ntransform a log1p\ntransform b clip 0.1..0.9\nkmeans k 2..3 restarts 2\n",
    )
    .unwrap();
    let clean =
        "id,a,b,c\n1,1.0,2.0,x\n2,1.5,2.5,y\n3,2.0,,x\n4,9.0,9.0,z\n5,8.5,9.5,y\n6,8.0,9.1,x\n";
    let alphabet: Vec<char> = "0123456789.,-\n\"ainf e".chars().collect();
    let mut s = Stream::new(11, 0);
    for _ in 0..400 {
        let mut chars: Vec<char> = clean.chars().collect();
        for _ in 0..1 + s.below(4) {
            let at = s.below(chars.len() + 1);
            if s.below(2) == 0 && at < chars.len() {
                chars.remove(at);
            } else {
                chars.insert(at, alphabet[s.below(alphabet.len())]);
            }
        }
        std::fs::write(dir.path().join("d.csv"), chars.iter().collect::<String>()).unwrap();
        let checked = check(&RecipeSource::read(&recipe_path).unwrap());
        if let Some(plan) = checked.plan {
            // Either a result or a located error; never a panic.
            let _ = assort::run::run(&plan);
        }
    }
}

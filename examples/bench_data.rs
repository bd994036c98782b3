//! Writes a seeded data set for the side-by-side benchmark
//! (`benches/side_by_side/run.py`): `cargo run --release --example
//! bench_data -- OUT.csv RECORDS FEATURES [SEED] [CATEGORIES]`.
//!
//! Records come from ten Gaussian groups of unequal sizes whose centres are
//! drawn in a box of side 8 (unit spread within a group), so the sweep has
//! structure to find but the groups overlap somewhat, as customer data do.
//! Columns: `id` (a text key `C0000001`...), then `f1`..`fD` with three
//! decimals, then, with CATEGORIES, text columns `c1`..`cC` with 30, 8, 5
//! and 3 levels (repeating), each the group's own level in 70 % of records
//! and a uniformly drawn one otherwise. The same arguments always write
//! the same bytes.

use assort::engine::rng::Stream;
use std::io::Write;

const GROUPS: usize = 10;

fn normal(s: &mut Stream) -> f64 {
    // Box-Muller from two uniform draws in (0, 1].
    let u = 1.0 - s.unit();
    let v = s.unit();
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

fn main() -> std::io::Result<()> {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 4 {
        eprintln!("usage: bench_data OUT.csv RECORDS FEATURES [SEED]");
        std::process::exit(2);
    }
    let n: usize = args[2].parse().expect("RECORDS is a whole number");
    let d: usize = args[3].parse().expect("FEATURES is a whole number");
    let seed: u64 = args.get(4).and_then(|s| s.parse().ok()).unwrap_or(7);
    let cats: usize = args.get(5).and_then(|s| s.parse().ok()).unwrap_or(0);
    let levels = |j: usize| [30, 8, 5, 3][j % 4];
    let mut s = Stream::new(seed, 0);
    let centres: Vec<Vec<f64>> = (0..GROUPS)
        .map(|_| (0..d).map(|_| 8.0 * s.unit()).collect())
        .collect();
    // Unequal group sizes: weights 1..=GROUPS.
    let total: usize = (1..=GROUPS).sum();
    let file = std::fs::File::create(&args[1])?;
    let mut w = std::io::BufWriter::with_capacity(1 << 20, file);
    write!(w, "id")?;
    for f in 1..=d {
        write!(w, ",f{f}")?;
    }
    for j in 1..=cats {
        write!(w, ",c{j}")?;
    }
    writeln!(w)?;
    let mut line = String::new();
    for i in 0..n {
        let pick = s.below(total);
        let (mut g, mut acc) = (0, 0);
        while acc + g < pick {
            acc += g + 1;
            g += 1;
        }
        line.clear();
        use std::fmt::Write as _;
        let _ = write!(line, "C{:08}", i + 1);
        for c in &centres[g.min(GROUPS - 1)] {
            let _ = write!(line, ",{:.3}", c + normal(&mut s));
        }
        for j in 0..cats {
            let l = levels(j);
            let level = if s.unit() < 0.7 {
                (g * (j + 3)) % l
            } else {
                s.below(l)
            };
            let _ = write!(line, ",L{level}");
        }
        line.push('\n');
        w.write_all(line.as_bytes())?;
    }
    w.flush()
}

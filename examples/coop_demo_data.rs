//! Generates the demo data: the members of a fictional food co-op.
//!
//! Everything here is invented. Five behavioural segments are planted (how
//! often members shop, how much, what, online or not, with coupons or not);
//! there are no demographic attributes. The basket value is skewed (log-
//! normal), a few percent of values are missing and a handful of members are
//! outliers (event catering orders, a member who drops in daily). The
//! planted segment of each member goes to a separate file, so the demo can
//! report how well a recipe recovers it.
//!
//! Two value columns that are not behaviour to cluster on follow: a
//! member's spend over the last twelve months (visits x basket x 12, with
//! some noise) and whether the member agreed to be contacted (0 or 1, more
//! often for members who shop online). They come from a second random
//! stream, so the behavioural columns stay what they were before these
//! were added.
//!
//! Run: `cargo run --example coop_demo_data` (writes `recipes/data/`). The
//! generator is seeded, so the files are the same on every machine.

use assort::engine::rng::Stream;
use std::fmt::Write as _;

const MEMBERS: usize = 6000;
const SEED: u64 = 20260401;
const BRANCHES: [&str; 4] = ["Riverside", "Old Mill", "Hilltop", "Harbour"];

/// Share of each planted segment's members who agreed to be contacted.
const CONTACTABLE: [f64; 5] = [0.62, 0.55, 0.88, 0.74, 0.35];

/// A planted segment: its share of members and the centre and spread of
/// each behaviour.
struct Planted {
    name: &'static str,
    share: f64,
    tenure: (f64, f64),
    visits: (f64, f64),
    /// Median basket value and the log-scale spread.
    basket: (f64, f64),
    fresh: (f64, f64),
    bulk: (f64, f64),
    prepared: (f64, f64),
    online: (f64, f64),
    coupon: (f64, f64),
    /// Relative weight of each branch.
    branches: [f64; 4],
}

const PLANTED: [Planted; 5] = [
    Planted {
        name: "fresh-regulars",
        share: 0.30,
        tenure: (50.0, 20.0),
        visits: (9.0, 2.0),
        basket: (28.0, 0.30),
        fresh: (0.58, 0.07),
        bulk: (0.08, 0.04),
        prepared: (0.10, 0.05),
        online: (0.05, 0.04),
        coupon: (0.05, 0.04),
        branches: [0.35, 0.20, 0.25, 0.20],
    },
    Planted {
        name: "bulk-planners",
        share: 0.20,
        tenure: (62.0, 24.0),
        visits: (2.2, 0.7),
        basket: (140.0, 0.30),
        fresh: (0.22, 0.07),
        bulk: (0.50, 0.08),
        prepared: (0.06, 0.04),
        online: (0.15, 0.08),
        coupon: (0.10, 0.06),
        branches: [0.15, 0.45, 0.20, 0.20],
    },
    Planted {
        name: "online-convenience",
        share: 0.18,
        tenure: (20.0, 10.0),
        visits: (4.0, 1.3),
        basket: (55.0, 0.30),
        fresh: (0.15, 0.06),
        bulk: (0.08, 0.05),
        prepared: (0.48, 0.08),
        online: (0.72, 0.12),
        coupon: (0.08, 0.05),
        branches: [0.25, 0.20, 0.20, 0.35],
    },
    Planted {
        name: "deal-hunters",
        share: 0.17,
        tenure: (30.0, 14.0),
        visits: (5.0, 1.4),
        basket: (35.0, 0.30),
        fresh: (0.28, 0.07),
        bulk: (0.25, 0.07),
        prepared: (0.18, 0.06),
        online: (0.20, 0.10),
        coupon: (0.48, 0.10),
        branches: [0.25, 0.25, 0.30, 0.20],
    },
    Planted {
        name: "occasional-newcomers",
        share: 0.15,
        tenure: (4.0, 3.0),
        visits: (1.1, 0.5),
        basket: (20.0, 0.35),
        fresh: (0.32, 0.08),
        bulk: (0.10, 0.05),
        prepared: (0.28, 0.08),
        online: (0.30, 0.15),
        coupon: (0.15, 0.08),
        branches: [0.25, 0.25, 0.25, 0.25],
    },
];

/// Standard normal draw (Box-Muller; the second value is discarded).
fn normal(s: &mut Stream) -> f64 {
    let u1 = 1.0 - s.unit(); // in (0, 1], so the logarithm is finite
    let u2 = s.unit();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

fn around(s: &mut Stream, (centre, spread): (f64, f64)) -> f64 {
    centre + spread * normal(s)
}

fn pick(s: &mut Stream, weights: &[f64]) -> usize {
    let total: f64 = weights.iter().sum();
    let mut r = s.unit() * total;
    for (i, w) in weights.iter().enumerate() {
        if r < *w {
            return i;
        }
        r -= w;
    }
    weights.len() - 1
}

fn main() -> std::io::Result<()> {
    let mut s = Stream::new(SEED, 0);
    let mut v = Stream::new(SEED, 1);
    let shares: Vec<f64> = PLANTED.iter().map(|p| p.share).collect();
    let mut members = String::from(
        "member_id,home_branch,tenure_months,visits_per_month,basket_value,share_fresh,share_bulk,share_prepared,online_ratio,coupon_rate,spend_12m,contactable\n",
    );
    let mut planted = String::from("member_id,planted_segment\n");
    for i in 0..MEMBERS {
        let seg = pick(&mut s, &shares);
        let p = &PLANTED[seg];
        let id = format!("M{:05}", 10001 + i);
        let branch = BRANCHES[pick(&mut s, &p.branches)];
        let tenure = around(&mut s, p.tenure).max(0.0).round();
        let mut visits = around(&mut s, p.visits).max(0.2);
        let mut basket = p.basket.0 * (p.basket.1 * normal(&mut s)).exp();
        let mut fresh = around(&mut s, p.fresh).clamp(0.0, 1.0);
        let mut bulk = around(&mut s, p.bulk).clamp(0.0, 1.0);
        let mut prepared = around(&mut s, p.prepared).clamp(0.0, 1.0);
        let total = fresh + bulk + prepared;
        if total > 0.95 {
            fresh *= 0.95 / total;
            bulk *= 0.95 / total;
            prepared *= 0.95 / total;
        }
        let online = around(&mut s, p.online).clamp(0.0, 1.0);
        let coupon = around(&mut s, p.coupon).clamp(0.0, 1.0);
        // A handful of outliers: catering orders and daily drop-ins.
        let roll = s.unit();
        if roll < 0.0015 {
            basket *= 25.0 + 30.0 * s.unit();
        } else if roll < 0.0025 {
            visits = 28.0 + 6.0 * s.unit();
        }
        // A few percent missing: online ratio (members who never logged
        // in), basket value and coupon rate (till outages).
        let blank_or =
            |s: &mut Stream, p: f64, text: String| if s.unit() < p { String::new() } else { text };
        let online_txt = blank_or(&mut s, 0.03, format!("{online:.3}"));
        let basket_txt = blank_or(&mut s, 0.015, format!("{basket:.2}"));
        let coupon_txt = blank_or(&mut s, 0.02, format!("{coupon:.3}"));
        let spend = visits * basket * 12.0 * (0.15 * normal(&mut v)).exp();
        let spend_txt = blank_or(&mut v, 0.005, format!("{spend:.2}"));
        let contactable = u8::from(v.unit() < CONTACTABLE[seg]);
        let _ = writeln!(
            members,
            "{id},{branch},{tenure},{visits:.2},{basket_txt},{fresh:.3},{bulk:.3},{prepared:.3},{online_txt},{coupon_txt},{spend_txt},{contactable}"
        );
        let _ = writeln!(planted, "{id},{}", p.name);
    }
    std::fs::create_dir_all("recipes/data")?;
    std::fs::write("recipes/data/coop_members.csv", members)?;
    std::fs::write("recipes/data/coop_members_planted.csv", planted)?;
    println!("wrote recipes/data/coop_members.csv and recipes/data/coop_members_planted.csv ({MEMBERS} members)");
    Ok(())
}

//! The demo members (invented) with an ordered band and a flag added, and
//! the same two written as plain numbers, for the tests of column kinds.

use super::case::Case;

/// The loyalty tiers, lowest first.
pub const TIERS: [&str; 3] = ["seedling", "sprout", "harvest"];

/// Writes `data/kinds.csv` into `case` (a demo case): the demo's columns,
/// then `loyalty_tier` (under 12 months a seedling, under 48 a sprout,
/// else harvest), `tier_rank` (its rank, 1 to 3), `newsletter` (`Yes` for
/// members who agreed to be contacted, else `no`: two spellings of case)
/// and `newsletter_code` (1 or 0). Returns the text written.
pub fn write_kinds(case: &Case) -> String {
    let demo = case.read("data/coop_members.csv");
    let mut lines = demo.lines();
    let header = lines.next().unwrap();
    let names: Vec<&str> = header.split(',').collect();
    let at = |n: &str| names.iter().position(|h| *h == n).unwrap();
    let (tenure, contactable) = (at("tenure_months"), at("contactable"));
    let mut out = format!("{header},loyalty_tier,tier_rank,newsletter,newsletter_code\n");
    for line in lines {
        let f: Vec<&str> = line.split(',').collect();
        let months: f64 = f[tenure].parse().unwrap();
        let rank = if months < 12.0 {
            1
        } else if months < 48.0 {
            2
        } else {
            3
        };
        let set = f[contactable] == "1";
        out.push_str(&format!(
            "{line},{},{rank},{},{}\n",
            TIERS[rank - 1],
            if set { "Yes" } else { "no" },
            u8::from(set)
        ));
    }
    case.write("data/kinds.csv", &out);
    out
}

//! The report's segment cards, recomputed from the data: for each segment,
//! the `tally` money column's mean per member and share of the total, and
//! the contact flag's rate and count, against all members. Recomputed here
//! from the demo's CSV and the run's assignments, formatted as the cards
//! format them (money with a thousands separator and two decimals, rates
//! with one decimal and a space before `%`).

mod common;

use common::case::Case;
use std::collections::HashMap;

fn money(v: f64) -> String {
    let text = format!("{v:.2}");
    let (whole, cents) = text.split_once('.').unwrap();
    let mut grouped = String::new();
    for (i, c) in whole.chars().enumerate() {
        if i > 0 && (whole.len() - i) % 3 == 0 {
            grouped.push(',');
        }
        grouped.push(c);
    }
    format!("€{grouped}.{cents}")
}

fn rate(v: f64) -> String {
    format!("{:.1} %", 100.0 * v)
}

fn thousands(n: usize) -> String {
    money(n as f64)
        .trim_start_matches('€')
        .trim_end_matches(".00")
        .to_string()
}

#[test]
fn card_figures_are_the_data_recomputed() {
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    let segment_of = case.segments_by_key("out/member_segments.csv");
    let data = case.read("data/coop_members.csv");
    let mut lines = data.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = |n: &str| header.iter().position(|h| *h == n).unwrap();
    let (spend_at, contact_at) = (at("spend_12m"), at("contactable"));
    // Per segment and over all: members with a spend value, its total,
    // members with a contact flag, those flagged 1. A blank counts in none.
    #[derive(Default)]
    struct Sums {
        spend_known: usize,
        spend: f64,
        flag_known: usize,
        flagged: usize,
    }
    let add = |s: &mut Sums, spend: Option<f64>, flag: Option<usize>| {
        if let Some(v) = spend {
            s.spend_known += 1;
            s.spend += v;
        }
        if let Some(f) = flag {
            s.flag_known += 1;
            s.flagged += f;
        }
    };
    let mut per: HashMap<String, Sums> = HashMap::new();
    let mut all = Sums::default();
    for l in lines {
        let c: Vec<&str> = l.split(',').collect();
        let spend: Option<f64> = c[spend_at].parse().ok();
        let flag: Option<usize> = c[contact_at].parse().ok();
        add(
            per.entry(segment_of[c[0]].clone()).or_default(),
            spend,
            flag,
        );
        add(&mut all, spend, flag);
    }
    let report = case.read("out/segment_report.html");
    let all_mean = money(all.spend / all.spend_known as f64);
    let all_rate = rate(all.flagged as f64 / all.flag_known as f64);
    for (seg, s) in &per {
        let spend_line = format!(
            "spend, last 12 months: <span class=\"value\">{}</span> on average in this segment, against {all_mean} over all members; {} of the total",
            money(s.spend / s.spend_known as f64),
            rate(s.spend / all.spend)
        );
        assert!(
            report.contains(&spend_line),
            "segment {seg}: `{spend_line}`"
        );
        let contact_line = format!(
            "members who agreed to be contacted: <span class=\"value\">{}</span> ({} members), against {all_rate} over all members",
            rate(s.flagged as f64 / s.flag_known as f64),
            thousands(s.flagged)
        );
        assert!(
            report.contains(&contact_line),
            "segment {seg}: `{contact_line}`"
        );
    }
    assert_eq!(per.len(), 5);
}

#[test]
fn differences_of_shares_are_in_points() {
    // A share 78 % below the average reads as 78 points; the cards give
    // the difference of the two shares in points, which must be the
    // difference of the two shares they show (to the rounding of one
    // decimal each).
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    let report = case.read("out/segment_report.html");
    let mut seen = 0;
    for item in report.split("<li>").skip(1) {
        let item = &item[..item.find("</li>").unwrap()];
        let Some((here, rest)) = item.split_once(" %, ") else {
            continue;
        };
        let here: f64 = here.rsplit(": ").next().unwrap().parse().unwrap();
        // A share's difference is in points, never "78 % below".
        let (points, rest) = rest
            .split_once(" points ")
            .unwrap_or_else(|| panic!("a share described without points: {item}"));
        let points: f64 = points.parse().unwrap();
        let all: f64 = rest
            .split_once('(')
            .unwrap()
            .1
            .split(" %")
            .next()
            .unwrap()
            .parse()
            .unwrap();
        let sign = if rest.starts_with("below") { -1.0 } else { 1.0 };
        assert!(((here - all) - sign * points).abs() <= 0.11, "{item}");
        seen += 1;
    }
    assert!(seen >= 5, "the demo's cards describe shares ({seen} seen)");
}

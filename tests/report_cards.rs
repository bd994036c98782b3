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
    // The cards come before the analyst's half.
    let cards = report.split("<div class=\"analyst\">").next().unwrap();
    let mut seen = 0;
    for item in cards.split("<li>").skip(1) {
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

/// The card's value of a condition in raw units: `43.7 %` is 0.437,
/// `€44.80` is 44.8, `9 months` is 9.
fn card_value(text: &str) -> f64 {
    let percent = text.ends_with(" %");
    let digits: String = text
        .chars()
        .filter(|c| c.is_ascii_digit() || *c == '.' || *c == '-')
        .collect();
    let v: f64 = digits.parse().unwrap_or_else(|_| panic!("`{text}`"));
    if percent {
        v / 100.0
    } else {
        v
    }
}

/// The median of the values a column has, the middle two averaged for an
/// even count (common practice): the demo recipe's fill.
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    if v.len().is_multiple_of(2) {
        (v[m - 1] + v[m]) / 2.0
    } else {
        v[m]
    }
}

/// Display names back to columns, from a recipe's `call` lines.
fn columns_by_name(recipe: &str) -> HashMap<String, String> {
    recipe
        .lines()
        .filter_map(|l| {
            let rest = l.strip_prefix("call ")?;
            let (column, rest) = rest.split_once(" \"")?;
            Some((rest.split('"').next()?.to_string(), column.to_string()))
        })
        .collect()
}

/// A card's segment number, its rule's text and the figures after it.
fn card_rule(card: &str) -> (&str, &str, &str) {
    let after = |from: &str| card.split(from).nth(1).unwrap();
    let seg = after("(segment ").split(')').next().unwrap();
    let rule = after("Rule: ").split(". It picks ").next().unwrap();
    (seg, rule, after(". It picks "))
}

/// A condition's name, direction (above or at most) and value text.
fn condition(part: &str) -> (&str, bool, &str) {
    match part.split_once(" above ") {
        Some((n, v)) => (n, true, v),
        None => {
            let (n, v) = part.split_once(" at most ").unwrap();
            (n, false, v)
        }
    }
}

#[test]
fn a_rule_typed_from_a_card_picks_what_the_card_says() {
    // A reader types a card's rule into a filter, gaps filled with the
    // median as the report says: it picks the members the card counts, and
    // its thresholds are the SQL's to the last digit (a card that rounded
    // 0.4375 to "43.8 %" picked other members).
    let case = Case::demo();
    let run = case.assort(&["run", "coop-members.assort", "--json"], &[]);
    let json: serde_json::Value = serde_json::from_str(&run.stdout()).unwrap();
    let rules = json["result"]["rules"].as_array().unwrap().clone();
    let column_of = columns_by_name(&case.read("coop-members.assort"));
    let data = case.read("data/coop_members.csv");
    let mut lines = data.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    let segment_of = case.segments_by_key("out/member_segments.csv");
    let column = |name: &str| -> Vec<Option<f64>> {
        let at = header.iter().position(|h| *h == name).unwrap();
        rows.iter().map(|r| r[at].parse().ok()).collect()
    };
    let report = case.read("out/segment_report.html");
    let mut checked = 0;
    for card in report.split("<div class=\"card\"").skip(1) {
        let (seg, rule_text, figures) = card_rule(card);
        let rule = rules
            .iter()
            .find(|r| r["segment"].as_u64().unwrap().to_string() == seg)
            .unwrap();
        let conditions = rule["conditions"].as_array().unwrap();
        let mut picked = vec![true; rows.len()];
        let parts: Vec<&str> = rule_text.split(" and ").collect();
        assert_eq!(parts.len(), conditions.len(), "segment {seg}: {rule_text}");
        for (part, sql) in parts.iter().zip(conditions) {
            let (name, above, value) = condition(part);
            let col = &column_of[name];
            let threshold = card_value(value);
            assert_eq!(sql["column"].as_str().unwrap(), col);
            assert_eq!(sql["op"].as_str().unwrap(), if above { ">" } else { "<=" });
            let exact = sql["value"].as_f64().unwrap();
            assert!(
                (threshold - exact).abs() <= 1e-12 * exact.abs().max(1.0),
                "segment {seg}: the card says `{part}`, the query uses {exact}"
            );
            let values = column(col);
            let fill = median(values.iter().flatten().copied().collect());
            for (p, v) in picked.iter_mut().zip(&values) {
                let v = v.unwrap_or(fill);
                *p &= if above { v > exact } else { v <= exact };
            }
        }
        let key_at = 0;
        let size = segment_of.values().filter(|s| *s == seg).count();
        let matched = picked.iter().filter(|&&p| p).count();
        let hits = rows
            .iter()
            .zip(&picked)
            .filter(|(r, &p)| p && segment_of[r[key_at]] == seg)
            .count();
        assert_eq!(
            matched as u64,
            rule["matched"].as_u64().unwrap(),
            "segment {seg}"
        );
        assert_eq!(
            hits as u64,
            rule["matched_in_segment"].as_u64().unwrap(),
            "segment {seg}"
        );
        let said = format!(
            "{} of this segment; {} of the members it picks",
            rate(hits as f64 / size as f64),
            rate(hits as f64 / matched as f64)
        );
        assert!(
            figures.starts_with(&said),
            "segment {seg}: `{figures}`, recomputed `{said}`"
        );
        checked += 1;
    }
    assert_eq!(checked, 5);
}

/// Segment `seg`'s card in a report.
fn card_of(report: &str, seg: usize) -> &str {
    report
        .split("<div class=\"card\"")
        .find(|c| c.contains(&format!("(segment {seg})")))
        .unwrap()
}

#[test]
fn a_brief_and_its_next_step_reach_the_card_and_the_profiles() {
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    let report = case.read("out/segment_report.html");
    let card = card_of(&report, 2);
    assert!(card.contains("<p class=\"about\">few, large trips for bulk staples</p>"));
    assert!(card.contains("<b>Next step:</b> a reminder before each bulk-buy weekend"));
    let profiles: serde_json::Value =
        serde_json::from_str(&case.read("out/segment_profiles.json")).unwrap();
    let two = profiles["segments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["segment"] == 2)
        .unwrap();
    assert_eq!(two["brief"], "few, large trips for bulk staples");
    assert_eq!(two["action"], "a reminder before each bulk-buy weekend");
    // A segment the recipe gives no brief has none, in neither place.
    case.edit("coop-members.assort", "brief 4 ", "# brief 4 ");
    case.run("coop-members.assort").ok();
    let report = case.read("out/segment_report.html");
    let card = card_of(&report, 4);
    assert!(!card.contains("class=\"about\"") && !card.contains("Next step"));
    let profiles: serde_json::Value =
        serde_json::from_str(&case.read("out/segment_profiles.json")).unwrap();
    let four = profiles["segments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["segment"] == 4)
        .unwrap();
    assert!(four.get("brief").is_none() && four.get("action").is_none());
}

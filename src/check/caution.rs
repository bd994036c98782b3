//! Columns whose names suggest personal data: a direct identifier (a name,
//! an e-mail address, a phone number, a street address, a postcode) or a
//! protected attribute (age, sex or gender, ethnicity, religion, health,
//! disability and the like). Segmenting or targeting people on them may be
//! unlawful or unfair, so the checker warns, in plain words, and lets a
//! recipe acknowledge a reviewed column explicitly.
//!
//! Names are cut into words (at punctuation and at lower-to-upper case
//! changes); a word matches when it equals a listed word, or, for listed
//! words of five letters or more, when it contains one (`dateofbirth`).
//! Short words match only whole, so `average` is not `age`.

/// What a column's name suggests.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sensitive {
    Identifier,
    Protected,
}

impl Sensitive {
    pub fn describe(self) -> &'static str {
        match self {
            Sensitive::Identifier => "a direct identifier of a person",
            Sensitive::Protected => "a protected attribute",
        }
    }
}

const IDENTIFIERS: &[&str] = &[
    "email",
    "mail",
    "phone",
    "mobile",
    "telephone",
    "tel",
    "name",
    "firstname",
    "lastname",
    "surname",
    "forename",
    "fullname",
    "street",
    "address",
    "postcode",
    "zip",
    "zipcode",
    "postal",
    "ssn",
    "passport",
    "iban",
    "ip",
];

const PROTECTED: &[&str] = &[
    "age",
    "birth",
    "birthday",
    "birthdate",
    "dob",
    "born",
    "sex",
    "gender",
    "ethnicity",
    "ethnic",
    "race",
    "religion",
    "religious",
    "faith",
    "health",
    "medical",
    "disability",
    "disabled",
    "pregnant",
    "pregnancy",
    "sexuality",
    "orientation",
    "nationality",
    "marital",
];

/// Whether a column name suggests personal data, and which kind, with the
/// word that matched.
pub fn sensitive(column: &str) -> Option<(Sensitive, &'static str)> {
    for word in words(column) {
        for (list, kind) in [
            (PROTECTED, Sensitive::Protected),
            (IDENTIFIERS, Sensitive::Identifier),
        ] {
            for &w in list {
                if word == w || (w.len() >= 5 && word.contains(w)) {
                    return Some((kind, w));
                }
            }
        }
    }
    None
}

/// Lowercase words of a name.
fn words(name: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut prev_lower = false;
    for c in name.chars() {
        if !c.is_alphanumeric() {
            if !cur.is_empty() {
                out.push(std::mem::take(&mut cur));
            }
            prev_lower = false;
            continue;
        }
        if c.is_uppercase() && prev_lower && !cur.is_empty() {
            out.push(std::mem::take(&mut cur));
        }
        prev_lower = c.is_lowercase() || c.is_ascii_digit();
        cur.extend(c.to_lowercase());
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identifiers_and_protected_attributes_are_recognised() {
        assert_eq!(
            sensitive("email_address").map(|s| s.0),
            Some(Sensitive::Identifier)
        );
        assert_eq!(
            sensitive("customerName").map(|s| s.0),
            Some(Sensitive::Identifier)
        );
        assert_eq!(
            sensitive("age_band").map(|s| s.0),
            Some(Sensitive::Protected)
        );
        assert_eq!(
            sensitive("DateOfBirth").map(|s| s.0),
            Some(Sensitive::Protected)
        );
        assert_eq!(
            sensitive("dateofbirth").map(|s| s.0),
            Some(Sensitive::Protected)
        );
        assert_eq!(sensitive("Gender").map(|s| s.0), Some(Sensitive::Protected));
    }

    #[test]
    fn behavioural_columns_are_left_alone() {
        for c in [
            "average_basket",
            "page_views",
            "usage_hours",
            "visits_per_month",
            "share_fresh",
            "coupon_rate",
            "home_branch",
            "tenure_months",
        ] {
            assert_eq!(sensitive(c), None, "{c}");
        }
    }
}

//! Option values: looked up by name, checked by kind and range, with one
//! wording for a value that does not fit.

use super::*;

impl Checker {
    /// Options by name, reporting unknown and repeated ones.
    pub(super) fn options<'a>(
        &mut self,
        statement: &'static str,
        given: &'a [OptionPair],
        known: &[vocab::OptionDoc],
    ) -> HashMap<&'static str, &'a OptionPair> {
        let mut out: HashMap<&'static str, &'a OptionPair> = HashMap::new();
        for o in given {
            let Some(doc) = known.iter().find(|d| d.name == o.name.node) else {
                let suggestion = suggest::nearest(&o.name.node, vocab::names(known));
                let all: Vec<String> = vocab::names(known).map(|n| format!("`{n}`")).collect();
                self.err(CheckError::UnknownOption {
                    statement,
                    option: o.name.node.clone(),
                    span: o.name.span,
                    help: did_you_mean(
                        &suggestion,
                        &format!("`{statement}` takes {}", all.join(", ")),
                    ),
                });
                continue;
            };
            if let Some(prev) = out.get(doc.name) {
                self.err(CheckError::Conflict {
                    what: format!("option `{}`", doc.name),
                    span: o.name.span,
                    first: prev.name.span,
                });
                continue;
            }
            out.insert(doc.name, o);
        }
        out
    }

    /// `value` of option `name` when it is at most `most`; else an error
    /// at the option's value, with `why` as help.
    pub(super) fn at_most(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        name: &str,
        value: usize,
        most: usize,
        why: &str,
    ) -> Option<usize> {
        if value <= most {
            return Some(value);
        }
        if let Some(o) = opts.get(name) {
            self.bad_value(
                name,
                &o.value.node,
                &format!("a whole number up to {}", crate::text::thousands(most)),
                o.value.span,
                why,
            );
        }
        None
    }

    /// Whole-number option `name` (1 or more, `default` unless given), at
    /// most `most`, with `why` as the help for a value above it.
    pub(super) fn capped_option(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        name: &str,
        default: usize,
        most: usize,
        why: &str,
    ) -> Option<usize> {
        let value = self.whole_option(opts, name, 1, default)?;
        self.at_most(opts, name, value, most, why)
    }

    /// The records the sample counted or estimated, when known.
    pub(super) fn records(&self) -> Option<usize> {
        self.probe
            .as_ref()
            .and_then(|p| p.rows.or(p.estimated_rows))
    }

    /// A predicted cost in words for a limit's message: "9,000,000 k-means
    /// fits of 25,000 records".
    pub(super) fn fits_cost(&self, fits: u128, what: &str) -> String {
        let fits = crate::text::thousands(fits);
        match self.records() {
            Some(n) => format!("{fits} {what} of {} records", crate::text::thousands(n)),
            None => format!("{fits} {what}"),
        }
    }

    pub(super) fn whole_option(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        name: &str,
        min: i64,
        default: usize,
    ) -> Option<usize> {
        let Some(o) = opts.get(name) else {
            return Some(default);
        };
        match &o.value.node {
            Value::Number(n) => match n.as_whole() {
                Some(v) if v >= min => Some(v as usize),
                _ => {
                    self.bad_value(
                        name,
                        &o.value.node,
                        &format!("a whole number, {min} or more"),
                        o.value.span,
                        &format!("for example `{name} {default}`"),
                    );
                    None
                }
            },
            other => {
                self.bad_value(
                    name,
                    other,
                    "a whole number",
                    o.value.span,
                    &format!("for example `{name} {default}`"),
                );
                None
            }
        }
    }

    pub(super) fn positive(&mut self, name: &str, value: &Spanned<Value>) -> Option<f64> {
        match &value.node {
            Value::Number(n) if n.value.is_finite() && n.value > 0.0 => Some(n.value),
            other => {
                self.bad_value(
                    name,
                    other,
                    "a number above 0",
                    value.span,
                    "1 counts as one feature; 2 as two; 0.5 as half of one",
                );
                None
            }
        }
    }

    pub(super) fn bad_value(
        &mut self,
        option: &str,
        found: &Value,
        expected: &str,
        span: Span,
        help: &str,
    ) {
        let found = match found {
            Value::Number(_) | Value::Range(..) => format!("`{found}`"),
            other => format!("{} `{other}`", other.kind_name()),
        };
        self.err(CheckError::BadValue {
            option: option.into(),
            found,
            expected: expected.into(),
            span,
            help: help.into(),
        });
    }

    /// A word from a fixed list, with a suggestion when it is not.
    /// An option that takes one of a list of words, with its default
    /// when absent; the span is the value's, when given.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn word_option<T>(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        name: &'static str,
        default: T,
        names: &[&'static str],
        parse: fn(&str) -> Option<T>,
        expected: &str,
        example: &str,
    ) -> Option<(T, Option<Span>)> {
        let Some(o) = opts.get(name) else {
            return Some((default, None));
        };
        match &o.value.node {
            Value::Word(w) => self
                .word_choice(name, &Spanned::new(w.clone(), o.value.span), names, parse)
                .map(|v| (v, Some(o.value.span))),
            other => {
                self.bad_value(name, other, expected, o.value.span, example);
                None
            }
        }
    }

    pub(super) fn word_choice<T>(
        &mut self,
        what: &'static str,
        word: &Spanned<String>,
        names: &[&'static str],
        parse: fn(&str) -> Option<T>,
    ) -> Option<T> {
        if let Some(v) = parse(&word.node) {
            return Some(v);
        }
        let suggestion = suggest::nearest(&word.node, names.iter().copied());
        let choices: Vec<String> = names.iter().map(|n| format!("`{n}`")).collect();
        self.err(CheckError::UnknownWord {
            what,
            found: word.node.clone(),
            span: word.span,
            choices: choices.join(", "),
            help: did_you_mean(
                &suggestion,
                &format!("choose one of {}", choices.join(", ")),
            ),
        });
        None
    }
}

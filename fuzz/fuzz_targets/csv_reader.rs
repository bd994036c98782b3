//! Fuzzes the CSV reader: the checker's probe (header, sample, kinds,
//! separator guess) and the run's loader, over arbitrary bytes with a
//! header the fuzzer also writes; the first byte picks the separator and
//! the decimal mark. Errors are expected; panics are findings,
//! and so is a loaded table whose columns disagree in length.
//!
//!     cargo +nightly fuzz run csv_reader fuzz/seeds/csv_reader
#![no_main]

use assort::check::probe::{probe_bytes, ColumnKind, DecimalMark};
use assort::run::load::{load_from, Columns};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    // The first byte picks the separator, as a recipe's `separator` would.
    let Some((&pick, csv)) = data.split_first() else {
        return;
    };
    let separator = [b',', b';', b'\t', b'|'][usize::from(pick % 4)];
    let decimal = if pick & 4 == 0 || separator == b',' {
        DecimalMark::Point
    } else {
        DecimalMark::Comma
    };
    let Ok(probe) = probe_bytes(csv, separator, decimal) else {
        return;
    };
    let names: Vec<String> = probe.names().map(str::to_string).collect();
    let Some((key, rest)) = names.split_first() else {
        return;
    };
    // Every other column asked for as a number, or as text when the sample
    // says so, as the checker would plan it.
    let (mut numeric, mut text) = (Vec::new(), Vec::new());
    for name in rest {
        if name.is_empty() || name == key || numeric.contains(name) || text.contains(name) {
            continue;
        }
        match probe.column(name) {
            Some(c) if c.kind != ColumnKind::Text || c.mostly_numeric() => {
                numeric.push(name.clone())
            }
            _ => text.push(name.clone()),
        }
    }
    let cols = Columns {
        key,
        numeric: &numeric,
        text: &text,
        decimal,
    };
    if let Ok(table) = load_from(csv, "fuzz.csv", char::from(separator), &cols) {
        let n = table.keys.len();
        assert_eq!(table.lines.len(), n);
        assert!(table.numeric.iter().all(|c| c.len() == n));
        assert!(table.text.iter().all(|c| c.len() == n));
        assert!(table.numeric.iter().all(|c| c.iter().flatten().all(f64::is_finite)));
    }
});

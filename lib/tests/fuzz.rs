//! Fuzz targets, run on stable through proptest: the unit parser and quantity reader,
//! and table ingestion from arbitrary bytes. Each must return a value or a typed
//! error for any input; none may panic, and an accepted quantity must be finite.
//!
//! The test command runs 2 000 inputs per target; run more by hand with
//! `STAGNA_FUZZ_CASES=100000 cargo nextest run --workspace -E 'test(/fuzz_/)'`.

use proptest::prelude::*;
use stagna::io::table::{CsvLayout, read_csv, read_csv_with, read_table};
use stagna::{Quantity, Unit};

fn config() -> ProptestConfig {
    let cases = std::env::var("STAGNA_FUZZ_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(2_000);
    ProptestConfig { cases, failure_persistence: None, ..ProptestConfig::default() }
}

/// Pieces unit strings are made of, so that inputs reach deep into the parser.
fn unit_text() -> impl Strategy<Value = String> {
    let atom = prop_oneof![
        Just("m".to_string()),
        Just("mm".to_string()),
        Just("Pa".to_string()),
        Just("kPa".to_string()),
        Just("inH2O@60F".to_string()),
        Just("mmHg@0C".to_string()),
        Just("degC".to_string()),
        Just("delta_degF".to_string()),
        Just("kg".to_string()),
        Just("s".to_string()),
        Just("m3".to_string()),
        Just("h".to_string()),
        Just("%".to_string()),
        "[a-zA-Z°µ@_0-9]{0,6}",
    ];
    let op = prop_oneof![Just("*"), Just("/"), Just("·"), Just("^"), Just(" "), Just("^-"), Just("")];
    prop::collection::vec((atom, op, -200i32..200), 0..6).prop_map(|parts| {
        parts
            .into_iter()
            .map(|(a, o, n)| if o.starts_with('^') { format!("{a}{o}{}", n.abs()) } else { format!("{a}{o}") })
            .collect()
    })
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn fuzz_unit_parser(text in prop_oneof![unit_text(), "\\PC{0,24}"]) {
        if let Ok(u) = Unit::parse(&text) {
            prop_assert!(!u.factor.is_nan(), "{text}: NaN factor");
            let q = Quantity::from_unit(1.0, &u);
            if q.si.is_finite() && q.si != 0.0 {
                let back = q.value_in_unit(&u).unwrap();
                prop_assert!((back - 1.0).abs() < 1e-9, "{text}: 1 unit came back as {back}");
            }
        }
    }

    #[test]
    fn fuzz_quantity_reader(value in prop_oneof![Just("1".to_string()), Just("-2.5e3".to_string()), Just("1e400".to_string()), "[-+0-9.eE]{0,10}"], unit in unit_text()) {
        for text in [format!("{value} {unit}"), format!("{value}{unit}")] {
            if let Ok(q) = Quantity::parse(&text) {
                prop_assert!(q.si.is_finite(), "{text} gave {}", q.si);
            }
        }
    }

    #[test]
    fn fuzz_table_ingestion(bytes in prop_oneof![
        prop::collection::vec(any::<u8>(), 0..400),
        "([a-z]{1,3}[,;\t]){0,4}[a-z]{1,3}\n(([-0-9.,eE\"]{0,6}[,;\t]){0,5}\n){0,8}".prop_map(String::into_bytes),
    ], semicolons in any::<bool>()) {
        let dir = std::env::temp_dir().join(format!("stagna-fuzz-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join(format!("case-{:x}.csv", fxhash(&bytes)));
        std::fs::write(&p, &bytes).unwrap();
        let _ = read_csv(&p);
        let _ = read_table(&p);
        let _ = read_csv_with(&p, CsvLayout { separator: if semicolons { b';' } else { b'\t' }, decimal_comma: semicolons });
        let _ = std::fs::remove_file(&p);
    }
}

fn fxhash(b: &[u8]) -> u64 {
    b.iter().fold(0xcbf2_9ce4_8422_2325u64, |h, &x| (h ^ u64::from(x)).wrapping_mul(0x100_0000_01b3))
}

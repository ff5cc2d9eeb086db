//! A fast path for plain CSV: the runs of lines a [`super::scan::TableScan`] cuts (for
//! scans, and for `read_table` of a large CSV file), parsed in parallel into only the
//! columns asked for.
//!
//! Loggers write plain CSV: no quotes, one separator, numbers and short labels. For such a
//! run of lines [`parse`] splits the bytes at line ends into a few parts and parses the
//! parts on rayon's threads straight into the final columns (integers and floats with the
//! parsers polars' CSV reader uses, `atoi_simd` and `fast-float2`, and short decimals by one
//! exact division (`short_decimal`), so every value is the same bit for bit).
//! Anything outside that plain grammar — a quote, a comment or blank line, an empty field
//! in a column asked for, a field that does not parse as its column's type, a line of
//! another width, a decimal comma, a column of another type — makes it return `None`, and
//! the caller reads the run with polars' own reader instead, whose result and errors are
//! then the ones a user gets.
//! Measured on the 10 M-reading bench campaign (2 cores): see DEVELOPERS.md.

use polars::prelude::*;
use rayon::prelude::*;

use super::table::CsvLayout;

/// What a wanted column is parsed as.
#[derive(Clone, Copy)]
enum Kind {
    Int,
    Float,
    Text,
}

/// One wanted column's values for the whole run.
enum Column {
    Int(Vec<i64>),
    Float(Vec<f64>),
    /// Byte ranges into the run (start, end).
    Text(Vec<(u32, u32)>),
}

/// One part's share of a wanted column, written in place.
enum Share<'a> {
    Int(&'a mut [i64]),
    Float(&'a mut [f64]),
    Text(&'a mut [(u32, u32)]),
}

/// Parts smaller than this are not split further (the cost of a task is then noise).
const MIN_PART: usize = 256 << 10;

/// The run `buf` (whole lines after the header) as a frame of `columns` in that order, or
/// `None` when it is not plain CSV as the module doc says (the caller then uses polars).
///
/// The rows of each part are counted first (one vectorised pass for line ends), so that
/// the parts parse straight into their shares of the final columns: no part vectors, no
/// joining copy.
pub(crate) fn parse(buf: &[u8], schema: &Schema, columns: &[String], layout: CsvLayout) -> Option<DataFrame> {
    if layout.decimal_comma || layout.separator == b'"' || layout.separator == b'\n' || buf.len() >= u32::MAX as usize {
        return None;
    }
    if memchr::memchr(b'"', buf).is_some() || schema.is_empty() || columns.is_empty() {
        return None; // a quote; or nothing to cut a line into (a line would never advance)
    }
    // For each field of a line (file order): the wanted column's slot and kind.
    let mut plan: Vec<Option<usize>> = vec![None; schema.len()];
    let mut kinds = Vec::with_capacity(columns.len());
    for (slot, c) in columns.iter().enumerate() {
        let (i, _, dtype) = schema.get_full(c)?;
        kinds.push(match dtype {
            DataType::Int64 => Kind::Int,
            DataType::Float64 => Kind::Float,
            DataType::String => Kind::Text,
            _ => return None,
        });
        if plan[i].replace(slot).is_some() {
            return None; // a column asked for twice
        }
    }
    let parts = split(buf, rayon::current_num_threads() * 4);
    let rows: Vec<usize> = parts
        .par_iter()
        .map(|&(lo, hi)| memchr::memchr_iter(b'\n', &buf[lo..hi]).count() + usize::from(buf[hi - 1] != b'\n'))
        .collect();
    let total: usize = rows.iter().sum();
    let mut cols: Vec<Column> = kinds
        .iter()
        .map(|k| match k {
            Kind::Int => Column::Int(vec![0; total]),
            Kind::Float => Column::Float(vec![0.0; total]),
            Kind::Text => Column::Text(vec![(0, 0); total]),
        })
        .collect();
    // Each part's shares, column by column.
    let mut shares: Vec<Vec<Share>> = parts.iter().map(|_| Vec::with_capacity(cols.len())).collect();
    for col in cols.iter_mut() {
        match col {
            Column::Int(v) => deal(v, &rows, &mut shares, Share::Int),
            Column::Float(v) => deal(v, &rows, &mut shares, Share::Float),
            Column::Text(v) => deal(v, &rows, &mut shares, Share::Text),
        }
    }
    let ok = parts
        .par_iter()
        .zip(shares.par_iter_mut())
        .all(|(&(lo, hi), share)| parse_part(buf, lo, hi, layout.separator, &plan, share).is_some());
    if !ok {
        return None;
    }
    let mut out = Vec::with_capacity(columns.len());
    for (col, name) in cols.into_iter().zip(columns) {
        let name = PlSmallStr::from_str(name);
        let series = match col {
            Column::Int(v) => Int64Chunked::from_vec(name, v).into_series(),
            Column::Float(v) => Float64Chunked::from_vec(name, v).into_series(),
            Column::Text(r) => {
                let texts = r
                    .iter()
                    .map(|&(a, b)| std::str::from_utf8(&buf[a as usize..b as usize]).ok())
                    .collect::<Option<Vec<&str>>>()?;
                StringChunked::from_iter_values(name, texts.into_iter()).into_series()
            }
        };
        out.push(series.into_column());
    }
    DataFrame::new(total, out).ok()
}

/// Cuts `v` into consecutive slices of `rows[k]` elements and gives the k-th to part k.
fn deal<'a, T>(
    mut v: &'a mut [T],
    rows: &[usize],
    shares: &mut [Vec<Share<'a>>],
    wrap: impl Fn(&'a mut [T]) -> Share<'a>,
) {
    for (n, share) in rows.iter().zip(shares.iter_mut()) {
        let (head, tail) = std::mem::take(&mut v).split_at_mut(*n);
        share.push(wrap(head));
        v = tail;
    }
}

/// About `want` ranges of whole lines covering `buf` (each ends just past a line end, the
/// last at the end of `buf`).
fn split(buf: &[u8], want: usize) -> Vec<(usize, usize)> {
    let size = (buf.len() / want.max(1)).max(MIN_PART);
    let mut parts = Vec::new();
    let mut lo = 0;
    while lo < buf.len() {
        let hi = if lo + size >= buf.len() {
            buf.len()
        } else {
            match memchr::memchr(b'\n', &buf[lo + size..]) {
                Some(i) => lo + size + i + 1,
                None => buf.len(),
            }
        };
        parts.push((lo, hi));
        lo = hi;
    }
    parts
}

/// Parses the whole lines in `buf[lo..hi]` into `share` (one slice a wanted column, as
/// long as the part has lines); `None` at the first thing that is not plain.
fn parse_part(buf: &[u8], lo: usize, hi: usize, sep: u8, plan: &[Option<usize>], share: &mut [Share]) -> Option<()> {
    let width = plan.len();
    let bytes = &buf[..hi];
    let mut i = lo;
    let mut row = 0usize;
    while i < hi {
        if matches!(bytes[i], b'#' | b'\n' | b'\r') {
            return None; // a comment line (polars' reader skips it) or a blank one
        }
        for (field, want) in plan.iter().enumerate() {
            let start = i;
            i = field_end(bytes, i, sep);
            let last = field + 1 == width;
            // A field before the last ends at a separator, the last at a line end (or the
            // end of the run); anything else is a line of another width.
            if last == (i < hi && bytes[i] == sep) {
                return None;
            }
            let mut f = &bytes[start..i];
            if last && f.last() == Some(&b'\r') {
                f = &f[..f.len() - 1];
            }
            i += 1;
            let Some(slot) = *want else { continue };
            if f.is_empty() {
                return None; // a null in a wanted column
            }
            match &mut share[slot] {
                Share::Int(v) => *v.get_mut(row)? = atoi_simd::parse::<i64, true, true>(f).ok()?,
                Share::Float(v) => {
                    *v.get_mut(row)? = match short_decimal(f) {
                        Some(x) => x,
                        None => fast_float2::parse::<f64, _>(f).ok()?,
                    }
                }
                Share::Text(v) => *v.get_mut(row)? = (start as u32, (start + f.len()) as u32),
            }
        }
        row += 1;
    }
    Some(())
}

/// Powers of ten that are exact in binary64 (10¹⁵ < 2⁵³).
const EXACT_POW10: [f64; 16] = [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];

/// A short decimal as loggers write it (`-?digits` or `-?digits.digits`, at most 15 digits)
/// read in one pass, else `None` (the caller then uses `fast-float2`).
///
/// The digits make an integer m < 10¹⁵ < 2⁵³ and the k digits after the point a divisor
/// 10ᵏ, both exact in binary64, so the one IEEE division m / 10ᵏ is the correctly rounded
/// value of the decimal (Clinger's fast path, W. D. Clinger, "How to read floating point
/// numbers accurately", PLDI 1990): the same bits `fast-float2` gives, which the tests
/// check field by field.
#[inline(always)]
fn short_decimal(f: &[u8]) -> Option<f64> {
    let (neg, d) = match f.split_first() {
        Some((b'-', rest)) => (true, rest),
        _ => (false, f),
    };
    // 15 digits and a point at most.
    if d.is_empty() || d.len() > 16 {
        return None;
    }
    let mut m: u64 = 0;
    let mut i = 0;
    while i < d.len() {
        let c = d[i].wrapping_sub(b'0');
        if c > 9 {
            break;
        }
        m = m * 10 + u64::from(c);
        i += 1;
    }
    let mut k = 0;
    if i < d.len() {
        // Only a point followed by at least one digit, after at least one digit.
        if i == 0 || d[i] != b'.' || i + 1 == d.len() {
            return None;
        }
        for &b in &d[i + 1..] {
            let c = b.wrapping_sub(b'0');
            if c > 9 {
                return None;
            }
            m = m * 10 + u64::from(c);
        }
        k = d.len() - i - 1;
    }
    if d.len() - usize::from(k > 0) > 15 {
        return None;
    }
    let v = m as f64 / EXACT_POW10[k];
    Some(if neg { -v } else { v })
}

/// The first index from `i` holding `sep` or a line end (or `bytes.len()`), eight bytes at
/// a step: a byte equal to the target makes a zero byte in `word ^ target`, and the lowest
/// high bit of `(x − 0x01…) & !x & 0x80…` marks the first zero byte (bits above it may be
/// false alarms from the borrow; the lowest never is).
#[inline(always)]
fn field_end(bytes: &[u8], mut i: usize, sep: u8) -> usize {
    const LO: u64 = 0x0101_0101_0101_0101;
    const HI: u64 = 0x8080_8080_8080_8080;
    let (s, n) = (LO * sep as u64, LO * b'\n' as u64);
    while i + 8 <= bytes.len() {
        let mut a = [0u8; 8];
        a.copy_from_slice(&bytes[i..i + 8]);
        let w = u64::from_le_bytes(a);
        let (x, y) = (w ^ s, w ^ n);
        let hit = (x.wrapping_sub(LO) & !x | y.wrapping_sub(LO) & !y) & HI;
        if hit != 0 {
            return i + (hit.trailing_zeros() / 8) as usize;
        }
        i += 8;
    }
    while i < bytes.len() && bytes[i] != sep && bytes[i] != b'\n' {
        i += 1;
    }
    i
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars_io::SerReader;
    use polars_io::prelude::CsvReadOptions;

    fn schema() -> Schema {
        Schema::from_iter([
            Field::new("id".into(), DataType::Int64),
            Field::new("x".into(), DataType::Float64),
            Field::new("s".into(), DataType::String),
            Field::new("y".into(), DataType::Float64),
        ])
    }

    fn cols(c: &[&str]) -> Vec<String> {
        c.iter().map(|s| s.to_string()).collect()
    }

    /// What polars' own reader makes of the same run with the same schema.
    fn by_polars(buf: &[u8], schema: &Schema, columns: &[String]) -> DataFrame {
        let df = CsvReadOptions::default()
            .with_has_header(false)
            .with_schema(Some(Arc::new(schema.clone())))
            .map_parse_options(|o| o.with_comment_prefix(Some("#")))
            .into_reader_with_file_handle(std::io::Cursor::new(buf.to_vec()))
            .finish()
            .unwrap();
        df.select(columns.iter().map(|s| s.as_str())).unwrap()
    }

    #[test]
    fn plain_runs_parse_as_polars_reads_them() {
        // Values chosen to need correct rounding (0.1, 17 digits, exponents, −0) and ids
        // with a plus sign and leading zeros, which polars' parsers accept.
        let mut text = String::new();
        for i in 0..200_000i64 {
            let x = match i % 5 {
                0 => format!("{}", i as f64 * 0.1),
                1 => format!("{:e}", (i as f64).sqrt() * 1e-7),
                2 => "-0".to_string(),
                3 => format!("{}.{:03}", i, i % 997),
                _ => format!("{}", std::f64::consts::PI * i as f64),
            };
            let id = if i % 11 == 0 { format!("+{i:07}") } else { format!("{}", i - 5000) };
            text.push_str(&format!("{id},{x},p{}é,{}\n", i % 13, 1.0 / (i as f64 + 1.0)));
        }
        let buf = text.as_bytes();
        let s = schema();
        assert!(buf.len() > 8 * MIN_PART, "several parts");
        for c in [cols(&["id", "x", "s", "y"]), cols(&["y", "id"]), cols(&["s"])] {
            let ours = parse(buf, &s, &c, CsvLayout::default()).expect("plain");
            assert!(ours.equals(&by_polars(buf, &s, &c)), "{c:?}");
        }
        // CRLF line ends and a last line without one.
        let crlf = "1,0.5,a,2\r\n2,1e3,b,3\r\n3,7,c,4";
        let ours = parse(crlf.as_bytes(), &s, &cols(&["id", "s", "y"]), CsvLayout::default()).unwrap();
        assert!(ours.equals(&by_polars(crlf.as_bytes(), &s, &cols(&["id", "s", "y"]))), "{ours}");
        // Another separator.
        let semi = "1;0.5;a;2\n";
        let ours =
            parse(semi.as_bytes(), &s, &cols(&["x"]), CsvLayout { separator: b';', decimal_comma: false }).unwrap();
        assert_eq!(ours.column("x").unwrap().f64().unwrap().get(0), Some(0.5));
    }

    /// `short_decimal` gives `fast-float2`'s bits or leaves the field to it.
    fn same_as_fast_float(f: &str) -> Option<f64> {
        let ours = short_decimal(f.as_bytes());
        if let Some(x) = ours {
            let theirs = fast_float2::parse::<f64, _>(f).unwrap_or_else(|_| panic!("{f}: fast-float2 refuses it"));
            assert_eq!(x.to_bits(), theirs.to_bits(), "{f}");
        }
        ours
    }

    #[test]
    fn short_decimals_read_as_fast_float_reads_them() {
        // Taken: plain decimals of up to 15 digits, signs of zero, leading zeros.
        for f in [
            "0",
            "-0",
            "-0.0",
            "0.0",
            "7",
            "15.2",
            "8.43",
            "400.0",
            "0.1",
            "0.3",
            "-273.15",
            "0123",
            "00.50",
            "0.00000000000001",
            "999999999999999",
            "99999999999999.9",
            "-9.99999999999999",
            "123456789012.345",
        ] {
            assert!(same_as_fast_float(f).is_some(), "{f} should be read here");
        }
        assert!(same_as_fast_float("-0").unwrap().is_sign_negative());
        // 300 000 more: integers of 1 to 15 digits with the point anywhere (a fixed
        // splitmix64 stream), every one read here and equal to fast-float2's bits.
        let mut state = 0x5EED_u64;
        for _ in 0..300_000 {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^= z >> 31;
            let digits = 1 + (z % 15) as usize;
            let m = (z >> 8) % 10u64.pow(digits as u32);
            let mut f = format!("{m:0digits$}");
            let point = (z >> 4) as usize % digits;
            if point > 0 {
                f.insert(point, '.');
            }
            if z & 1 == 1 {
                f.insert(0, '-');
            }
            assert!(same_as_fast_float(&f).is_some(), "{f}");
        }

        // Left to fast-float2 (or refused by it): 16 digits or more, exponents, a plus sign,
        // a point without digits on one side, anything else.
        for f in [
            "1234567890123456",
            "0.000000000000001",
            "1e5",
            "1.5E-3",
            "+1",
            "1.",
            ".5",
            "-",
            "",
            "--1",
            "1.2.3",
            "1,5",
            " 1",
            "1 ",
            "inf",
            "NaN",
            "0x10",
            "12345678901234567890",
        ] {
            assert!(same_as_fast_float(f).is_none(), "{f} should be left to fast-float2");
        }
    }

    proptest::proptest! {
        #[test]
        fn random_short_decimals_match_fast_float(
            neg in proptest::bool::ANY,
            int in "[0-9]{1,15}",
            frac in proptest::option::of("[0-9]{1,15}"),
        ) {
            let f = format!("{}{int}{}", if neg { "-" } else { "" }, frac.as_ref().map(|d| format!(".{d}")).unwrap_or_default());
            let digits = int.len() + frac.as_ref().map_or(0, |d| d.len());
            let read = same_as_fast_float(&f);
            proptest::prop_assert_eq!(read.is_some(), digits <= 15, "{}", f);
        }
    }

    #[test]
    fn anything_not_plain_is_left_to_polars() {
        let s = schema();
        let c = cols(&["id", "x", "s", "y"]);
        let plain = CsvLayout::default();
        for (what, run) in [
            ("a quote", "1,0.5,\"a\",2\n"),
            ("an empty field asked for", "1,,a,2\n"),
            ("a blank line", "1,0.5,a,2\n\n2,0.5,a,2\n"),
            ("a comment line", "# note\n1,0.5,a,2\n"),
            ("a short line", "1,0.5,a\n"),
            ("a long line", "1,0.5,a,2,9\n"),
            ("a float in an integer column", "1.5,0.5,a,2\n"),
            ("text in a float column", "1,n/a,a,2\n"),
            ("a space", "1, 0.5,a,2\n"),
            ("a short last line", "1,0.5,a,2\n2,0.5"),
            ("invalid UTF-8", "1,0.5,\u{0}\u{0},2\n"),
        ] {
            let mut bytes = run.as_bytes().to_vec();
            if what == "invalid UTF-8" {
                bytes[6] = 0xff;
            }
            assert!(parse(&bytes, &s, &c, plain).is_none(), "{what}");
        }
        let comma = CsvLayout { separator: b';', decimal_comma: true };
        assert!(parse(b"1;0,5;a;2\n", &s, &c, comma).is_none(), "a decimal comma");
        assert!(parse(b"1,0.5,a,2\n", &Schema::default(), &[], plain).is_none(), "no columns");
        assert!(parse(b"1,0.5,a,2\n", &s, &[], plain).is_none(), "none asked for");
        let dated = Schema::from_iter([Field::new("ok".into(), DataType::Boolean)]);
        assert!(parse(b"true\n", &dated, &cols(&["ok"]), plain).is_none(), "another type");
        // An empty field in a column not asked for changes nothing asked for.
        let ours = parse(b"1,,a,2\n3,,,4\n", &s, &cols(&["y", "id"]), plain).unwrap();
        assert!(ours.equals(&by_polars(b"1,,a,2\n3,,,4\n", &s, &cols(&["y", "id"]))));
    }

    #[test]
    fn field_ends_are_found_eight_bytes_at_a_step() {
        // Every position of the target in a 0..40-byte field, against a plain search; bytes
        // just above and below the targets (0x2b, 0x2d, 0x09, 0x0b) and 0x80+ are no match.
        let fill = [b'a', 0x2b, 0x2d, 0x09, 0x0b, 0x80, 0xff, 0x01];
        for len in 0..40usize {
            for target in [b',', b'\n', b';'] {
                let mut v: Vec<u8> = (0..len).map(|k| fill[k % fill.len()]).collect();
                let plain = |v: &[u8], sep: u8| v.iter().position(|&b| b == sep || b == b'\n').unwrap_or(v.len());
                assert_eq!(field_end(&v, 0, b','), plain(&v, b','));
                v.push(target);
                v.extend_from_slice(b"x,y\n");
                for from in 0..=len {
                    let want = from + plain(&v[from..], b',');
                    assert_eq!(field_end(&v, from, b','), want, "len {len} target {target} from {from}");
                }
            }
        }
    }

    #[test]
    fn parts_are_whole_lines_covering_the_run() {
        let line = b"12345,0.5,abc,2\n";
        let buf: Vec<u8> = line.iter().copied().cycle().take(line.len() * 100_000).collect();
        let parts = split(&buf, 8);
        assert!(parts.len() > 1);
        assert_eq!(parts[0].0, 0);
        assert_eq!(parts.last().unwrap().1, buf.len());
        for w in parts.windows(2) {
            assert_eq!(w[0].1, w[1].0);
            assert_eq!(buf[w[0].1 - 1], b'\n');
        }
        assert_eq!(split(b"", 4), Vec::<(usize, usize)>::new());
    }
}

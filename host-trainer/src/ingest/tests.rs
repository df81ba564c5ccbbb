//! Reader tests: block seams, both parsing paths, errors in file order.

use std::path::Path;

use super::fast;
use super::header::*;
use super::options::*;
use super::parse::*;
use super::scan::*;
use super::skip::*;
use crate::error::InputError;
use crate::ingest::scaling::ChannelScale;

/// One row as seen by the callback: line, values, label, unit id.
type Seen = (u64, Vec<f64>, i8, Option<Vec<u8>>);

/// Every row seen by `scan_blocks` at a block size, the hash, and the rows skipped.
fn rows(
    path: &Path,
    opts: &LogOptions,
    block: usize,
) -> Result<(Vec<Seen>, String, usize), String> {
    let mut out = Vec::new();
    let mut skipped = SkipReport::default();
    let (_, hash) = scan_blocks(
        path,
        opts,
        None,
        None,
        &mut skipped,
        (
            |_: &_, r: Row<'_>| {
                out.push((
                    r.line,
                    r.values.to_vec(),
                    r.label,
                    r.unit.map(<[u8]>::to_vec),
                ));
                Ok(())
            },
            None,
        ),
        Pass { block, hash: true },
    )
    .map_err(|e| e.to_string())?;
    Ok((out, hash, skipped.total))
}

#[test]
fn block_seams_quotes_and_crlf_give_the_same_rows_as_one_block() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.csv");
    let mut text = String::from("\u{feff}unit_id,a,b,label\r\n");
    for i in 0..300 {
        let unit = if i == 200 {
            "\"U,200\"".to_string()
        } else {
            format!("U{i}")
        };
        let blank = if i % 97 == 0 { "\r\n" } else { "" };
        let bad = if i == 150 { "x" } else { "" };
        text.push_str(&format!(
            "{blank}{unit},{i}.5{bad},{},{}\r\n",
            -i,
            if i % 3 == 0 { "NO-GO" } else { "GO" }
        ));
    }
    std::fs::write(&path, &text).unwrap();
    let opts = LogOptions {
        skip_bad_rows: true,
        ..LogOptions::default()
    };
    let whole = rows(&path, &opts, 1 << 20).unwrap();
    assert_eq!(whole.0.len(), 299);
    assert_eq!(whole.0[0].0, 3, "U0 follows the header and a blank line");
    assert_eq!(
        whole.0[199].3.as_deref(),
        Some(&b"U,200"[..]),
        "quoted unit id (U150 was skipped)"
    );
    assert_eq!(whole.2, 1, "the bad row is skipped and counted");
    assert_eq!(whole.1, crate::digest::sha256_hex(text.as_bytes()));
    for block in [7, 64, 100, 1000] {
        let got = rows(&path, &opts, block).unwrap();
        let first_diff = got.0.iter().zip(&whole.0).position(|(a, b)| a != b);
        assert!(
            got == whole,
            "block size {block}: {} vs {} rows, first difference at {first_diff:?}",
            got.0.len(),
            whole.0.len()
        );
    }
    // Without skipping, every block size reports the same first error, at the same line.
    let strict = LogOptions::default();
    let want = rows(&path, &strict, 1 << 20).unwrap_err();
    // U150 is on line 154: header, then blank lines before U0 and U97.
    assert!(want.contains("line 154, column 'a'"), "{want}");
    for block in [7, 64, 100, 1000] {
        assert_eq!(
            rows(&path, &strict, block).unwrap_err(),
            want,
            "block size {block}"
        );
    }
}

/// `bytes` as records of `unit_id,a,note,b,label` (note ignored) read with the fast path
/// (told the bytes hold no quote if `plain`) and by the general path alone, as raw counts
/// or, without `raw`, as physical values.
fn both_paths(opts: &LogOptions, bytes: &[u8], plain: bool, raw: bool) -> (Parsed, Parsed) {
    both_paths_split(opts, bytes, plain, raw, b',', false)
}

/// [`both_paths`] with another delimiter and decimal mark.
fn both_paths_split(
    opts: &LogOptions,
    bytes: &[u8],
    plain: bool,
    raw: bool,
    delimiter: u8,
    decimal_comma: bool,
) -> (Parsed, Parsed) {
    let names: Vec<String> = ["unit_id", "a", "note", "b", "label"]
        .map(String::from)
        .to_vec();
    let path = Path::new("log.csv");
    let cols = Columns::resolve(path, names, opts, None).unwrap();
    let sheet = [
        ChannelScale::new("a", "", -100.0, 100.0, 0.01, 0.0).unwrap(),
        ChannelScale::new("b", "", 0.0, 5000.0, 1.0, 0.0).unwrap(),
    ];
    let scales = raw.then_some(&sheet[..]);
    let fast = fast::FastPlan::new(&cols, scales, delimiter, decimal_comma, opts);
    assert!(fast.is_some(), "both channels are plain decimal shifts");
    let parser = |fast| Parser {
        path,
        opts,
        cols: &cols,
        delimiter,
        decimal_comma,
        scales,
        keep_faults: false,
        fast,
        classes: opts.classes(),
    };
    let (mut p, mut q) = (Parsed::default(), Parsed::default());
    parser(fast).piece(bytes, 2, plain, &mut p);
    parser(None).piece(bytes, 2, false, &mut q);
    (p, q)
}

/// What a run of records parses to: rows, unit ids and errors (as text).
#[derive(Debug, PartialEq)]
struct View {
    raw: Vec<i32>,
    /// Values by their bits: -0.0 and 0.0 must agree too.
    values: Vec<u64>,
    labels: Vec<i8>,
    lines: Vec<u64>,
    units: Vec<u8>,
    unit_ends: Vec<usize>,
    times: Vec<u8>,
    time_ends: Vec<usize>,
    errors: Vec<(usize, String)>,
}

fn parsed_view(p: &Parsed) -> View {
    View {
        raw: p.raw.clone(),
        values: p.values.iter().map(|v| v.to_bits()).collect(),
        labels: p.labels.clone(),
        lines: p.lines.clone(),
        units: p.unit_bytes.clone(),
        unit_ends: p.unit_ends.clone(),
        times: p.time_bytes.clone(),
        time_ends: p.time_ends.clone(),
        errors: p.errors.iter().map(|(k, e)| (*k, e.to_string())).collect(),
    }
}

/// The options the record proptests read with: one ignored text column, short lines.
fn record_options() -> LogOptions {
    LogOptions {
        ignore: vec!["note".into()],
        max_line_len: 40,
        ..LogOptions::default()
    }
}

/// Records as text: cells joined by `sep`, each record ended by its line end (a missing one
/// by a line feed).
fn records_text(records: &[(Vec<&str>, &str)], sep: &str) -> String {
    let mut text = String::new();
    for (cells, end) in records {
        text.push_str(&cells.join(sep));
        text.push_str(if end.is_empty() { "\n" } else { end });
    }
    text
}

proptest::proptest! {
    /// On any bytes from the alphabet of bench logs, the fast path reads what the general
    /// path reads.
    #[test]
    fn fast_path_agrees_on_arbitrary_bytes(
        bytes in proptest::collection::vec(proptest::sample::select(
            b"0123456789012345678901234567890123456789.-,,,,,,,\n\n\r \"eEGOgoNU+x\xc3\xbc".to_vec()
        ), 0..400),
        plain in proptest::bool::ANY,
        raw in proptest::bool::ANY,
    ) {
        let opts = LogOptions {
            ignore: vec!["note".into()],
            max_line_len: 30,
            ..LogOptions::default()
        };
        // `plain` may only be claimed for bytes without quotes.
        let plain = plain && !bytes.contains(&b'"');
        let (p, q) = both_paths(&opts, &bytes, plain, raw);
        proptest::prop_assert_eq!(parsed_view(&p), parsed_view(&q));
    }

    /// Records built from cells of every kind, good and bad, read alike by both paths.
    #[test]
    fn fast_path_agrees_on_records_of_any_cells(
        records in proptest::collection::vec((
            proptest::collection::vec(proptest::sample::select(vec![
                // Good cells often, so that many records are good rows.
                "1", "12.34", "17", "GO", "no-go", "1", "12.34", "17", "GO", "no-go",
                "1", "12.34", "17", "GO", "no-go", "-0.5", "100", "5000", "0", "-0",
                "12.345", "1e1", " 5", "5 ", "", "x", ".5", "5.", "+5", " GO", "gö",
                "maybe", "\"3,4\"", "99999999999999999999", "0.0000001",
            ]), 4..6),
            proptest::sample::select(vec!["\n", "\r\n", "\r", "\r\r\n", ""]),
        ), 0..40),
        raw in proptest::bool::ANY,
        times in proptest::bool::ANY,
    ) {
        // With `times` the third column is the timestamp, kept (as replay keeps it).
        let opts = if times {
            LogOptions {
                ignore: Vec::new(),
                timestamp: Some("note".into()),
                keep_times: true,
                ..record_options()
            }
        } else {
            record_options()
        };
        let text = records_text(&records, ",");
        let plain = !text.contains('"');
        let (p, q) = both_paths(&opts, text.as_bytes(), plain, raw);
        proptest::prop_assert_eq!(parsed_view(&p), parsed_view(&q));
    }

    /// Semicolon-separated records with decimal commas (a spreadsheet in a European locale),
    /// and cells mixing both marks, read alike by both paths; `decimal_comma` forced off too.
    #[test]
    fn fast_path_agrees_on_semicolon_records_with_decimal_commas(
        records in proptest::collection::vec((
            proptest::collection::vec(proptest::sample::select(vec![
                "1", "12,34", "17", "GO", "no-go", "1", "12,34", "17", "GO", "no-go",
                "-0,5", "100", "5000", "0", "-0", "12.34", "12,345", "1,2,3", "1.2,3",
                "1,", ",5", "", "x", "5;", "\"3;4\"", "\"3,4\"", " 5,5", "1e1",
            ]), 4..6),
            proptest::sample::select(vec!["\n", "\r\n", ""]),
        ), 0..40),
        raw in proptest::bool::ANY,
        decimal_comma in proptest::bool::ANY,
    ) {
        let opts = record_options();
        let text = records_text(&records, ";");
        let plain = !text.contains('"');
        let (p, q) = both_paths_split(&opts, text.as_bytes(), plain, raw, b';', decimal_comma);
        proptest::prop_assert_eq!(parsed_view(&p), parsed_view(&q));
    }
}

/// A decimal comma is read only where the general path reads one: in a semicolon file
/// with `decimal_comma`, and never as a number when it is off.
#[test]
fn decimal_comma_fast_path_reads_only_what_the_general_path_reads() {
    let opts = LogOptions {
        ignore: vec!["note".into()],
        ..LogOptions::default()
    };
    let text = b"U1;12,34;x;17;GO\nU2;-0,5;x;5000;no-go\nU3;1.5;x;17;GO\n";
    for decimal_comma in [true, false] {
        let (p, q) = both_paths_split(&opts, text, true, true, b';', decimal_comma);
        assert_eq!(parsed_view(&p), parsed_view(&q));
        let rows = if decimal_comma { 3 } else { 1 };
        assert_eq!(p.labels.len(), rows, "decimal_comma {decimal_comma}");
    }
    assert_eq!(
        both_paths_split(&opts, text, true, true, b';', true).0.raw,
        [1234, 17, -50, 5000, 150, 17]
    );
}

#[test]
fn fast_and_general_paths_read_the_same_rows_and_errors() {
    use rand::{Rng, SeedableRng};
    let opts = LogOptions {
        ignore: vec!["note".into()],
        max_line_len: 40,
        ..LogOptions::default()
    };
    // Every kind of cell the fast path must either read exactly or hand on.
    let a_cells = [
        "12.34", "-0.5", "100", "-100.00", "12.345", "12.355", "1e1", " 5", "5 ", "", "x",
        "100.01", ".5", "5.", "+5", "-0", "0.00", "99.99",
    ];
    let b_cells = ["0", "5000", "5001", "17", "17.0", "-1", "4999"];
    let labels = ["GO", "no-go", "Pass", " GO", "maybe", "gö", "NG", "0"];
    let units = ["U1", " U2", "U3 ", "", "ü4"];
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let mut text = String::new();
    for _ in 0..3000 {
        // Mostly plain cells, some of every other kind.
        let mut cell = |plain: &'static str, others: &[&'static str]| {
            if rng.gen_bool(0.6) {
                plain
            } else {
                others[rng.gen_range(0..others.len())]
            }
        };
        let (a, b) = (cell("12.34", &a_cells), cell("17", &b_cells));
        let (l, u) = (cell("GO", &labels), cell("U1", &units));
        match rng.gen_range(0..20) {
            0 => text.push('\n'),
            1 => text.push_str(&format!("{u},{a},n,{b}\n")),
            2 => text.push_str(&format!("{u},{a},n,{b},{l},extra\n")),
            3 => text.push_str(&format!("{u},{a},n,{b},{l}\r\n")),
            4 => text.push_str(&format!("{u},{a},n,{b},{l}\r\r\n")),
            5 => text.push_str(&format!("{u}\r,{a},n,{b},{l}\n")),
            6 => text.push_str(&format!("{u},{a},n,{b},{l}{}\n", " ".repeat(30))),
            _ => text.push_str(&format!("{u},{a},n,{b},{l}\n")),
        }
    }
    // The run may end without a line feed, even in a CR.
    text.push_str("U9,1.5,n,2,GO\r");
    let (p, q) = both_paths(&opts, text.as_bytes(), false, true);
    let (pv, qv) = both_paths(&opts, text.as_bytes(), false, false);
    assert_eq!(parsed_view(&pv), parsed_view(&qv), "as physical values");
    assert!(pv.values.len() > 2000, "most rows are good as values too");
    assert!(p.labels.len() > 1000, "most rows are good");
    assert!(q.errors.len() > 100, "the bad rows are there");
    assert_eq!(parsed_view(&p), parsed_view(&q));
    assert_eq!(p.labels.last(), Some(&1), "the last record is read");
    assert!(
        q.errors
            .iter()
            .any(|(_, e)| matches!(e, InputError::LineTooLong { .. }))
    );
}

#[test]
fn an_over_long_line_comes_after_the_errors_before_it() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.csv");
    // The bad row right before the long line is parsed in the block before the one where
    // the long line is found.
    let mut text = String::from("a,label\n");
    for i in 0..200 {
        text.push_str(&format!("{i},NO-GO\n"));
    }
    text.push_str("x,GO\n");
    text.push_str(&"9".repeat(500));
    text.push_str(",GO\n7,GO\n");
    std::fs::write(&path, &text).unwrap();
    let strict = LogOptions {
        max_line_len: 100,
        ..LogOptions::default()
    };
    for block in [64, 256, 1 << 20] {
        let e = rows(&path, &strict, block).unwrap_err();
        assert!(e.contains("line 202"), "block {block}: {e}");
        let skip = LogOptions {
            skip_bad_rows: true,
            ..strict.clone()
        };
        let mut skipped = SkipReport::default();
        scan_blocks(
            &path,
            &skip,
            None,
            None,
            &mut skipped,
            (|_: &_, _: Row<'_>| Ok(()), None),
            Pass { block, hash: true },
        )
        .unwrap();
        assert_eq!(skipped.total, 2, "block {block}");
        assert!(
            skipped.examples[0].contains("line 202"),
            "{:?}",
            skipped.examples
        );
        assert!(
            skipped.examples[1].contains("line 203"),
            "{:?}",
            skipped.examples
        );
    }
}

/// What a read gave, for comparing two reads: every field of the dataset, or the error.
fn read_view(r: Result<crate::ingest::dataset::Dataset, InputError>) -> Result<String, String> {
    let ds = r.map_err(|e| e.to_string())?;
    let ids: Vec<String> = (0..ds.len()).map(|i| ds.unit_name(i)).collect();
    let times: Vec<Option<&str>> = (0..ds.len()).map(|i| ds.times.get(i)).collect();
    Ok(format!(
        "{:?} {:?} {:?} {:?} {ids:?} {times:?} {:?} {}",
        ds.scales, ds.raw, ds.labels, ds.lines, ds.skipped.by_reason, ds.sha256
    ))
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(512))]
    /// Observed scaling read in one pass (the first pass's readings kept and converted) gives
    /// the dataset, skips, digest and errors of the two-pass read.
    #[test]
    fn observed_scaling_in_one_pass_equals_two_passes(
        records in proptest::collection::vec((
            proptest::collection::vec(proptest::sample::select(vec![
                "1", "12.34", "17", "-0.5", "100", "5000", "0", "-0", "12.345", "0.0000001",
                "1e1", "2.5e-3", " 5", "x", "", "1", "12.34", "17",
            ]), 2..=2),
            proptest::sample::select(vec!["GO", "no-go", "GO", "no-go", "maybe"]),
            proptest::sample::select(vec!["U1", "U2", "", "\"U,3\""]),
            proptest::sample::select(vec!["\n", "\r\n", ""]),
        ), 0..30),
        skip in proptest::bool::ANY,
        times in proptest::bool::ANY,
    ) {
        let mut text = String::from("unit_id,a,b,time,label\n");
        for (cells, label, unit, end) in &records {
            text.push_str(&format!("{unit},{},{},2026-01-0{},{label}", cells[0], cells[1], cells.len()));
            text.push_str(if end.is_empty() { "\n" } else { end });
        }
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.csv");
        std::fs::write(&path, &text).unwrap();
        let opts = LogOptions {
            skip_bad_rows: skip,
            keep_times: times,
            ..LogOptions::default()
        };
        let read = |keep| {
            read_view(super::read::read_log_keeping(&path, &opts, ScaleFrom::Observed, keep))
        };
        let one = read(super::read::KEEP_READINGS);
        proptest::prop_assert_eq!(&one, &read(0));
        // A budget the log outgrows part-way falls back to the second pass, to the same end.
        proptest::prop_assert_eq!(&one, &read(24));
    }
}

/// The one rule for case, on both kinds of log: a bench log headed `Temp,temp` is refused as
/// a signal log is (it used to be read as two channels in an earlier build), naming both
/// columns, their places and the fixes; left out with `--ignore`, both columns go.
#[test]
fn a_bench_log_headed_temp_and_temp_is_refused_as_a_signal_log_is() {
    use crate::ingest::sheet::ChannelSheet;
    let dir = tempfile::tempdir().unwrap();
    let bench = dir.path().join("bench.csv");
    std::fs::write(
        &bench,
        "Temp,temp,v,label\n1,2,3,GO\n2,1,5,NO-GO\n3,3,1,GO\n",
    )
    .unwrap();
    let signal = dir.path().join("signal.csv");
    std::fs::write(
        &signal,
        "unit_id,Temp,temp,vib,label\nU1,1,1,0.1,GO\nU1,,,0.2,\nU2,2,2,0.3,NO-GO\nU2,,,0.1,\n",
    )
    .unwrap();
    let sheet = ChannelSheet::parse(
        "[[signal]]\nname='vib'\nlsb=0.001\nraw_min=-4096\nraw_max=4095\nwindow=2\n[[feature]]\nname='vib_mean'\nsignal='vib'\nkind='mean'\n",
    )
    .unwrap();
    let opts = LogOptions::default();
    let bench_err = crate::ingest::read(std::slice::from_ref(&bench), &opts, ScaleFrom::Observed)
        .unwrap_err()
        .to_string();
    let signal_err = crate::ingest::read(
        std::slice::from_ref(&signal),
        &opts,
        ScaleFrom::Sheet(&sheet),
    )
    .unwrap_err()
    .to_string();
    let bench_cols = "columns 'Temp' and 'temp' have the same name (column names compare without regard to case): columns 1 and 2 of the header; rename one, or leave both out with --ignore Temp";
    assert!(bench_err.contains(bench_cols), "{bench_err}");
    assert!(
        signal_err.contains("columns 'Temp' and 'temp' have the same name")
            && signal_err.contains("columns 2 and 3 of the header"),
        "{signal_err}"
    );
    let ignoring = LogOptions {
        ignore: vec!["temp".into()],
        ..LogOptions::default()
    };
    let ds = crate::ingest::read(&[bench], &ignoring, ScaleFrom::Observed).unwrap();
    assert_eq!(ds.scales.len(), 1, "both Temp columns left out");
    assert_eq!(ds.scales[0].name, "v");
    let ds = crate::ingest::read(&[signal], &ignoring, ScaleFrom::Sheet(&sheet)).unwrap();
    assert_eq!(ds.scales.len(), 1, "the feature alone");
    // The classes the labels were read with travel with the dataset.
    assert_eq!(ds.class_counts(), vec![("GO", 1), ("NO-GO", 1)]);
    assert_eq!(ds.class_of(0), Some(0));
}

/// A third class's code must not reach the steps that read ±1: the one rule refuses it.
#[test]
fn a_log_of_three_classes_is_refused_until_a_step_decides_between_classes() {
    use super::classes::{Class, Classes};
    use super::dataset::Dataset;
    let mut classes = Classes::go_nogo(&["go".into()], &["fail".into()]);
    classes.list.push(Class {
        name: "BEARING".into(),
        tokens: vec!["bearing".into()],
    });
    let ds = Dataset::from_scaled(&[vec![0.5], vec![-0.5], vec![0.1]], &[1, -1, -2]);
    let e = super::read::checked_classes(Path::new("three.csv"), ds, false, classes).unwrap_err();
    assert!(
        matches!(e, InputError::MoreClasses { classes: 3, .. }),
        "{e}"
    );
    assert!(e.to_string().contains("--nogo-labels"), "{e}");
}

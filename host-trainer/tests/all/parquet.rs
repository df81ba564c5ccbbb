//! Parquet logs, as databases and data lakes export them, must read as the same log in CSV
//! does: unit for unit, reading for reading, label for label, line for line.
//!
//! Outside reference: every Parquet file here is written by pyarrow (the Apache Arrow
//! project's Python library, from PyPI), with the column types, codecs and row-group sizes
//! a plant's exports have; the CSV beside it is written by Python's `csv` module from the
//! same values. Linegate writes neither. Without pyarrow each test prints a loud SKIPPED
//! line (and fails under CI=true).

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::common::{exits, linegate, write};
use host_trainer::ingest::dataset::Dataset;
use host_trainer::ingest::sheet::ChannelSheet;
use host_trainer::ingest::{LogOptions, ScaleFrom, read};

/// Runs a Python script with pyarrow; `false` (and a loud SKIPPED) without it.
fn pyarrow(script: &str, args: &[&Path]) -> bool {
    let out = Command::new("python3")
        .arg("-c")
        .arg(script)
        .args(args)
        .output();
    match out {
        Ok(o) if o.status.success() => true,
        Ok(o) if String::from_utf8_lossy(&o.stderr).contains("No module named 'pyarrow'") => {
            skipped()
        }
        Ok(o) => panic!(
            "the pyarrow script failed:\n{}",
            String::from_utf8_lossy(&o.stderr)
        ),
        Err(_) => skipped(),
    }
}

fn skipped() -> bool {
    eprintln!(
        "\n======== SKIPPED: python3 with pyarrow is not installed (pip install pyarrow) ========\n"
    );
    assert!(
        std::env::var("CI").as_deref() != Ok("true"),
        "pyarrow is required under CI"
    );
    false
}

/// The log both forms are made from: 3,000 units × 5 channels with three decimals, unit
/// ids, ISO timestamps and GO / NO-GO labels, some readings negative. Written by Python's
/// `csv` module with a seeded random generator; a unit's verdict is a fixed linear rule.
const MAKE_CSV: &str = r#"
import csv, random, sys, datetime
rng = random.Random(20261202)
t0 = datetime.datetime(2026, 11, 30, 6, 0, 0)
with open(sys.argv[1], "w", newline="") as f:
    w = csv.writer(f)
    w.writerow(["unit_id", "timestamp", "ch0", "ch1", "ch2", "ch3", "ch4", "label"])
    for i in range(3000):
        x = [round(rng.uniform(-50, 950), 3) for _ in range(5)]
        s = x[0] - 0.7 * x[1] + 0.3 * x[2] - x[3] + 0.5 * x[4] - 100
        t = (t0 + datetime.timedelta(seconds=37 * i)).isoformat()
        w.writerow(["SN%05d" % i, t] + ["%.3f" % v for v in x] + ["GO" if s > 0 else "NO-GO"])
"#;

const SHEET: &str = "[[channel]]\nname = \"ch0\"\nmin = -100.0\nmax = 1000.0\nlsb = 0.001\n\
[[channel]]\nname = \"ch1\"\nmin = -100.0\nmax = 1000.0\nlsb = 0.001\n\
[[channel]]\nname = \"ch2\"\nmin = -100.0\nmax = 1000.0\nlsb = 0.001\n\
[[channel]]\nname = \"ch3\"\nmin = -100.0\nmax = 1000.0\nlsb = 0.001\n\
[[channel]]\nname = \"ch4\"\nmin = -100.0\nmax = 1000.0\nlsb = 0.001\n";

/// Writes `log.csv` and the Parquet variants of it (name, how pyarrow wrote it).
fn variants(d: &Path) -> Option<(PathBuf, Vec<(PathBuf, &'static str)>)> {
    let csv = d.join("log.csv");
    if !pyarrow(MAKE_CSV, &[&csv]) {
        return None;
    }
    // Each variant is the same table with other storage choices, as different writers and
    // settings produce them.
    let script = r#"
import sys, decimal
import pyarrow as pa, pyarrow.csv as pc, pyarrow.parquet as pq, pyarrow.compute as c
src, out = sys.argv[1], sys.argv[2]
t = pc.read_csv(src, convert_options=pc.ConvertOptions(column_types={"timestamp": pa.string()}))
chans = ["ch%d" % i for i in range(5)]
def with_types(t, f):
    cols = [f(n, t[n]) if n in chans else t[n] for n in t.column_names]
    return pa.table(cols, names=t.column_names)
pq.write_table(t, out + "/defaults.parquet")
pq.write_table(t, out + "/zstd-groups.parquet", compression="zstd", row_group_size=777)
pq.write_table(t, out + "/gzip-v2.parquet", compression="gzip", data_page_version="2.0",
               use_dictionary=False, row_group_size=1000)
pq.write_table(t, out + "/lz4-plain.parquet", compression="lz4", use_dictionary=False)
pq.write_table(t, out + "/none.parquet", compression="none")
pq.write_table(with_types(t, lambda n, a: c.cast(a, pa.float32())), out + "/float32.parquet")
pq.write_table(with_types(t, lambda n, a: pa.array(
    [None if v is None else decimal.Decimal("%.3f" % v) for v in a.to_pylist()],
    type=pa.decimal128(9, 3))), out + "/decimal.parquet")
pq.write_table(with_types(t, lambda n, a: c.cast(a, pa.string())), out + "/text.parquet")
d = t.set_column(t.column_names.index("label"), "label",
                 c.dictionary_encode(t["label"]))
d = d.set_column(d.column_names.index("timestamp"), "timestamp",
                 c.strptime(d["timestamp"], format="%Y-%m-%dT%H:%M:%S", unit="s"))
pq.write_table(d, out + "/dictionary-label-timestamp.parquet")
pq.write_table(t.select(["label", "ch4", "ch3", "unit_id", "ch2", "ch1", "ch0", "timestamp"]),
               out + "/reordered.parquet", row_group_size=100)
"#;
    assert!(pyarrow(script, &[&csv, d]));
    let names = [
        ("defaults.parquet", "pyarrow defaults (snappy, dictionary)"),
        ("zstd-groups.parquet", "zstd, 777-row groups"),
        ("gzip-v2.parquet", "gzip, data page v2, no dictionary"),
        ("lz4-plain.parquet", "lz4, plain encoding"),
        ("none.parquet", "uncompressed"),
        ("float32.parquet", "channels as 32-bit floats"),
        ("decimal.parquet", "channels as decimal(9, 3)"),
        ("text.parquet", "channels as text"),
        (
            "dictionary-label-timestamp.parquet",
            "dictionary-encoded label, timestamp type",
        ),
        (
            "reordered.parquet",
            "columns in another order, 100-row groups",
        ),
    ];
    Some((
        csv,
        names.iter().map(|(f, what)| (d.join(f), *what)).collect(),
    ))
}

/// The same units with the same readings, channel by channel by name (a file may hold its
/// columns in another order; the channels then follow that order, as in a text log).
fn same_units(a: &Dataset, b: &Dataset, what: &str) {
    assert_eq!(a.len(), b.len(), "{what}: unit count");
    assert_eq!(a.labels, b.labels, "{what}: labels");
    assert_eq!(a.lines, b.lines, "{what}: lines");
    for i in 0..a.len() {
        assert_eq!(a.unit_ids.get(i), b.unit_ids.get(i), "{what}: unit id {i}");
    }
    assert_eq!(a.dim(), b.dim(), "{what}: channels");
    for (j, s) in a.scales.iter().enumerate() {
        let k = b
            .scales
            .iter()
            .position(|t| t.name == s.name)
            .unwrap_or_else(|| panic!("{what}: no channel {}", s.name));
        assert_eq!(s, &b.scales[k], "{what}: scaling of {}", s.name);
        for i in 0..a.len() {
            assert_eq!(
                a.raw_row(i)[j],
                b.raw_row(i)[k],
                "{what}: unit {i}, channel {}",
                s.name
            );
        }
    }
}

#[test]
fn parquet_written_by_pyarrow_reads_as_the_csv_unit_for_unit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let Some((csv, forms)) = variants(d) else {
        return;
    };
    let sheet_path = write(d, "sheet.toml", SHEET.as_bytes());
    let sheet = ChannelSheet::read(&sheet_path).unwrap();
    let opts = LogOptions::default();
    let reference = read(&[csv.to_path_buf()], &opts, ScaleFrom::Sheet(&sheet)).unwrap();
    assert_eq!(reference.len(), 3000);
    let observed = read(&[csv.to_path_buf()], &opts, ScaleFrom::Observed).unwrap();
    for (path, what) in &forms {
        let ds = read(&[path.to_path_buf()], &opts, ScaleFrom::Sheet(&sheet))
            .unwrap_or_else(|e| panic!("{what}: {e}"));
        same_units(&reference, &ds, what);
        // Observed scaling sees the same minima and maxima.
        let ds = read(&[path.to_path_buf()], &opts, ScaleFrom::Observed).unwrap();
        same_units(&observed, &ds, &format!("{what}, observed scaling"));
        // The file hashed is the Parquet file itself.
        assert_eq!(
            ds.sha256,
            host_trainer::digest::sha256_hex(&std::fs::read(path).unwrap())
        );
    }
    // Timestamps, for a holdout split by time: the ISO text of a timestamp column too.
    let opts = LogOptions {
        keep_times: true,
        ..LogOptions::default()
    };
    let times = read(&[csv.to_path_buf()], &opts, ScaleFrom::Sheet(&sheet)).unwrap();
    for (path, what) in &forms {
        let ds = read(&[path.to_path_buf()], &opts, ScaleFrom::Sheet(&sheet)).unwrap();
        for i in [0, 1, 1499, 2999] {
            assert_eq!(times.times.get(i), ds.times.get(i), "{what}: timestamp {i}");
        }
        assert_eq!(
            times.split_after("2026-11-30T20:00:00"),
            ds.split_after("2026-11-30T20:00:00"),
            "{what}"
        );
    }
}

/// ADC counts stored as integers: with a sheet whose lsb is 1 and zero 0, each raw reading
/// is the stored integer itself, for every integer width.
#[test]
fn integer_columns_are_raw_counts_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let script = r#"
import sys, random, csv
import pyarrow as pa, pyarrow.parquet as pq
rng = random.Random(7)
n = 2000
cols = {
  "i8": (pa.int8(), [rng.randint(-128, 127) for _ in range(n)]),
  "u8": (pa.uint8(), [rng.randint(0, 255) for _ in range(n)]),
  "i16": (pa.int16(), [rng.randint(-32768, 32767) for _ in range(n)]),
  "u16": (pa.uint16(), [rng.randint(0, 65535) for _ in range(n)]),
  "i32": (pa.int32(), [rng.randint(-10**9, 10**9) for _ in range(n)]),
  "i64": (pa.int64(), [rng.randint(-10**9, 10**9) for _ in range(n)]),
}
labels = ["PASS" if (cols["i16"][1][k] > 0) else "FAIL" for k in range(n)]
t = pa.table({k: pa.array(v, type=ty) for k, (ty, v) in cols.items()} | {"result": labels})
pq.write_table(t, sys.argv[1] + "/counts.parquet", row_group_size=300)
with open(sys.argv[1] + "/counts.csv", "w", newline="") as f:
    w = csv.writer(f)
    names = list(cols)
    w.writerow(names + ["result"])
    for k in range(n):
        w.writerow([cols[c][1][k] for c in names] + [labels[k]])
"#;
    if !pyarrow(script, &[d]) {
        return;
    }
    let mut sheet = String::new();
    for (name, lo, hi) in [
        ("i8", -128.0, 127.0),
        ("u8", 0.0, 255.0),
        ("i16", -32768.0, 32767.0),
        ("u16", 0.0, 65535.0),
        // Raw readings stay within ±2^30, the largest range a channel may declare.
        ("i32", -1e9, 1e9),
        ("i64", -1e9, 1e9),
    ] {
        sheet.push_str(&format!(
            "[[channel]]\nname = \"{name}\"\nmin = {lo:.1}\nmax = {hi:.1}\nlsb = 1.0\n"
        ));
    }
    let sheet_path = write(d, "counts.toml", sheet.as_bytes());
    let sheet = ChannelSheet::read(&sheet_path).unwrap();
    let opts = LogOptions::default();
    let pq = read(&[d.join("counts.parquet")], &opts, ScaleFrom::Sheet(&sheet)).unwrap();
    let csv = read(&[d.join("counts.csv")], &opts, ScaleFrom::Sheet(&sheet)).unwrap();
    same_units(&csv, &pq, "integer columns");
    // The raw count is the integer in the CSV's text, parsed here without Linegate.
    let text = std::fs::read_to_string(d.join("counts.csv")).unwrap();
    for (i, line) in text.lines().skip(1).enumerate() {
        let ints: Vec<i32> = line
            .split(',')
            .take(6)
            .map(|c| c.parse().unwrap())
            .collect();
        assert_eq!(pq.raw_row(i), ints.as_slice(), "row {i}");
    }
}

/// Errors name the file, the row group, the row and the column, for each kind of bad cell;
/// under --skip-bad-rows they are counted as in a text log.
#[test]
fn bad_cells_are_named_by_row_group_row_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let script = r#"
import sys, math
import pyarrow as pa, pyarrow.parquet as pq
n = 2000
a = [float(i % 97) for i in range(n)]
b = [float(i % 89) for i in range(n)]
s = ["%d" % (i % 13) for i in range(n)]
lab = ["GO" if a[i] > 48 else "NO-GO" for i in range(n)]
def write(name, a=a, b=b, s=s, lab=lab):
    t = pa.table({"a": pa.array(a, pa.float64()), "b": pa.array(b, pa.float64()),
                  "s": pa.array(s, pa.string()), "label": pa.array(lab, pa.string())})
    pq.write_table(t, sys.argv[1] + "/" + name, row_group_size=500)
write("good.parquet")
write("null.parquet", b=b[:1234] + [None] + b[1235:])
write("nan.parquet", a=a[:1700] + [math.nan] + a[1701:])
write("text.parquet", s=s[:3] + ["12 volts"] + s[4:])
write("blank.parquet", s=s[:600] + ["  "] + s[601:])
write("label.parquet", lab=lab[:999] + ["MAYBE"] + lab[1000:])
write("nolabel.parquet", lab=lab[:10] + [None] + lab[11:])
pq.write_table(pa.table({"a": pa.array(a), "v": pa.array([[1.0, 2.0]] * n),
                         "label": pa.array(lab)}), sys.argv[1] + "/list.parquet")
"#;
    if !pyarrow(script, &[d]) {
        return;
    }
    let check = |file: &str, code: i32, extra: &[&str]| {
        let mut args = vec!["check", file];
        args.extend_from_slice(extra);
        exits(&linegate(&args, d), code)
    };
    check("good.parquet", 0, &[]);
    let cases = [
        (
            "null.parquet",
            "row group 2, row 234 (row 1234 of the file; counted from 0), column 'b': the cell is empty; fill in the reading, leave the column out with --ignore b",
        ),
        (
            "nan.parquet",
            "row group 3, row 200 (row 1700 of the file; counted from 0), column 'a': 'NaN' is not a finite reading",
        ),
        (
            "text.parquet",
            "row group 0, row 3 (row 3 of the file; counted from 0), column 's': '12 volts' is not a number",
        ),
        (
            "blank.parquet",
            "row group 1, row 100 (row 600 of the file; counted from 0), column 's': the cell is empty",
        ),
        (
            "label.parquet",
            "row group 1, row 499 (row 999 of the file; counted from 0), column 'label': unknown label 'MAYBE'",
        ),
        (
            "nolabel.parquet",
            "row group 0, row 10 (row 10 of the file; counted from 0), column 'label': the cell is empty; a unit needs its verdict",
        ),
    ];
    for (file, want) in cases {
        let err = check(file, 2, &[]);
        assert!(err.contains(file), "{file}: names the file: {err}");
        assert!(err.contains(want), "{file}: wanted '{want}' in: {err}");
        // Skipped and counted instead, like a bad row of a text log.
        let o = linegate(&["check", file, "--skip-bad-rows", "--json"], d);
        exits(&o, 0);
        let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        assert_eq!(j["units"], 1999, "{file}: one row skipped");
    }
    let err = check("list.parquet", 2, &[]);
    assert!(
        err.contains("column 'v' holds List") && err.contains("--ignore v"),
        "{err}"
    );
    check("list.parquet", 0, &["--ignore", "v"]);
}

/// The whole path from a Parquet log: train, audit and replay give what the CSV gives.
#[test]
fn train_and_replay_from_parquet_match_csv() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let Some((_, forms)) = variants(d) else {
        return;
    };
    write(d, "sheet.toml", SHEET.as_bytes());
    let pq = forms[1].0.to_str().unwrap().to_string();
    for (log, model) in [("log.csv", "csv.json"), (pq.as_str(), "pq.json")] {
        exits(
            &linegate(
                &[
                    "-q",
                    "train",
                    log,
                    "--sheet",
                    "sheet.toml",
                    "--folds",
                    "0",
                    "-o",
                    model,
                ],
                d,
            ),
            0,
        );
    }
    let model = |p: &str| -> serde_json::Value {
        let mut v: serde_json::Value =
            serde_json::from_slice(&std::fs::read(d.join(p)).unwrap()).unwrap();
        // Provenance names the file and its hash; everything else must agree.
        v["provenance"]["training_log"] = serde_json::Value::Null;
        v["provenance"]["command_line"] = serde_json::Value::Null;
        v["provenance"]["settings"] = serde_json::Value::Null;
        v["model_id"] = serde_json::Value::Null;
        v["content_sha256"] = serde_json::Value::Null;
        v
    };
    assert_eq!(model("csv.json"), model("pq.json"));
    // Released from the Parquet log, the device's lines are the same for either form.
    exits(
        &linegate(
            &[
                "-q",
                "pack",
                "--model",
                "pq.json",
                "--train",
                &pq,
                "-o",
                "m.lgmb",
                // The forms must agree; whether this model passes the gates is not the point.
                "--override-audit",
            ],
            d,
        ),
        0,
    );
    let replay = |log: &str| {
        let o = linegate(
            &[
                "replay", "--form", "device", "--blob", "m.lgmb", "--model", "pq.json", log,
            ],
            d,
        );
        exits(&o, 0);
        o.stdout
    };
    let lines = replay("log.csv");
    assert_eq!(String::from_utf8_lossy(&lines).lines().count(), 3001);
    assert_eq!(lines, replay(&pq));
}

/// Damaged Parquet files end in an error naming the file, never in a panic or a hang.
#[test]
fn damaged_parquet_files_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let Some((_, forms)) = variants(d) else {
        return;
    };
    let good = std::fs::read(&forms[1].0).unwrap();
    let bad = d.join("bad.parquet");
    let opts = LogOptions::default();
    let mut refused = 0;
    // Truncations, and single bytes changed at spread-out places (seeded, reproducible).
    let mut cases: Vec<Vec<u8>> = [
        4usize,
        8,
        100,
        good.len() / 2,
        good.len() - 9,
        good.len() - 1,
    ]
    .iter()
    .map(|&n| good[..n].to_vec())
    .collect();
    let mut x = 0x2545_f491_4f6c_dd1du64;
    for _ in 0..200 {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        let mut v = good.clone();
        let k = (x % v.len() as u64) as usize;
        v[k] ^= 1 << (x >> 60 & 7);
        cases.push(v);
    }
    for bytes in &cases {
        std::fs::write(&bad, bytes).unwrap();
        let r = std::panic::catch_unwind(|| read(&[bad.to_path_buf()], &opts, ScaleFrom::Observed));
        match r {
            Ok(Err(e)) => {
                refused += 1;
                assert!(e.to_string().contains("bad.parquet"), "{e}");
            }
            Ok(Ok(_)) => {}
            Err(_) => panic!("a damaged Parquet file panicked the reader"),
        }
    }
    // A truncated file is always refused; most changed bytes are caught too.
    assert!(
        refused >= 6,
        "only {refused} of {} damaged files refused",
        cases.len()
    );
    std::fs::write(&bad, &good[..good.len() / 2]).unwrap();
    let err = exits(&linegate(&["check", "bad.parquet"], d), 2);
    assert!(
        err.contains("bad.parquet") && err.contains("Parquet"),
        "{err}"
    );
}

/// A page whose bytes no longer match its stored CRC-32 is refused, naming the file, the
/// row group and the column; the same file with the bit intact reads. Outside reference:
/// pyarrow writes the page checksums (`write_page_checksum=True`) and, reading with
/// `page_checksum_verification=True`, refuses the damaged file too.
#[test]
fn a_page_whose_checksum_does_not_match_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Plain (no dictionary, no compression) pages, so the values are the page's bytes: the
    // flipped bit is found by locating column b's data page and 1234.5 inside it, and turns
    // that reading into a tiny number no check of ranges would catch.
    let script = r#"
import sys, struct
import pyarrow as pa, pyarrow.parquet as pq
n = 1000
a = [float(i % 97) for i in range(n)]
b = [float(i % 89) for i in range(n)]
b[777] = 1234.5
lab = ["GO" if a[i] > 48 else "NO-GO" for i in range(n)]
t = pa.table({"a": pa.array(a), "b": pa.array(b), "label": pa.array(lab)})
good, bad = sys.argv[1] + "/good.parquet", sys.argv[1] + "/bad.parquet"
pq.write_table(t, good, compression="NONE", use_dictionary=False, write_page_checksum=True)
col = pq.ParquetFile(good).metadata.row_group(0).column(1)
assert col.path_in_schema == "b"
start = col.data_page_offset
data = bytearray(open(good, "rb").read())
# The page header's statistics hold 1234.5 too (as the maximum); the value is last.
k = data.rindex(struct.pack("<d", 1234.5), start, start + col.total_compressed_size)
data[k + 7] ^= 0x40
open(bad, "wb").write(bytes(data))
pq.read_table(good, page_checksum_verification=True)
assert pq.read_table(bad)["b"][777].as_py() != 1234.5, "the flipped bit is in b's values"
try:
    pq.read_table(bad, page_checksum_verification=True)
    sys.exit("pyarrow read the damaged page")
except OSError as e:
    assert "checksum" in str(e).lower() or "crc" in str(e).lower(), e
"#;
    if !pyarrow(script, &[d]) {
        return;
    }
    exits(&linegate(&["check", "good.parquet"], d), 0);
    let err = exits(&linegate(&["check", "bad.parquet"], d), 2);
    for want in ["bad.parquet", "row group 0, column 'b'", "checksum"] {
        assert!(err.contains(want), "wanted '{want}' in: {err}");
    }
}

/// An integer cell beyond the largest reading is named as such, not as "not finite"; one
/// above 2^53, which no 64-bit float holds exactly, says so too. pyarrow writes the int64
/// columns.
#[test]
fn integers_beyond_the_largest_reading_are_named_as_such() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let script = r#"
import sys
import pyarrow as pa, pyarrow.parquet as pq
n = 100
lab = ["GO" if i % 2 else "NO-GO" for i in range(n)]
def write(name, big):
    a = [i for i in range(n)]
    a[42] = big
    pq.write_table(pa.table({"a": pa.array(a, pa.int64()), "b": pa.array([float(i % 7) for i in range(n)]),
                             "label": pa.array(lab)}), sys.argv[1] + "/" + name)
write("inexact.parquet", 2**53 + 1)
write("large.parquet", 2 * 10**15)
"#;
    if !pyarrow(script, &[d]) {
        return;
    }
    let at = "row group 0, row 42 (row 42 of the file; counted from 0), column 'a': ";
    let err = exits(&linegate(&["check", "inexact.parquet"], d), 2);
    for want in [
        "inexact.parquet: ",
        at,
        "9007199254740993 is beyond the largest reading",
        "cannot even be represented exactly as a 64-bit float",
    ] {
        assert!(err.contains(want), "wanted '{want}' in: {err}");
    }
    let err = exits(&linegate(&["check", "large.parquet"], d), 2);
    assert!(
        err.contains(at) && err.contains("2000000000000000 is beyond the largest reading"),
        "{err}"
    );
    assert!(!err.contains("exactly") && !err.contains("finite"), "{err}");
}

/// Integer and boolean label columns have no default class: refused naming the row and
/// column and how to state the mapping, and read as stated once it is.
#[test]
fn integer_and_boolean_labels_need_a_stated_mapping() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let script = r#"
import sys
import pyarrow as pa, pyarrow.parquet as pq
a = [float(i % 7) for i in range(40)]
b = [float(i % 5) for i in range(40)]
good = [x > 3 for x in a]
pq.write_table(pa.table({"a": a, "b": b, "label": pa.array([int(g) for g in good], pa.int8())}),
               sys.argv[1] + "/int.parquet")
pq.write_table(pa.table({"a": a, "b": b, "label": pa.array(good, pa.bool_())}),
               sys.argv[1] + "/bool.parquet")
"#;
    if !pyarrow(script, &[d]) {
        return;
    }
    for (file, one, zero) in [("int.parquet", "1", "0"), ("bool.parquet", "true", "false")] {
        let err = exits(&linegate(&["check", file], d), 2);
        let want = format!(
            "row group 0, row 0 (row 0 of the file; counted from 0), column 'label': label '{zero}': a numeric or boolean label needs a stated mapping: pass --go-labels {one} --nogo-labels {zero}"
        );
        assert!(err.contains(file) && err.contains(&want), "{file}: {err}");
        let o = linegate(
            &[
                "check",
                file,
                "--go-labels",
                one,
                "--nogo-labels",
                zero,
                "--json",
            ],
            d,
        );
        exits(&o, 0);
        let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        assert_eq!(j["units"], 40, "{file}");
    }
}

/// Column names compare without regard to case in a Parquet schema as in a CSV header:
/// `a` and `A` are one name twice, refused naming both.
#[test]
fn names_that_differ_only_in_case_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let script = r#"
import sys
import pyarrow as pa, pyarrow.parquet as pq
pq.write_table(pa.table({"a": [1.0, 2.0, 3.0, 4.0], "A": [2.0, 1.0, 4.0, 3.0],
                         "label": ["GO", "GO", "NO-GO", "NO-GO"]}), sys.argv[1] + "/case.parquet")
"#;
    if !pyarrow(script, &[d]) {
        return;
    }
    let err = exits(&linegate(&["check", "case.parquet"], d), 2);
    assert!(
        err.contains("case.parquet")
            && err.contains("columns 'a' and 'A' have the same name (column names compare without regard to case)"),
        "{err}"
    );
}

/// A file whose pages are damaged in two columns gives the same error every time it is
/// read, naming the first damaged column in column order: the columns decode in parallel,
/// and which failed first in time must not decide the message. (A case the `parquet_log`
/// fuzz target found: two reads named different columns.)
#[test]
fn a_file_damaged_in_two_columns_gives_one_error_every_time() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../tests/malformed/parquet-two-damaged-columns.parquet");
    let opts = LogOptions {
        progress: false,
        ..LogOptions::default()
    };
    let errors: std::collections::BTreeSet<String> = (0..40)
        .map(
            |_| match read(&[path.to_path_buf()], &opts, ScaleFrom::Observed) {
                Ok(_) => panic!("a damaged file was read"),
                Err(e) => e.to_string(),
            },
        )
        .collect();
    assert_eq!(errors.len(), 1, "{errors:#?}");
}

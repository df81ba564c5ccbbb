//! What `linegate compare` writes: the summary it prints, the change list as CSV, and the
//! report section a reviewer signs (Markdown).

use super::compare::{Change, Comparison, Side, UnitSide};
use super::score::Outcome;
use crate::confidence::percent;

/// The change list's CSV columns, in order.
pub const CHANGES_HEADER: [&str; 16] = [
    "file",
    "line",
    "index",
    "unit_id",
    "timestamp",
    "label",
    "verdict_a",
    "score_a",
    "fault_a",
    "margin_a",
    "verdict_b",
    "score_b",
    "fault_b",
    "margin_b",
    "shift",
    "transition",
];

/// `GO→NO-GO`.
pub fn arrow(from: Outcome, to: Outcome) -> String {
    format!("{}→{}", from.as_str(), to.as_str())
}

fn opt<T: ToString>(v: Option<T>) -> String {
    v.map_or(String::new(), |v| v.to_string())
}

/// B's margin minus A's, when both decided.
fn shift(c: &Change) -> Option<f64> {
    Some(c.b.margin? - c.a.margin?)
}

/// Every changed unit as CSV (RFC 4180, by the csv crate), under [`CHANGES_HEADER`].
///
/// # Errors
/// None in practice (writing into memory); the csv crate's error type.
pub fn changes_csv(c: &Comparison) -> Result<String, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(CHANGES_HEADER)?;
    let side = |s: &UnitSide| {
        [
            s.outcome.as_str().to_string(),
            opt(s.score),
            opt(s.fault.map(|f| f.word())),
            opt(s.margin),
        ]
    };
    for ch in &c.changes {
        let mut row = vec![
            ch.file.clone(),
            ch.line.to_string(),
            ch.index.to_string(),
            ch.unit_id.clone().unwrap_or_default(),
            ch.timestamp.clone().unwrap_or_default(),
            ch.label.unwrap_or("").to_string(),
        ];
        row.extend(side(&ch.a));
        row.extend(side(&ch.b));
        row.push(opt(shift(ch)));
        row.push(arrow(ch.a.outcome, ch.b.outcome));
        w.write_record(&row)?;
    }
    let bytes = w.into_inner().map_err(|e| e.into_error())?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

/// A release in one line: model id, blob id (or how it was quantised), key.
fn release_line(s: &Side) -> String {
    let blob = s.blob_id.as_ref().map_or_else(
        || {
            format!(
                "no blob: the float model quantised plainly ({}-bit inputs, {}-bit weights)",
                s.input_bits, s.weight_bits
            )
        },
        |b| format!("blob {b}"),
    );
    let key = s
        .key_id
        .as_ref()
        .map_or(String::new(), |k| format!(", signed by key {k}"));
    format!("model {} {blob}{key} ({})", s.model_id, s.source)
}

/// A score and its outcome: `NO-GO -1234`, `FAULT ch0`.
fn outcome_text(s: &UnitSide) -> String {
    match (s.score, s.fault) {
        (_, Some(f)) => format!("FAULT {}", f.word()),
        (Some(v), None) => format!("{} {v}", s.outcome.as_str()),
        (None, None) => s.outcome.as_str().to_string(),
    }
}

fn rate_cells(r: &crate::confidence::Rate) -> String {
    format!(
        "{} | {} % | [{} %, {} %] | {} %",
        r.count,
        percent(r.rate),
        percent(r.low),
        percent(r.high),
        percent(r.upper)
    )
}

/// The gate's verdict in words.
pub fn gate_text(c: &Comparison) -> String {
    let allowed = c
        .gate
        .allowed
        .map_or("any allowed".to_string(), |n| format!("{n} allowed"));
    let recheck = match c.gate.recheck_to_go {
        0 => String::new(),
        n => format!("; {n} RECHECK→GO (passed without the retest A asked for: review them)"),
    };
    format!(
        "{}: {} NO-GO→GO change{} (FAULT→GO included; {allowed}){recheck}",
        if c.gate.passed { "PASSED" } else { "FAILED" },
        c.gate.nogo_to_go,
        if c.gate.nogo_to_go == 1 { "" } else { "s" }
    )
}

/// The summary `compare` prints: the releases, the counts with bounds, the shift, the
/// first `show` changed units (the rest said, with where they are), the gate.
pub fn summary(c: &Comparison, show: usize) -> String {
    let mut out = format!(
        "A (in use):     {}\nB (candidate):  {}\nlogs: {} file{}, {} units\n\n",
        release_line(&c.a),
        release_line(&c.b),
        c.logs.len(),
        if c.logs.len() == 1 { "" } else { "s" },
        c.units
    );
    let conf = percent(c.changed.confidence);
    out.push_str(&format!(
        "changed: {} of {} units ({} %, {conf} % interval [{} %, {} %])\n",
        c.changed.count,
        c.units,
        percent(c.changed.rate),
        percent(c.changed.low),
        percent(c.changed.high)
    ));
    for t in &c.transitions {
        out.push_str(&format!(
            "  {:<18} {:>8}  ({} %, {conf} % interval [{} %, {} %], upper {} %)\n",
            arrow(t.from, t.to),
            t.rate.count,
            percent(t.rate.rate),
            percent(t.rate.low),
            percent(t.rate.high),
            percent(t.rate.upper)
        ));
    }
    out.push_str(&shift_text(c));
    out.push('\n');
    if !c.changes.is_empty() {
        out.push_str("\nchanged units (file:line  unit  A → B  margin shift):\n");
        for ch in c.changes.iter().take(show) {
            out.push_str(&format!(
                "  {}:{}  {}  {} → {}  {}\n",
                ch.file,
                ch.line,
                ch.unit_id
                    .as_deref()
                    .map_or("-".into(), crate::error::shown),
                outcome_text(&ch.a),
                outcome_text(&ch.b),
                shift(ch).map_or("-".into(), |s| format!("{s:+.6}"))
            ));
        }
        if c.changes.len() > show {
            out.push_str(&format!(
                "  … and {} more (every one in --changes, --report and --json; --show N lists more here)\n",
                c.changes.len() - show
            ));
        }
    }
    out.push_str(&format!("\ngate: {}\n", gate_text(c)));
    out
}

fn shift_text(c: &Comparison) -> String {
    match &c.shift {
        Some(s) => format!(
            "margin shift B − A (float-score units, score/scale − threshold; {} units decided by both): min {:+.6}, median {:+.6}, max {:+.6}",
            s.units, s.min, s.median, s.max
        ),
        None => "margin shift: no unit decided by both releases".into(),
    }
}

/// A Markdown table cell: `|` escaped, control characters shown escaped.
fn cell(text: &str) -> String {
    crate::error::shown(text).replace('|', "\\|")
}

/// The report section a reviewer signs: what was compared (model ids, blob ids, log
/// SHA-256s), the counts with bounds, the shift, every changed unit, the gate's verdict,
/// and lines for the reviewer.
pub fn report(c: &Comparison) -> String {
    let mut out = String::from("## Change control\n\n");
    out.push_str("| | release A (in use) | release B (candidate) |\n|---|---|---|\n");
    let row = |name: &str, f: &dyn Fn(&Side) -> String| {
        format!("| {name} | {} | {} |\n", cell(&f(&c.a)), cell(&f(&c.b)))
    };
    out.push_str(&row("files", &|s| s.source.clone()));
    out.push_str(&row("model id", &|s| s.model_id.clone()));
    out.push_str(&row("blob id", &|s| {
        s.blob_id
            .clone()
            .unwrap_or_else(|| "none (quantised plainly)".into())
    }));
    out.push_str(&row("key id", &|s| {
        s.key_id.clone().unwrap_or_else(|| "unsigned".into())
    }));
    out.push_str(&row("word lengths", &|s| {
        format!("{}-bit inputs, {}-bit weights", s.input_bits, s.weight_bits)
    }));
    out.push_str(&row("NO-GO at or below / GO at or above", &|s| {
        format!("{} / {}", s.nogo_max, s.go_min)
    }));
    out.push_str(&row("scale (accumulator units per score unit)", &|s| {
        format!("{}", s.scale)
    }));
    out.push_str(&format!(
        "\nLogs ({} units):\n\n| file | SHA-256 |\n|---|---|\n",
        c.units
    ));
    for l in &c.logs {
        out.push_str(&format!("| {} | `{}` |\n", cell(&l.path), l.sha256));
    }
    let conf = percent(c.changed.confidence);
    out.push_str(&format!(
        "\n### Counts\n\nExact Clopper–Pearson bounds at {conf} % among all {} units.\n\n| change | units | rate | {conf} % interval | one-sided upper |\n|---|---|---|---|---|\n",
        c.units
    ));
    out.push_str(&format!("| any | {} |\n", rate_cells(&c.changed)));
    for t in &c.transitions {
        out.push_str(&format!(
            "| {} | {} |\n",
            arrow(t.from, t.to),
            rate_cells(&t.rate)
        ));
    }
    out.push_str(&format!("\n{}.\n", shift_text(c)));
    out.push_str(&format!("\n### Changed units ({})\n\n", c.changes.len()));
    if c.changes.is_empty() {
        out.push_str("None: every unit has the same outcome under both releases.\n");
    } else {
        out.push_str("| file | line | unit | timestamp | label | A | B | margin shift |\n|---|---|---|---|---|---|---|---|\n");
        for ch in &c.changes {
            out.push_str(&format!(
                "| {} | {} | {} | {} | {} | {} | {} | {} |\n",
                cell(&ch.file),
                ch.line,
                cell(ch.unit_id.as_deref().unwrap_or("")),
                cell(ch.timestamp.as_deref().unwrap_or("")),
                ch.label.unwrap_or(""),
                outcome_text(&ch.a),
                outcome_text(&ch.b),
                shift(ch).map_or(String::new(), |s| format!("{s:+.6}"))
            ));
        }
    }
    out.push_str(&format!(
        "\n### Gate\n\n{}\n\n### Review\n\nReviewed by: \n\nDate: \n\nDecision (accept release B / keep release A): \n",
        gate_text(c)
    ));
    out
}

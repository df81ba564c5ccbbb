//! The units CSV (`audit --units`): every unit of the audited logs, one row each,
//! written as it is produced so that millions of units never sit in memory as text.

use std::io::Write;

use super::audit_part::unit_row;
use super::quantise::Quantised;
use crate::ingest::dataset::Dataset;
use crate::train::float_model::FloatModel;

/// A CSV cell: quoted when it holds a comma or a quote.
pub(crate) fn csv_cell(t: &str) -> String {
    if t.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", t.replace('"', "\"\""))
    } else {
        t.to_string()
    }
}

/// Writes every unit of the logs as CSV: model id, log, line, unit, label, float score and
/// verdict, fixed score and verdict (by the device kernel), margin in LSB and along each
/// channel in its unit, and the file the unit came from.
///
/// # Errors
/// The first write error.
pub fn write_units_csv(
    out: &mut dyn Write,
    q: &Quantised,
    fm: &FloatModel,
    sets: &[(&str, &Dataset)],
) -> std::io::Result<()> {
    write!(
        out,
        "model_id,log,line,unit,label,float_score,float_verdict,fixed_score,fixed_verdict,margin_lsb"
    )?;
    for c in &fm.channels {
        write!(out, ",margin_{}", c.name)?;
    }
    writeln!(out, ",file")?;
    for (name, ds) in sets {
        for i in 0..ds.len() {
            let r = unit_row(name, q, fm, ds, i);
            let unit = csv_cell(&r.unit);
            write!(
                out,
                "{},{},{},{},{},{},{},",
                fm.model_id, r.set, r.line, unit, r.label, r.float_score, r.float_verdict
            )?;
            if let Some(v) = r.fixed_score {
                write!(out, "{v}")?;
            }
            write!(out, ",{},{}", r.fixed_verdict, r.margin_lsb)?;
            for m in &r.margin_physical {
                write!(out, ",{m}")?;
            }
            writeln!(out, ",{}", csv_cell(&ds.file_of(i).display().to_string()))?;
        }
    }
    Ok(())
}

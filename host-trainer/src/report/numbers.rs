//! How the report writes numbers: accumulator figures in LSB, model scores to six digits.

/// A count of LSB: one decimal; from a million on also its order of magnitude, since
/// 959809745.5 is hard to read and a wide accumulator makes such margins common.
pub(super) fn lsb(v: f64) -> String {
    if v.abs() < 1e6 || !v.is_finite() {
        format!("{v:.1}")
    } else {
        let e = v.abs().log10().floor() as i32;
        format!("{v:.1} (≈ {:.2}·10^{e})", v / 10f64.powi(e))
    }
}

/// A score in model units: six significant digits at any scale, trailing zeros dropped.
pub(super) fn score(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    if !v.is_finite() {
        return format!("{v}");
    }
    let trim = |t: String| {
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t
        }
    };
    let e = v.abs().log10().floor() as i32;
    if (-4..9).contains(&e) {
        trim(format!("{v:.*}", (5 - e).max(0) as usize))
    } else {
        let t = format!("{v:.5e}");
        let (m, x) = t.split_once('e').unwrap_or((&t, "0"));
        format!("{}e{x}", trim(m.to_string()))
    }
}

/// Table cells may hold text from a log (unit ids): a pipe would end the cell.
pub(super) fn cell(t: &str) -> String {
    t.replace('|', "\\|")
}

//! The device's own score lines (what the device prints, and `linegate replay` with it):
//! first `# model <model id> blob <blob id>[ key <key id>]`, then per unit in order
//! `<index> GO|NO-GO|RECHECK <score>` or `<index> FAULT ch<c>|signal<k>|count|other`.
//! Each line is checked: indices count up from 0, the verdict is the one the audited
//! thresholds give the score (else the lines are of another model), the model line names the
//! audited model and blob.

use std::path::Path;

use shared_model::{Decision, FieldFault, Verdict};

use crate::error::InputError;
use crate::field::run::FieldRun;

/// Largest lines file read.
pub const MAX_LINES_FILE: u64 = 1 << 32;

/// Reads the lines of `path` into `run`; `model_id` and `blob_id` (hex) are the audit's.
///
/// # Errors
/// [`InputError::Format`] naming the line and column of the first line that is not a
/// device line, or the model line that names another release.
pub fn read_lines(
    path: &Path,
    model_id: &str,
    blob_id: &str,
    run: &mut FieldRun,
) -> Result<usize, InputError> {
    let text = crate::input::read_text(path, "device lines", MAX_LINES_FILE)?;
    parse(&text, model_id, blob_id, run).map_err(|(line, col, message)| InputError::Format {
        path: path.into(),
        message: format!("line {line}, column {col}: {message}"),
    })
}

/// A place and a message.
type LineError = (usize, usize, String);

/// The units of `text` into `run` (see [`read_lines`]); the number of units.
pub fn parse(
    text: &str,
    model_id: &str,
    blob_id: &str,
    run: &mut FieldRun,
) -> Result<usize, LineError> {
    let mut lines = text.lines().enumerate();
    let Some((_, first)) = lines.next() else {
        return Err((1, 1, "empty: expected `# model <id> blob <blob id>`".into()));
    };
    let words: Vec<&str> = first.split_whitespace().collect();
    match words.as_slice() {
        ["#", "model", m, "blob", b, rest @ ..] if rest.is_empty() || rest[0] == "key" => {
            if !m.eq_ignore_ascii_case(model_id) || !b.eq_ignore_ascii_case(blob_id) {
                return Err((
                    1,
                    1,
                    format!(
                        "these lines are of model {m} blob {b}; the audit is of model {model_id} blob {blob_id}"
                    ),
                ));
            }
        }
        _ => {
            return Err((
                1,
                1,
                "expected the device's first line `# model <id> blob <blob id>`".into(),
            ));
        }
    }
    let mut units = 0usize;
    for (i, line) in lines {
        let no = i + 1;
        // `replay`'s text form is the device's line, then ` # ` and what the log adds
        // (device lines hold no `#`).
        let line = line.find(" # ").map_or(line, |at| &line[..at]);
        let col = |word: &str| word.as_ptr() as usize - line.as_ptr() as usize + 1;
        let w: Vec<&str> = line.split_whitespace().collect();
        // Blank lines, and the device's other `#` lines (`# lines: …`, `# field <hex>`),
        // are not units.
        let Some(&first) = w.first() else { continue };
        if first.starts_with('#') {
            continue;
        }
        let index: usize = Some(first)
            .filter(|f| f.bytes().all(|b| b.is_ascii_digit()))
            .and_then(|f| f.parse().ok())
            .ok_or_else(|| (no, col(first), format!("'{first}' is not a unit index")))?;
        if index != units {
            return Err((
                no,
                col(first),
                format!(
                    "unit index {index} where {units} was next (lines must be whole and in order)"
                ),
            ));
        }
        match w.as_slice() {
            [_, "FAULT", what] => {
                let (channels, signals) =
                    (run.part().settings.channels, run.part().settings.signals);
                let fault = fault_of(what, channels, signals).ok_or_else(|| {
                    (
                        no,
                        col(what),
                        format!(
                            "'FAULT {what}': expected ch<channel> (below {}), signal<k> (below {}), count or other",
                            channels, signals
                        ),
                    )
                })?;
                run.faulted(fault)
            }
            [_, v, score] => {
                let verdict = match *v {
                    "GO" => Verdict::Go,
                    "NO-GO" => Verdict::NoGo,
                    "RECHECK" => Verdict::Recheck,
                    _ => {
                        return Err((
                            no,
                            col(v),
                            format!("'{v}' is not GO, NO-GO, RECHECK or FAULT"),
                        ));
                    }
                };
                let digits = score.strip_prefix('-').unwrap_or(score);
                let score: i64 = Some(score)
                    .filter(|_| !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit()))
                    .and_then(|s| s.parse().ok())
                    .ok_or_else(|| (no, col(score), format!("'{score}' is not a score")))?;
                let d = run.thresholds().decide(score);
                if d.verdict != verdict {
                    return Err((
                        no,
                        col(v),
                        format!(
                            "score {score} is {} under the audited thresholds, the line says {v}: lines of another model",
                            d.verdict.as_str()
                        ),
                    ));
                }
                run.decided(
                    &Decision {
                        verdict,
                        score,
                        class: None,
                    },
                    None,
                );
            }
            _ => {
                return Err((
                    no,
                    1,
                    "expected `<index> GO|NO-GO|RECHECK <score>` or `<index> FAULT <what>`".into(),
                ));
            }
        }
        units += 1;
    }
    Ok(units)
}

/// `ch<c>` → that channel, `signal<k>` → that signal, `count` and `other` → other; `None`
/// for a word the device does not print (or a channel or signal the model does not have).
fn fault_of(what: &str, channels: u8, signals: u8) -> Option<FieldFault> {
    let number = |s: &str| {
        Some(s)
            .filter(|s| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit()))
            .and_then(|s| s.parse::<u8>().ok())
    };
    if let Some(c) = what.strip_prefix("ch").and_then(number) {
        (c < channels).then_some(FieldFault::Channel(c))
    } else if let Some(k) = what.strip_prefix("signal").and_then(number) {
        (k < signals).then_some(FieldFault::Signal(k))
    } else {
        matches!(what, "count" | "other").then_some(FieldFault::Other)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use shared_model::Thresholds;

    fn run() -> FieldRun {
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        FieldRun::new(Default::default(), t, 2, 1, false)
    }

    #[test]
    fn lines_are_read_and_checked() {
        let mut r = run();
        let text = "# model ab blob 0000cafe\n0 GO 50 # unit=U1 line=2\n1 NO-GO -20\n2 RECHECK 0\n3 FAULT ch1\n4 FAULT signal0\n5 FAULT count\n";
        assert_eq!(parse(text, "ab", "0000cafe", &mut r), Ok(6));
        let s = &r.stats();
        assert_eq!((s.go, s.nogo, s.recheck, s.faults), (1, 1, 1, 3));
        assert_eq!(
            (s.channel_faults[1], s.signal_faults[0], s.other_faults),
            (1, 1, 1)
        );
        let err = |t: &str| parse(t, "ab", "0000cafe", &mut run()).unwrap_err();
        assert_eq!(err("# model ab blob 0000cafe\n0 GO 5\n").0, 2);
        assert_eq!(err("# model ab blob 0000cafe\n1 GO 50\n").1, 1);
        assert!(err("# model cd blob 0000cafe\n").2.contains("model cd"));
        assert_eq!(err("# model ab blob 0000cafe\n0 GO x\n").1, 6);
        // What the device does not print is refused where it stands, never counted.
        assert_eq!(err("# model ab blob 0000cafe\n+0 GO 50\n").1, 1);
        assert_eq!(err("# model ab blob 0000cafe\n0 GO +50\n").1, 6);
        assert_eq!(err("# model ab blob 0000cafe\n0 FAULT bogus\n").1, 9);
        assert_eq!(err("# model ab blob 0000cafe\n0 FAULT ch2\n").1, 9);
        assert_eq!(err("# model ab blob 0000cafe\n0 FAULT signal1\n").1, 9);
        assert_eq!(err("# model ab blob 0000cafe\n0 FAULT ch\n").1, 9);
        // The device's other lines, blank ones and a text form's tail are not units.
        let mut r = run();
        let text =
            "# model ab blob 0000cafe\n   # x\n # field 00\n\n0 GO 50\n# lines: GO=1 NO-GO=0\n";
        assert_eq!(parse(text, "ab", "0000cafe", &mut r), Ok(1));
    }
}

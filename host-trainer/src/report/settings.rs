//! The release's inputs as a reviewer checks them: the split `train` made of the training
//! log, each log's files with their digests, and every setting with its source.

use std::fmt::Write as _;

use crate::release::audit_report::AuditReport;

/// The split and the files of logs of several files, as lines of the provenance list.
pub(super) fn split_and_files(s: &mut String, r: &AuditReport) {
    if let Some(sp) = &r.split {
        let how = match (sp.fraction, sp.seed, &sp.after) {
            (Some(f), Some(seed), _) => format!(
                "a seeded, stratified {}% of each class (seed {seed})",
                (f * 100.0 * 1e6).round() / 1e6
            ),
            (_, _, Some(t)) => format!("the units with a timestamp after {t}"),
            _ => sp.method.clone(),
        };
        let _ = writeln!(
            s,
            "- split: train held out {how}; the model was trained on the other {} units of the training log, audited as \"train\", and the {} held-out units are audited as \"held-out\"",
            sp.trained_on, sp.held_out
        );
    }
    for (k, t) in r.sets.iter().enumerate() {
        // A split's held-out units come from the training log's files, listed once.
        if r.sets[..k].iter().any(|e| e.files == t.files) {
            continue;
        }
        for f in &t.files {
            let _ = writeln!(
                s,
                "  - {} file `{}`: {} units, SHA-256 `{}`",
                t.name,
                f.path.display(),
                f.units,
                f.sha256
            );
        }
    }
}

/// The "Settings" section: every setting of the run with its value and source.
pub(super) fn settings_markdown(s: &mut String, r: &AuditReport) {
    if r.settings.is_empty() {
        return;
    }
    let _ = writeln!(
        s,
        "\n## Settings\n\nEvery setting of this audit and where it came from (a flag, the project file, the model, or the default); `pack --audited` compares its own with these.\n\n| setting | value | from |\n|---|---|---|"
    );
    for st in &r.settings {
        let _ = writeln!(
            s,
            "| `{}` | {} | {} |",
            st.flag,
            super::numbers::cell(&st.value_text()),
            super::numbers::cell(&st.source)
        );
    }
}

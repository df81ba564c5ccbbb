//! The audit as Markdown: the text `audit.md` holds and `audit` prints.

use std::fmt::Write;

use crate::release::audit::{AuditReport, SweepRow};
use crate::train::float_model::FloatModel;

fn opt(v: Option<f64>) -> String {
    v.map_or("–".into(), |v| format!("{v:.1}"))
}

/// The audit as Markdown.
pub fn markdown(
    fm: &FloatModel,
    r: &AuditReport,
    sweep: Option<&(Vec<SweepRow>, Option<usize>)>,
) -> String {
    let mut s = String::new();
    let verdict = if r.passed { "PASSED" } else { "FAILED" };
    let _ = writeln!(s, "# Linegate release audit: {verdict}\n");
    let _ = writeln!(
        s,
        "- tool: linegate {}{}",
        env!("CARGO_PKG_VERSION"),
        r.command_line
            .as_ref()
            .map_or(String::new(), |c| format!("; command: `{c}`"))
    );
    let _ = writeln!(s, "- model id: `{}`", r.model_id);
    let _ = writeln!(
        s,
        "- trainer: {} (seed {}), training log `{}`",
        fm.provenance.trainer,
        fm.provenance.seed,
        fm.provenance.training_log.path.display()
    );
    let _ = writeln!(
        s,
        "- format: inputs Q{} ({}-bit), weights {}-bit with {} fractional bits, accumulator {} bits (worst case needs {}, headroom {} bits)",
        r.input_bits - 1,
        r.input_bits,
        r.weight_bits,
        r.weight_frac_bits,
        r.acc_bits,
        r.needed_bits,
        r.headroom_bits
    );
    let _ = writeln!(
        s,
        "- thresholds: NO-GO at score ≤ {}, GO at score ≥ {}; blob {} bytes",
        r.nogo_max, r.go_min, r.blob_bytes
    );
    let _ = writeln!(
        s,
        "- model file content SHA-256 `{}`; blob (as packed) SHA-256 `{}`, blob id `{}`{}",
        r.model_sha256,
        r.blob_sha256,
        r.blob_id,
        r.key_id
            .as_ref()
            .map_or(", unsigned".to_string(), |k| format!(
                ", signed with key `{k}`"
            ))
    );
    for t in &r.sets {
        let _ = writeln!(s, "- {} log `{}`, SHA-256 `{}`", t.name, t.path, t.sha256);
    }
    if r.recheck_band > 0.0 {
        let _ = writeln!(
            s,
            "- RECHECK half-band: {:.6} float score units around the threshold",
            r.recheck_band
        );
    }
    for a in &r.applied {
        let _ = writeln!(s, "- applied on request: {a}");
    }
    if !r.reasons.is_empty() {
        let _ = writeln!(s, "\n## Why it failed\n");
        for x in &r.reasons {
            let _ = writeln!(s, "- {x}");
        }
    }
    let _ = writeln!(
        s,
        "\n## Decisions per log (device kernel against the labels)\n\n| log | units | false GO | false NO-GO | RECHECK | FAULT | float correct | fixed correct | flips | min fixed margin (LSB) | within bound | rows skipped |\n|---|---|---|---|---|---|---|---|---|---|---|---|"
    );
    for t in &r.sets {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
            t.name,
            t.units,
            t.false_go,
            t.false_nogo,
            t.recheck,
            t.faults,
            t.float_correct,
            t.fixed_correct,
            t.flips,
            opt(t.min_margin_lsb),
            t.within_bound,
            t.skipped_rows
        );
    }
    let _ = writeln!(
        s,
        "\nFalse GO: a NO-GO unit the device passes. False NO-GO: a GO unit it turns away, a FAULT on a GO unit included (a FAULT on a NO-GO unit is a safe NO-GO). RECHECK: a retest, neither right nor wrong. Margins are measured from go_min − ½ (GO units) and nogo_max + ½ (NO-GO units), over units the device decides. Rows skipped as unreadable (`--skip-bad-rows`) are not units and appear in no other column."
    );
    let _ = writeln!(
        s,
        "\n## Gates\n\n| gate | log | value | limit | result |\n|---|---|---|---|---|"
    );
    for g in &r.gates {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} |",
            g.gate,
            g.log,
            g.value,
            g.limit,
            if g.passed { "pass" } else { "FAIL" }
        );
    }
    if !r.wrong.is_empty() {
        let _ = writeln!(
            s,
            "\n## Units behind the decision gates\n\n| log | line | unit | label | fixed verdict | fixed score | margin (LSB) |\n|---|---|---|---|---|---|---|"
        );
        for u in r.wrong.iter().take(50) {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {:.1} |",
                u.set,
                u.line,
                u.unit,
                u.label,
                u.fixed_verdict,
                u.fixed_score.map_or("–".into(), |v| v.to_string()),
                u.margin_lsb
            );
        }
        if r.wrong.len() > 50 {
            let _ = writeln!(
                s,
                "\n{} more in audit.json and in `--units`.",
                r.wrong.len() - 50
            );
        }
    }
    let _ = writeln!(
        s,
        "\n## Margin and the rounding bound (LSB of the accumulator)\n"
    );
    let _ = writeln!(
        s,
        "| float margin | plain rounding | after search ({} moves) | bound | guaranteed |\n|---|---|---|---|---|",
        r.search_moves
    );
    let _ = writeln!(
        s,
        "| {} | {} | {} | {:.1} | {} |",
        opt(r.float_min_margin_lsb),
        opt(r.plain_min_margin_lsb),
        opt(r.optimised_min_margin_lsb),
        r.bound.total,
        if r.guaranteed { "yes" } else { "no" }
    );
    let _ = writeln!(
        s,
        "\nBound = ½·Σ|Wᵢ| (inputs: {:.1}) + Σ|Wᵢ−Wᵢ*|·Xmaxᵢ (weights: {:.1}) + |B−b·A| (bias: {:.2}); textbook form Σ|Wᵢ*|εx + ΣXmaxᵢ·εw + n·εx·εw + εb = {:.1}.",
        r.bound.inputs, r.bound.weights, r.bound.bias, r.bound.textbook
    );
    let _ = writeln!(
        s,
        "\n## Channels\n\n| channel | unit | weight | smallest margin along this channel |\n|---|---|---|---|"
    );
    for ((name, m, unit), w) in r.channel_margin.iter().zip(&r.weights) {
        let _ = writeln!(s, "| {name} | {unit} | {w} | {m:.4} {unit} |");
    }
    if let Some(t) = &r.tolerance {
        let _ = writeln!(
            s,
            "\n## Sensor tolerance\n\nDeclared noise moves the score by at most {:.1} LSB. Units that could change verdict: {}. Suggested RECHECK half-band: {:.6} (float score units).\n",
            t.noise_radius_lsb,
            t.units_at_risk.len(),
            t.suggested_band
        );
        let _ = writeln!(
            s,
            "| channel | noise | largest drift before any unit flips |\n|---|---|---|"
        );
        for c in &t.channels {
            let _ = writeln!(
                s,
                "| {} | {} {} | {:.4} {} |",
                c.channel, c.noise, c.unit, c.max_drift, c.unit
            );
        }
        for u in t.units_at_risk.iter().take(20) {
            let _ = writeln!(s, "- at risk: {u}");
        }
    }
    if !r.flips.is_empty() {
        let _ = writeln!(
            s,
            "\n## Flipped decisions\n\n| log | unit | line | label | float | fixed | margin (LSB) |\n|---|---|---|---|---|---|---|"
        );
        for u in &r.flips {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {:.1} |",
                u.set, u.unit, u.line, u.label, u.float_verdict, u.fixed_verdict, u.margin_lsb
            );
        }
    }
    let _ = writeln!(
        s,
        "\n## Units closest to the boundary\n\n| log | unit | line | label | fixed verdict | score | margin (LSB) |\n|---|---|---|---|---|---|---|"
    );
    for u in &r.tightest {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {:.1} |",
            u.set,
            u.unit,
            u.line,
            u.label,
            u.fixed_verdict,
            u.fixed_score.map_or("–".into(), |v| v.to_string()),
            u.margin_lsb
        );
    }
    if let Some((rows, best)) = sweep {
        let _ = writeln!(
            s,
            "\n## Word-length sweep\n\n| weights | inputs | acc | min margin (LSB) | margin / bound | flips | guaranteed | passed | blob bytes | MAC cost |\n|---|---|---|---|---|---|---|---|---|---|"
        );
        for (i, w) in rows.iter().enumerate() {
            let mark = if Some(i) == *best {
                " **(recommended)**"
            } else {
                ""
            };
            let _ = writeln!(
                s,
                "| {}-bit{mark} | {}-bit | {} | {} | {} | {} | {} | {} | {} | {} |",
                w.weight_bits,
                w.input_bits,
                w.acc_bits,
                opt(w.min_margin_lsb),
                w.margin_over_bound
                    .map_or("–".into(), |v| format!("{v:.2}")),
                w.flips,
                if w.guaranteed { "yes" } else { "no" },
                if w.passed { "yes" } else { "no" },
                w.blob_bytes,
                w.mac_cost
            );
        }
    }
    let _ = writeln!(
        s,
        "\n## Method (every figure above from these inputs)\n\n\
- Physical → raw: raw = round((physical − zero)/lsb), halves away from zero (per channel: zero, lsb in model.json).\n\
- Kernel (FORMAT.md): xᵢ = ⌊((raw − offsetᵢ)·multiplierᵢ + 2^(shiftᵢ−1)) / 2^shiftᵢ⌋ (halves towards +∞); score = bias + Σ weightᵢ·xᵢ; GO if score ≥ go_min, NO-GO if score ≤ nogo_max, else RECHECK; a raw reading outside [raw_min, raw_max] is a FAULT (NO-GO).\n\
- Float model: s = b + Σ wᵢ·(raw − offsetᵢ)/halfᵢ; GO if s > t (t = {t}).\n\
- A = {a} accumulator units per float score unit; κᵢ = multiplierᵢ/2^shiftᵢ; ideal weights Wᵢ* = A·wᵢ/(halfᵢ·κᵢ), ideal bias B* = A·b = {ib}; A·t = {ta}.\n\
- Weights and bias are Wᵢ* and B* rounded to nearest, halves to even, then moved by at most ±1 LSB where that raises (smallest margin − bound) on the training log.\n\
- Margin of a decided unit, in LSB: score − (go_min − ½) for GO units, (nogo_max + ½) − score for NO-GO units; RECHECK and FAULT units have none.\n\
- Bound = ½·Σ|Wᵢ| + Σ|Wᵢ − Wᵢ*|·Xmaxᵢ + |B − B*|, Xmaxᵢ = κᵢ·max(|raw_maxᵢ − offsetᵢ|, |offsetᵢ − raw_minᵢ|). A correctly decided unit is within the bound when its margin plus the distance of its edge beyond ⌊A·t⌋ + ½ (the RECHECK band, 0 without one) is at most the bound; \"guaranteed\" means no unit is.\n\
- Noise: a reading moved by Δ moves xᵢ by at most κᵢ·Δ/lsbᵢ + 1, the score by Σ|Wᵢ|·(κᵢ·noiseᵢ/lsbᵢ + 1); a GO (NO-GO) unit whose score is within that of nogo_max + ½ (go_min − ½) fails the noise gate.\n",
        t = fm.threshold,
        a = r.scale,
        ib = r.ideal_bias,
        ta = r.threshold_acc
    );
    let _ = writeln!(
        s,
        "| channel | wᵢ (float) | Wᵢ* (ideal) | plain rounding | final Wᵢ |\n|---|---|---|---|---|"
    );
    for (k, c) in fm.channels.iter().enumerate() {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} |",
            c.name,
            fm.weights.get(k).copied().unwrap_or(f64::NAN),
            r.ideal_weights.get(k).copied().unwrap_or(f64::NAN),
            r.plain_weights.get(k).copied().unwrap_or(0),
            r.weights.get(k).copied().unwrap_or(0)
        );
    }
    let _ = writeln!(
        s,
        "| bias | {} | {} | {} | {} |",
        fm.bias, r.ideal_bias, r.plain_bias, r.bias
    );
    let _ = writeln!(
        s,
        "\nMoved by the search: {}.",
        if r.search_changes.is_empty() {
            "nothing".to_string()
        } else {
            r.search_changes.join("; ")
        }
    );
    let _ = writeln!(
        s,
        "\n*A go/no-go classifier is not by itself a safety function. This audit shows that rounding does not change the validated decisions; it does not validate the decisions.*"
    );
    s
}

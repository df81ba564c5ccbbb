//! The audit as Markdown: the text `audit.md` holds and `audit` prints. Sections in the
//! order a reviewer reads: verdict (and, if failed, the gates and units behind it),
//! provenance, the operating point and how C was chosen (when the model has them),
//! decisions per log, margin against the bound, channels, sensor tolerance, units at risk,
//! units closest to the boundary, the word-length sweep, the method.

use std::fmt::Write;

use super::document::{Document, Part};
use super::numbers::{cell, lsb};
use crate::release::audit_report::{AuditReport, UnitRow};
use crate::release::sweep::SweepRow;
use crate::train::float_model::FloatModel;

fn opt(v: Option<f64>) -> String {
    v.map_or("–".into(), lsb)
}

/// A physical quantity: four significant digits at any scale, so a margin of 0.00002 V on a
/// small-range channel does not print as 0.0000.
fn physical(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let e = v.abs().log10().floor() as i32;
    if (-4..7).contains(&e) {
        format!("{v:.*}", (3 - e).max(0) as usize)
    } else {
        format!("{v:.3e}")
    }
}

/// The gate a unit behind the decision gates fails: false GO, false NO-GO (a FAULT on a
/// GO unit included), or else the noise gate.
fn gate_of(u: &UnitRow) -> &'static str {
    match (u.label.as_ref(), u.fixed_verdict.as_ref()) {
        ("NO-GO", "GO") => "false GO",
        ("GO", "NO-GO" | "FAULT") => "false NO-GO",
        _ => "noise",
    }
}

/// A table of units (at most `limit` rows), then how many more the JSON holds. With
/// `gates`, a first column names the gate each unit fails.
fn unit_table(
    s: &mut String,
    title: &str,
    rows: &[UnitRow],
    limit: usize,
    total: usize,
    gates: bool,
) {
    let (head, rule) = if gates { ("| gate ", "|---") } else { ("", "") };
    let _ = writeln!(
        s,
        "\n{title}\n\n{head}| log | line | unit | label | float verdict | fixed verdict | fixed score | margin (LSB) |\n{rule}|---|---|---|---|---|---|---|---|"
    );
    for u in rows.iter().take(limit) {
        if gates {
            let _ = write!(s, "| {} ", gate_of(u));
        }
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {:.1} |",
            u.set,
            u.file
                .as_ref()
                .map_or(u.line.to_string(), |f| format!("{} {}", cell(f), u.line)),
            cell(&u.unit),
            u.label,
            u.float_verdict,
            u.fixed_verdict,
            u.fixed_score.map_or("–".into(), |v| v.to_string()),
            u.margin_lsb
        );
    }
    let shown = limit.min(rows.len());
    if total > shown {
        let held = if rows.len() >= total {
            format!("audit.json lists all {total}")
        } else {
            format!(
                "audit.json lists the first {}, `--units` every unit",
                rows.len()
            )
        };
        let _ = writeln!(s, "\n{} more: {held}.", total - shown);
    }
}

/// The audit as Markdown.
pub fn markdown(
    fm: &FloatModel,
    r: &AuditReport,
    sweep: Option<&(Vec<SweepRow>, Option<usize>)>,
) -> String {
    document(fm, r, sweep).markdown()
}

/// The audit as its sections, each with its Markdown.
pub fn document(
    fm: &FloatModel,
    r: &AuditReport,
    sweep: Option<&(Vec<SweepRow>, Option<usize>)>,
) -> Document {
    let mut d = Document::default();
    let mut s = String::new();
    let verdict = if r.passed { "PASSED" } else { "FAILED" };
    d.open(Part::Title, &mut s);
    let _ = writeln!(s, "# Linegate release audit: {verdict}\n");
    d.open(Part::Verdict, &mut s);
    let _ = writeln!(s, "## Verdict\n");
    let units: usize = r.sets.iter().map(|t| t.units).sum();
    let failed: Vec<_> = r.gates.iter().filter(|g| !g.passed).collect();
    if r.passed {
        let _ = writeln!(
            s,
            "**PASSED**: all {} gates held on {} log(s), {units} units.",
            r.gates.len(),
            r.sets.len()
        );
    } else {
        let _ = writeln!(
            s,
            "**FAILED**: {} of {} gates failed on {} log(s), {units} units. Why:\n",
            failed.len(),
            r.gates.len(),
            r.sets.len()
        );
        for x in &r.reasons {
            let _ = writeln!(s, "- {x}");
        }
        let _ = writeln!(
            s,
            "\n| failed gate | log | value | limit |\n|---|---|---|---|"
        );
        for g in &failed {
            let _ = writeln!(s, "| {} | {} | {} | {} |", g.gate, g.log, g.value, g.limit);
        }
        if failed
            .iter()
            .any(|g| g.gate == "guarantee" || g.gate == "min margin")
        {
            let _ = writeln!(
                s,
                "\nThe units behind the margin gates are the first rows of \"Units closest to the boundary\" below; `--units` lists every unit's margin."
            );
        }
    }
    if !r.wrong.is_empty() {
        let total: usize = r
            .sets
            .iter()
            .map(|t| t.false_go + t.false_nogo + t.noise_unsafe)
            .sum();
        // Wrong decisions before units that only fail the noise gate.
        let mut rows = r.wrong.clone();
        rows.sort_by_key(|u| match gate_of(u) {
            "false GO" => 0,
            "false NO-GO" => 1,
            _ => 2,
        });
        unit_table(
            &mut s,
            "Units behind the decision gates, wrong decisions first:",
            &rows,
            50,
            total.max(r.wrong.len()),
            true,
        );
    }
    d.open(Part::Provenance, &mut s);
    let _ = writeln!(s, "\n## Provenance\n");
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
    super::settings::split_and_files(&mut s, r);
    if r.recheck_band > 0.0 {
        // The band in the units a reviewer reads: integer scores on the device, float score,
        // and the units of each class it holds back on every log.
        let caught: Vec<String> = r
            .sets
            .iter()
            .map(|t| {
                format!(
                    "{}: {} GO + {} NO-GO units",
                    t.name,
                    t.recheck_go,
                    t.recheck - t.recheck_go
                )
            })
            .collect();
        let _ = writeln!(
            s,
            "- RECHECK band: device scores {} to {} ({} LSB wide), a half-band of {:.6} float score units ({} LSB) around the threshold; it holds back {}",
            r.nogo_max.saturating_add(1),
            r.go_min.saturating_sub(1),
            (i128::from(r.go_min) - i128::from(r.nogo_max) - 1).max(0),
            r.recheck_band,
            lsb(r.recheck_band * r.scale),
            caught.join("; ")
        );
    }
    for a in &r.applied {
        let _ = writeln!(s, "- applied on request: {a}");
    }
    for a in &r.from_model {
        let _ = writeln!(s, "- from the model's operating point: {a}");
    }
    // Only a model that has them: an older model's report is unchanged.
    if let Some(op) = &r.operating_point {
        d.open(Part::OperatingPoint, &mut s);
        super::operating::operating_point_markdown(&mut s, op, r.recheck_band);
    }
    if let Some(c) = &r.c_choice {
        d.open(Part::CChoice, &mut s);
        super::operating::c_choice_markdown(&mut s, c);
    }
    d.open(Part::Decisions, &mut s);
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
        "\n### Rates with their exact bounds\n\nEach rate among the units it can happen to, with its two-sided {conf} % Clopper–Pearson interval and one-sided {conf} % upper bound: a count of 0 shows a rate below the upper bound, not a rate of 0.\n\n| log | false GO (of NO-GO units) | false NO-GO (of GO units) | RECHECK (of all) | FAULT (of all) |\n|---|---|---|---|---|",
        conf = crate::confidence::DEFAULT_CONFIDENCE * 100.0
    );
    for t in &r.sets {
        let cell = |x: &crate::confidence::Rate| {
            use crate::confidence::percent;
            format!(
                "{}/{}: {} % [{}–{} %], ≤ {} %",
                x.count,
                x.of,
                percent(x.rate),
                percent(x.low),
                percent(x.high),
                percent(x.upper)
            )
        };
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} |",
            t.name,
            cell(&t.rates.false_go),
            cell(&t.rates.false_nogo),
            cell(&t.rates.recheck),
            cell(&t.rates.fault)
        );
    }
    let _ = writeln!(
        s,
        "\n### Every gate\n\n| gate | log | value | limit | result |\n|---|---|---|---|---|"
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
    d.open(Part::Margins, &mut s);
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
    let worst = r
        .sets
        .iter()
        .map(|t| t.rounding_max_lsb)
        .fold(0.0, f64::max);
    let _ = writeln!(
        s,
        "\nRounding error of the score, fixed score − A·float score, over every scored unit: largest {worst:.2} LSB, {:.0} % of the bound; units beyond the bound (the bound proves none): {}.",
        if r.bound.total > 0.0 {
            100.0 * worst / r.bound.total
        } else {
            0.0
        },
        r.sets
            .iter()
            .map(|t| {
                let h = &t.rounding_histogram;
                h.first().copied().unwrap_or(0)
                    + if h.len() > 1 {
                        h.last().copied().unwrap_or(0)
                    } else {
                        0
                    }
            })
            .sum::<u64>()
    );
    if !r.flips.is_empty() {
        let n: usize = r.sets.iter().map(|t| t.flips).sum();
        unit_table(
            &mut s,
            "### Flipped decisions (fixed verdict differs from float)",
            &r.flips,
            50,
            n,
            false,
        );
    }
    d.open(Part::Channels, &mut s);
    let _ = writeln!(
        s,
        "\n## Channels\n\n| channel | unit | weight | smallest margin along this channel |\n|---|---|---|---|"
    );
    for ((name, m, unit), w) in r.channel_margin.iter().zip(&r.weights) {
        let _ = writeln!(
            s,
            "| {} | {unit} | {w} | {} {unit} |",
            cell(name),
            physical(*m)
        );
    }
    if !r.features.is_empty() {
        d.open(Part::SignalFeatures, &mut s);
        let _ = writeln!(
            s,
            "\n## Signal features\n\nEach feature is an integer the device computes from its signal's window with the same code as this audit (shared-model). Its range is proved from the declared sample range and window; that range is the channel's valid raw range, so the rounding bound and noise analysis above cover the feature as a reading. cᵢ = sᵢ − offset; A = the largest \\|cᵢ\\|.\n\n| channel | signal | feature | window | valid samples | offset | A | proved range | noise per sample | noise bound (counts) | noise bound | instructions M0 / M3 |\n|---|---|---|---|---|---|---|---|---|---|---|---|"
        );
        for f in &r.features {
            let or_dash = |v: Option<String>| v.unwrap_or_else(|| "–".into());
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {}..={} | {} | {} | {}..={} | {} | {} | {} | {} / {} |",
                cell(&f.channel),
                cell(&f.signal),
                cell(&f.feature),
                f.window,
                f.samples.0,
                f.samples.1,
                f.offset,
                f.amplitude,
                f.range.0,
                f.range.1,
                or_dash(f.noise_counts.map(|d| format!("{d} counts"))),
                or_dash(f.noise_bound.map(|b| b.to_string())),
                or_dash(f.noise_physical.map(|n| format!("{n:.6} {}", f.unit))),
                f.instructions.0,
                f.instructions.1,
            );
        }
        let _ = writeln!(
            s,
            "\nWhy no feature can overflow (the checks `CheckedFeature::new` makes, with this model's numbers):\n"
        );
        for f in &r.features {
            let _ = writeln!(s, "- **{}**: {}", cell(&f.channel), f.proof.join("; "));
        }
        let _ = writeln!(
            s,
            "\nNoise bounds per feature (every sample moved by at most δ counts): mean N·δ; RMS ⌊√(N·δ²)⌋ + 2; min, max, absolute peak δ; peak-to-peak 2δ; standard deviation N·δ + 1; zero crossings N − 1; band N·δ + 2R (R the fixed-point Goertzel bound). Each is tested by simulation in shared-model."
        );
    }
    if let Some(t) = &r.tolerance {
        d.open(Part::Tolerance, &mut s);
        let _ = writeln!(
            s,
            "\n## Sensor tolerance\n\nDeclared noise moves the score by at most {:.1} LSB. Units that could change verdict: {}. Suggested RECHECK half-band: {:.6} (float score units).\n",
            t.noise_radius_lsb, t.units_at_risk_count, t.suggested_band
        );
        let _ = writeln!(
            s,
            "| channel | declared noise | largest drift before any unit flips | drift ÷ noise |\n|---|---|---|---|"
        );
        for c in &t.channels {
            let ratio = if c.noise > 0.0 {
                format!("{:.2}", c.max_drift / c.noise)
            } else {
                "–".into()
            };
            let _ = writeln!(
                s,
                "| {} | {} {} | {} {} | {ratio} |",
                cell(&c.channel),
                c.noise,
                c.unit,
                physical(c.max_drift),
                c.unit
            );
        }
        d.open(Part::UnitsAtRisk, &mut s);
        let _ = writeln!(s, "\n## Units at risk from sensor noise");
        if t.units_at_risk.is_empty() {
            let _ = writeln!(
                s,
                "\nNone: no decided unit's margin is within the noise radius ({:.1} LSB).",
                t.noise_radius_lsb
            );
        } else {
            unit_table(
                &mut s,
                &format!(
                    "Units whose fixed margin is within the noise radius ({:.1} LSB), in log order:",
                    t.noise_radius_lsb
                ),
                &t.units_at_risk,
                50,
                t.units_at_risk_count,
                false,
            );
        }
    }
    d.open(Part::Tightest, &mut s);
    unit_table(
        &mut s,
        "## Units closest to the boundary",
        &r.tightest,
        r.tightest.len(),
        r.tightest.len(),
        false,
    );
    if let Some((rows, best)) = sweep {
        d.open(Part::Sweep, &mut s);
        let _ = writeln!(
            s,
            "\n## Word-length sweep\n\n| weights | inputs | accumulator (proved bits) | kernel arithmetic | instructions M0 / M3 | min margin (LSB) | margin / bound | flips | guaranteed | passed | blob bytes |\n|---|---|---|---|---|---|---|---|---|---|---|"
        );
        for (i, w) in rows.iter().enumerate() {
            let mark = if Some(i) == *best {
                " **(recommended)**"
            } else {
                ""
            };
            let _ = writeln!(
                s,
                "| {}-bit{mark} | {}-bit | {} | {}-bit | {} / {} | {} | {} | {} | {} | {} | {} |",
                w.weight_bits,
                w.input_bits,
                w.acc_bits,
                w.kernel_bits,
                w.kernel_instructions.0,
                w.kernel_instructions.1,
                opt(w.min_margin_lsb),
                w.margin_over_bound
                    .map_or("–".into(), |v| format!("{v:.2}")),
                w.flips,
                if w.guaranteed { "yes" } else { "no" },
                if w.passed { "yes" } else { "no" },
                w.blob_bytes
            );
        }
        let _ = writeln!(
            s,
            "\nAccumulator: the width the overflow proof needs. Kernel arithmetic: what the device kernel runs the format in, 32-bit when the accumulator proof allows it and every channel's range is ADC-sized, else 64-bit (so a 32-bit accumulator can still run in 64 bits). Instructions: what one classification took per channel on the footprint model under QEMU (`firmware/qemu-app/footprint.sh`, 16 channels), scaled to this model's channels, on a Cortex-M0 and a Cortex-M3. Cores without a 64-bit multiply (Cortex-M0, M0+) pay most for 64-bit. Recommended: the passing format with the narrowest weights, then the narrowest inputs."
        );
        let (m0, m3) = r.features.iter().fold((0, 0), |(a, b), f| {
            (a + f.instructions.0, b + f.instructions.1)
        });
        if !r.features.is_empty() {
            let _ = writeln!(
                s,
                "\nThe model's {} window features add about {m0} (Cortex-M0) / {m3} (Cortex-M3) instructions to every classification, whatever the format (per-sample costs measured by `footprint.sh` on 1,024-sample windows, times each feature's window; listed per feature under \"Signal features\").",
                r.features.len()
            );
        }
    }
    d.open(Part::Method, &mut s);
    let _ = writeln!(
        s,
        "\n## Method (every figure above from these inputs)\n\n| step | formula | inputs in this audit |\n|---|---|---|"
    );
    let method: [(&str, &str, String); 9] = [
        (
            "physical → raw",
            "raw = round((physical − zero) / lsb), halves away from zero",
            "zero, lsb per channel (model.json)".into(),
        ),
        (
            "input scaling (device kernel, FORMAT.md)",
            "xᵢ = ⌊((raw − offsetᵢ)·multiplierᵢ + 2^(shiftᵢ−1)) / 2^shiftᵢ⌋, halves towards +∞",
            format!("Q{} inputs ({}-bit)", r.input_bits - 1, r.input_bits),
        ),
        (
            "score and decision",
            "score = bias + Σ weightᵢ·xᵢ; GO if score ≥ go_min, NO-GO if score ≤ nogo_max, else RECHECK; raw outside [raw_min, raw_max]: FAULT (NO-GO)",
            format!(
                "bias = {}, go_min = {}, nogo_max = {}, {}-bit weights, {}-bit accumulator",
                r.bias, r.go_min, r.nogo_max, r.weight_bits, r.acc_bits
            ),
        ),
        (
            "float model",
            "s = b + Σ wᵢ·(raw − offsetᵢ)/halfᵢ; GO if s > t",
            format!("b = {}, t = {}", fm.bias, fm.threshold),
        ),
        (
            "ideal integer model",
            "κᵢ = multiplierᵢ/2^shiftᵢ; Wᵢ* = A·wᵢ/(halfᵢ·κᵢ); B* = A·b",
            format!(
                "A = {}, B* = {}, A·t = {}",
                r.scale, r.ideal_bias, r.threshold_acc
            ),
        ),
        (
            "quantisation",
            "Wᵢ, B: Wᵢ*, B* rounded to nearest (halves to even), then each moved by at most ±1 LSB where that raises (smallest margin − bound) on the training log",
            format!("{} moves kept", r.search_moves),
        ),
        (
            "margin (LSB)",
            "GO unit: score − (go_min − ½); NO-GO unit: (nogo_max + ½) − score; RECHECK and FAULT: none",
            "every decided unit".into(),
        ),
        (
            "rounding bound B",
            "B = ½·Σ\\|Wᵢ\\| + Σ\\|Wᵢ − Wᵢ*\\|·Xmaxᵢ + \\|B − B*\\|, Xmaxᵢ = κᵢ·max(\\|raw_maxᵢ − offsetᵢ\\|, \\|offsetᵢ − raw_minᵢ\\|); a decided unit is within B when its margin plus its edge's distance beyond ⌊A·t⌋ + ½ (the RECHECK band) is at most B; guaranteed: no unit is",
            format!(
                "{:.1} + {:.1} + {:.2} = {:.1} LSB (textbook Σ\\|Wᵢ*\\|εx + ΣXmaxᵢ·εw + n·εx·εw + εb = {:.1})",
                r.bound.inputs, r.bound.weights, r.bound.bias, r.bound.total, r.bound.textbook
            ),
        ),
        (
            "sensor noise",
            "a reading moved by Δ moves xᵢ by at most κᵢ·Δ/lsbᵢ + 1, the score by Σ\\|Wᵢ\\|·(κᵢ·noiseᵢ/lsbᵢ + 1); a GO (NO-GO) unit whose score is within that of nogo_max + ½ (go_min − ½) fails the noise gate",
            r.tolerance
                .as_ref()
                .map_or("no noise declared".into(), |t| {
                    format!("radius {:.1} LSB", t.noise_radius_lsb)
                }),
        ),
    ];
    for (step, formula, inputs) in method {
        let _ = writeln!(s, "| {step} | {formula} | {inputs} |");
    }
    let _ = writeln!(s);
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
    if !r.settings.is_empty() {
        d.open(Part::Settings, &mut s);
    }
    super::settings::settings_markdown(&mut s, r);
    let _ = writeln!(
        s,
        "\n*A go/no-go classifier is not by itself a safety function. This audit shows that rounding does not change the validated decisions; it does not validate the decisions.*"
    );
    d.close(&mut s);
    d
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_stay_readable_at_any_scale() {
        assert_eq!(physical(0.000_021_37), "2.137e-5");
        assert_eq!(physical(0.000_213_7), "0.0002137");
        assert_eq!(physical(12.5), "12.50");
        assert_eq!(physical(-0.5), "-0.5000");
        assert_eq!(physical(3.2e-9), "3.200e-9");
        assert_eq!(lsb(12.25), "12.2");
        assert_eq!(lsb(959_809_745.5), "959809745.5 (≈ 9.60·10^8)");
    }
}

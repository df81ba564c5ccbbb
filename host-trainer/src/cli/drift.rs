//! `linegate drift`: a field log (or the device's score lines, or its field record) against
//! the release audit's baseline; exit 1 on an alarm.

use std::path::{Path, PathBuf};

use crate::field::baseline::{self, AuditBaseline};
use crate::field::drift::{DriftConfig, DriftReport, Field, Source, drift};
use crate::field::{device_lines, record, run::FieldRun};
use crate::ingest::{LogOptions, SkipReport};
use crate::output::OutputSet;
use crate::train::float_model::FloatModel;
use anyhow::{Result, bail};
use clap::Args;
use shared_model::Thresholds;

use super::CheckFailed;
use super::args::LogArgs;

/// Flags of `linegate drift`.
#[derive(Args)]
pub struct DriftArgs {
    /// Field logs of readings (labelled or not), read in order as one run of units.
    pub logs: Vec<PathBuf>,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// The release audit's audit.json, or the folder holding it (it keeps the baseline and
    /// the device plan). Default: `[outputs] audit_dir` of the project file.
    #[arg(long, value_name = "FILE_OR_DIR")]
    pub audit: Option<PathBuf>,
    /// The float model (reads the logs; needed with logs). Default: `[outputs] model` of
    /// the project file.
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// The blob the audit named (its kernel scores the logs; needed with logs). Default:
    /// `[outputs] blob` of the project file.
    #[arg(long)]
    pub blob: Option<PathBuf>,
    /// Instead of logs: the device's own score lines (`replay --form device` prints the same
    /// lines; its text form is read too).
    #[arg(long, value_name = "FILE", conflicts_with_all = ["logs", "record"])]
    pub lines: Option<PathBuf>,
    /// Instead of logs: the device's field record (its bytes, as the device wrote them).
    #[arg(long, value_name = "FILE", conflicts_with_all = ["logs", "lines"])]
    pub record: Option<PathBuf>,
    /// The family-wise level of the drift test's p-value tests: the channel shifts, the KS
    /// p-value and the RECHECK and FAULT rates' one-sided Fisher exact p-values each run at
    /// α/4 (Bonferroni; the channels further split over the channels), so an in-control
    /// field alarms through them with probability at most α. The rates' Clopper–Pearson
    /// intervals are shown at 1 − α.
    #[arg(long, default_value_t = 0.01)]
    pub alpha: f64,
    /// Also alarm when margins grow (the CUSUMs' upper sums); by default only shrinking
    /// margins (units walking towards the boundary) alarm.
    #[arg(long)]
    pub two_sided: bool,
    /// Write the report here: Markdown (with the CUSUM chart beside it as STEM-cusum.svg),
    /// or HTML (chart inline) when the name ends in .html.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Print the result as JSON instead of the summary.
    #[arg(long)]
    pub json: bool,
    /// Write the field record the device would keep over these logs (with the audit's plan).
    #[arg(long, value_name = "FILE")]
    pub record_out: Option<PathBuf>,
    /// Print the device plan (C initializer and Rust literal) and stop.
    #[arg(long)]
    pub plan: bool,
    /// Overwrite the report and record files.
    #[arg(long)]
    pub force: bool,
}

impl DriftArgs {
    /// Runs `linegate drift`.
    pub fn run(&self, quiet: bool, mut settings: Vec<crate::project::Setting>) -> Result<()> {
        let given = super::settings::required(&self.audit, "--audit", "[outputs] audit_dir")?;
        let audit_path = audit_record(given);
        let audit = baseline::read(&audit_path)?;
        if self.plan {
            say!("{}", baseline::plan_text(&audit).trim_end());
            return Ok(());
        }
        let cfg = config(self.alpha, self.two_sided)?;
        let b = &audit.baseline;
        let plan = b.plan.field_plan();
        let thresholds = Thresholds {
            nogo_max: b.nogo_max,
            go_min: b.go_min,
        };
        let channels = b.channels.len();
        let (report, record_bytes) = if let Some(rec) = &self.record {
            if self.record_out.is_some() {
                bail!(
                    "--record-out writes the host's record over logs; with --record the record is the device's"
                );
            }
            let stats = record::read_record(rec, &plan)?;
            if usize::from(stats.channels) != channels {
                bail!(
                    "{}: the record keeps {} channels, the audited model has {channels}",
                    rec.display(),
                    stats.channels
                );
            }
            let mut r = drift(b, Field::Record(&stats), Source::Record, cfg);
            r.files = vec![rec.display().to_string()];
            (r, None)
        } else if let Some(lines) = &self.lines {
            if self.record_out.is_some() {
                bail!(
                    "--record-out needs the logs: device lines carry no channel values, so the record's channel figures could not be filled"
                );
            }
            // Signals are not named in the lines' audit: FAULT signal<k> counts under k.
            let mut run = FieldRun::new(
                plan,
                thresholds,
                channels,
                shared_model::limits::MAX_SIGNALS,
                false,
            );
            device_lines::read_lines(lines, &audit.model_id, &audit.blob_id, &mut run)?;
            let mut r = drift(b, Field::Run(&run), Source::Lines, cfg);
            r.files = vec![lines.display().to_string()];
            (r, None)
        } else {
            if self.logs.is_empty() {
                bail!(
                    "no field given: give field logs, --lines FILE or --record FILE (see --help)"
                );
            }
            let (run, files) = self.run_logs(quiet, &audit, thresholds, &mut settings)?;
            let mut r = drift(b, Field::Run(&run), Source::Log, cfg);
            r.files = files;
            (r, Some(record::record_bytes(&run.stats())))
        };
        report.require_units()?;
        let mut set = OutputSet::default();
        if let Some(p) = &self.report {
            if p.extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("html"))
            {
                set.add(p, crate::report::drift_html(&report));
            } else {
                let svg = crate::report::cusum_svg(&report);
                let chart = (!svg.is_empty()).then(|| chart_path(p));
                let name = chart
                    .as_ref()
                    .and_then(|c| c.file_name())
                    .map(|n| n.to_string_lossy().into_owned());
                set.add(p, crate::report::drift_markdown(&report, name.as_deref()));
                if let Some(c) = chart {
                    set.add(c, svg);
                }
            }
        }
        if let (Some(p), Some(bytes)) = (&self.record_out, record_bytes) {
            set.add(p, bytes);
        }
        if set.paths().next().is_some() {
            set.commit(self.force)?;
        }
        if self.json {
            say_raw!("{}", super::to_json(&report));
        } else if !quiet {
            summary(&report);
        }
        if report.in_control() {
            Ok(())
        } else {
            Err(CheckFailed(format!(
                "drift: {} alarm(s): {}",
                report.alarms.len(),
                report.alarms.join("; ")
            ))
            .into())
        }
    }

    /// The logs through the blob's kernel, unit by unit, into one run.
    fn run_logs(
        &self,
        quiet: bool,
        audit: &AuditBaseline,
        thresholds: Thresholds,
        settings: &mut Vec<crate::project::Setting>,
    ) -> Result<(FieldRun, Vec<String>)> {
        let (Some(model), Some(blob)) = (&self.model, &self.blob) else {
            bail!(
                "field logs need --model (to read them) and --blob (the audited blob, whose kernel scores them)"
            );
        };
        let fm = FloatModel::read(model)?;
        // A blob that is not the audited one is an error (exit 2), not an alarm (exit 1),
        // which a CI job reads as drift.
        let (bytes, m) =
            super::read_blob_of_model(&fm, blob, model).map_err(|e| anyhow::anyhow!("{e}"))?;
        the_audited_blob(audit, blob, &bytes, &m, thresholds)?;
        let opts = LogOptions {
            label_optional: true,
            digest: false,
            ..self
                .log_args
                .options_for_model(quiet, &fm, model, settings)?
        };
        let mut run = FieldRun::new(
            audit.baseline.plan.field_plan(),
            thresholds,
            m.channel_count(),
            m.signal_count(),
            true,
        );
        let files = super::log_files(&self.logs, "give field logs")?;
        for f in &files {
            let mut skipped = SkipReport::default();
            record::run_log(f, &opts, &fm, &m, &mut skipped, &mut run)?;
            if !quiet {
                super::warn_skipped(f, &skipped);
            }
        }
        Ok((run, files.iter().map(|f| f.display().to_string()).collect()))
    }
}

/// Refuses a blob that is not the one the audit named (its id, or the thresholds its
/// baseline was measured against): exit 2, not an alarm, which a CI job reads as drift.
pub(super) fn the_audited_blob(
    audit: &AuditBaseline,
    blob: &Path,
    bytes: &[u8],
    m: &crate::release::pack::DeviceModel,
    thresholds: Thresholds,
) -> Result<()> {
    let id = format!("{:08x}", shared_model::blob::blob_id(bytes).unwrap_or(0));
    if id != audit.blob_id || Thresholds::of(m.model()) != thresholds {
        bail!(
            "{}: blob {id} is not the blob the audit named ({}): give the audited blob",
            blob.display(),
            audit.blob_id
        );
    }
    Ok(())
}

/// The test's settings, the level refused outside (0, 1).
pub(super) fn config(alpha: f64, two_sided: bool) -> Result<DriftConfig> {
    if !(alpha > 0.0 && alpha < 1.0) {
        bail!("--alpha {alpha}: the level must lie between 0 and 1 (e.g. 0.01)");
    }
    Ok(DriftConfig { alpha, two_sided })
}

/// The audit record at `given` (its `audit.json`, or the folder holding it).
pub(super) fn audit_record(given: &Path) -> PathBuf {
    if given.is_dir() {
        given.join("audit.json")
    } else {
        given.to_path_buf()
    }
}

/// `drift.md` → `drift-cusum.svg` beside it.
fn chart_path(report: &Path) -> PathBuf {
    let stem = report
        .file_stem()
        .map_or("drift".into(), |s| s.to_string_lossy().into_owned());
    report.with_file_name(format!("{stem}-cusum.svg"))
}

/// The summary on standard output.
fn summary(r: &DriftReport) {
    say!(
        "drift: {} units ({} GO, {} NO-GO, {} RECHECK, {} FAULT) against the baseline '{}'",
        r.units,
        r.go,
        r.nogo,
        r.recheck,
        r.faults,
        r.baseline_log
    );
    say!(
        "  scores: KS D = {:.4}{}, p = {:.3e} (n = {}, m = {}; alarm at p < α/4 = {})",
        r.ks.d,
        if r.ks.binned {
            " (binned: lower bound)"
        } else {
            ""
        },
        r.ks.p,
        r.ks.n,
        r.ks.m,
        r.test_alpha
    );
    for (n, x) in [("RECHECK", &r.recheck_rate), ("FAULT", &r.fault_rate)] {
        say!(
            "  {n}: {:.2} % [{:.2}, {:.2}] against {:.2} % [{:.2}, {:.2}], Fisher p = {:.3e}",
            100.0 * x.field.rate,
            100.0 * x.field.low,
            100.0 * x.field.high,
            100.0 * x.baseline.rate,
            100.0 * x.baseline.low,
            100.0 * x.baseline.high,
            x.p
        );
    }
    for (n, c) in [("GO", &r.cusum_go), ("NO-GO", &r.cusum_nogo)] {
        let at = |u: u32| {
            if u == 0 {
                "never".to_string()
            } else {
                format!("unit {u}")
            }
        };
        say!(
            "  CUSUM {n}: h = {}, C- {} (passed h: {}), C+ {} (passed h: {})",
            c.limit,
            c.down,
            at(c.alarm_down),
            c.up,
            at(c.alarm_up)
        );
    }
    for c in &r.channels {
        say!(
            "  {}: shift {:+.4} {} ({} noise, {})",
            super::shown(&c.channel),
            c.shift,
            super::shown(&c.unit),
            c.in_noise.map_or("-".into(), |v| format!("{v:+.2}")),
            if c.zero_budget {
                "zero budget".to_string()
            } else {
                c.of_budget
                    .map_or("no budget".into(), |v| format!("{v:.2} shown ÷ budget"))
            }
        );
    }
    for n in &r.notes {
        say!("  note: {n}");
    }
    if r.in_control() {
        say!("IN CONTROL: no alarm");
    } else {
        for a in &r.alarms {
            say!("ALARM: {a}");
        }
    }
}

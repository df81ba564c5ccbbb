//! `linegate compare`: two releases over the same field logs; the units whose verdict
//! changes, counts with bounds, margin shifts, and a gate on NO-GO→GO changes.

use std::path::{Path, PathBuf};

use crate::field::compare::{self, CompareConfig, Release};
use crate::field::compare_report;
use crate::field::score::ReleaseIds;
use crate::ingest::{LogOptions, SkipReport};
use crate::output::OutputSet;
use crate::release::values;
use crate::train::float_model::FloatModel;
use anyhow::{Result, bail};
use clap::Args;

use super::CheckFailed;
use super::args::LogArgs;

/// Flags of `linegate compare`.
#[derive(Args)]
pub struct CompareArgs {
    /// The field log both releases score: a bench log or, for models with signal
    /// features, a signal log; several files (or a quoted glob pattern) are one log.
    #[arg(value_name = "LOG", required = true)]
    pub log: Vec<PathBuf>,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Release A, the one in use: its float model. Default: `[outputs] model` of the
    /// project file.
    #[arg(long, value_name = "MODEL_JSON")]
    pub model: Option<PathBuf>,
    /// Release A's blob (it must be one --model produces). Without it, --model is
    /// quantised plainly at --input-bits/--weight-bits, as `linegate values` does. Default:
    /// `[outputs] blob` of the project file.
    #[arg(long, value_name = "BLOB")]
    pub blob: Option<PathBuf>,
    /// Release B, the candidate: its float model.
    #[arg(long, value_name = "MODEL_JSON")]
    pub against: PathBuf,
    /// Release B's blob; without it, --against is quantised plainly.
    #[arg(long, value_name = "BLOB")]
    pub against_blob: Option<PathBuf>,
    /// For a release without a blob: scaled input word, 8 or 16 bits.
    #[arg(long, default_value_t = 16)]
    pub input_bits: u8,
    /// For a release without a blob: weight word, 2..=32 bits.
    #[arg(long, default_value_t = 16)]
    pub weight_bits: u8,
    /// NO-GO→GO changes (a unit A stops, NO-GO or FAULT, and B passes) the gate allows: a
    /// count, or `all`. Default: none (one fails the comparison, exit 1).
    #[arg(long, value_name = "N|all", value_parser = parse_allowed)]
    pub allow_nogo_to_go: Option<Allowed>,
    /// Confidence of the Clopper–Pearson bounds, in (0, 1).
    #[arg(long, default_value_t = 0.95, value_parser = parse_confidence)]
    pub confidence: f64,
    /// Changed units listed on the terminal (all of them go to the files).
    #[arg(long, default_value_t = 20, value_name = "N")]
    pub show: usize,
    /// Write every changed unit here as CSV (columns in the README).
    #[arg(long, value_name = "FILE.csv")]
    pub changes: Option<PathBuf>,
    /// Write the report section a reviewer signs here (Markdown).
    #[arg(long, value_name = "FILE.md")]
    pub report: Option<PathBuf>,
    /// Write the whole comparison here as JSON.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Overwrite existing output files.
    #[arg(long)]
    pub force: bool,
}

/// How many NO-GO→GO changes pass the gate.
#[derive(Clone, Copy, Debug)]
pub enum Allowed {
    /// Up to this many.
    Count(u64),
    /// Any number.
    All,
}

fn parse_allowed(s: &str) -> Result<Allowed, String> {
    if s.eq_ignore_ascii_case("all") {
        return Ok(Allowed::All);
    }
    s.parse()
        .map(Allowed::Count)
        .map_err(|_| format!("'{s}' is not a count: give a number of NO-GO→GO changes, or all"))
}

fn parse_confidence(s: &str) -> Result<f64, String> {
    match s.parse::<f64>() {
        Ok(c) if c > 0.0 && c < 1.0 => Ok(c),
        _ => Err(format!("'{s}' is not a confidence in (0, 1), e.g. 0.95")),
    }
}

impl CompareArgs {
    /// Runs `linegate compare`: both releases over the log, the outputs written all or
    /// nothing, then the gate (exit 1 when it fails).
    pub fn run(&self, quiet: bool, mut settings: Vec<crate::project::Setting>) -> Result<()> {
        let files = super::log_files(&self.log, "name the field log (or several files of it)")?;
        let model_a = super::settings::required(&self.model, "--model", "[outputs] model")?;
        let fm_a = FloatModel::read(model_a)?;
        let fm_b = FloatModel::read(&self.against)?;
        for (fm, path) in [(&fm_a, model_a), (&fm_b, self.against.as_path())] {
            if fm.classes.is_some() {
                bail!(
                    "{}: a model of several classes; compare takes two-sided (GO / NO-GO) releases. \
                     Replay both with `linegate replay --form csv` and compare their class columns",
                    path.display()
                );
            }
        }
        let a = self.release(&fm_a, model_a, self.blob.as_deref(), quiet, &mut settings)?;
        let b = self.release(
            &fm_b,
            &self.against,
            self.against_blob.as_deref(),
            quiet,
            &mut settings,
        )?;
        let cfg = CompareConfig {
            confidence: self.confidence,
            allowed: match self.allow_nogo_to_go {
                None => Some(0),
                Some(Allowed::Count(n)) => Some(n),
                Some(Allowed::All) => None,
            },
        };
        let (mut skip_a, mut skip_b) = (SkipReport::default(), SkipReport::default());
        let c = compare::compare(&files, &a, &b, cfg, (&mut skip_a, &mut skip_b))?;
        if !quiet {
            super::warn_skipped(&super::files_name(&files), &skip_a);
        }
        let mut set = OutputSet::default();
        if let Some(p) = &self.changes {
            set.add(p, compare_report::changes_csv(&c)?);
        }
        if let Some(p) = &self.report {
            set.add(p, compare_report::report(&c));
        }
        if let Some(p) = &self.json {
            set.add(p, super::to_json(&c));
        }
        if set.paths().next().is_some() {
            set.commit(self.force)?;
        }
        if !quiet {
            say_raw!("{}", compare_report::summary(&c, self.show));
        }
        if !c.gate.passed {
            return Err(CheckFailed(format!(
                "compare: {}; allow them with --allow-nogo-to-go N once reviewed",
                compare_report::gate_text(&c)
            ))
            .into());
        }
        Ok(())
    }

    /// One release: the blob checked against its model as replay checks it, or the model
    /// quantised plainly; the log read as that model says.
    fn release<'a>(
        &self,
        fm: &'a FloatModel,
        model_path: &Path,
        blob: Option<&Path>,
        quiet: bool,
        settings: &mut Vec<crate::project::Setting>,
    ) -> Result<Release<'a>> {
        let (model, ids) = match blob {
            Some(path) => {
                // A blob that is not its model's is an error here (exit 2), not the
                // gate's failure (exit 1), which a CI job reads as a NO-GO→GO change.
                let (bytes, m) = super::read_blob_of_model(fm, path, model_path)
                    .map_err(|e| anyhow::anyhow!("{e}"))?;
                let ids = ReleaseIds::of_blob(&m, &bytes);
                (m, ids)
            }
            None => {
                let m = values::plain_model(fm, self.input_bits, self.weight_bits)?;
                let id = crate::digest::lower_hex(&m.model().model_id);
                let ids = ReleaseIds {
                    model_line: format!("# model {id}"),
                    model_id: id,
                    blob_id: None,
                    key_id: None,
                };
                (m, ids)
            }
        };
        let source = match blob {
            Some(b) => format!("{} with {}", model_path.display(), b.display()),
            None => model_path.display().to_string(),
        };
        let opts = LogOptions {
            label_optional: true,
            digest: false,
            keep_times: true,
            ..self
                .log_args
                .options_for_model(quiet, fm, model_path, settings)?
        };
        Ok(Release {
            fm,
            model,
            ids,
            opts,
            source,
        })
    }
}

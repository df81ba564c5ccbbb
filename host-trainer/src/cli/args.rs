//! Flag groups several commands share (how to read a log; what to release and how), and
//! their conversion into the library's validated configurations.

use std::io::IsTerminal;
use std::path::PathBuf;

use anyhow::{Context, Result};
use clap::Args;
use host_trainer::ingest::LogOptions;
use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::audit::{self, AuditConfig};
use host_trainer::release::quantise::{QuantConfig, Quantised};
use host_trainer::train::float_model::FloatModel;
use host_trainer::workflow;

#[derive(Args, Clone)]
pub struct LogArgs {
    /// Channel columns, comma-separated (default: every column except label, unit id, timestamp and ignored).
    #[arg(long, value_delimiter = ',')]
    pub channels: Option<Vec<String>>,
    /// Label column (default: label, verdict, result or status).
    #[arg(long)]
    pub label: Option<String>,
    /// Unit-id column (default: unit_id, unit or serial, if present).
    #[arg(long)]
    pub unit_id: Option<String>,
    /// Timestamp column (default: timestamp, time or date, if present).
    #[arg(long)]
    pub timestamp: Option<String>,
    /// Columns to leave out, comma-separated.
    #[arg(long, value_delimiter = ',')]
    pub ignore: Vec<String>,
    /// GO tokens, comma-separated, case-insensitive (default: go,pass,ok,good,1,true).
    #[arg(long, value_delimiter = ',')]
    pub go_labels: Option<Vec<String>>,
    /// NO-GO tokens (default: nogo,no-go,no_go,fail,ng,bad,reject,0,false).
    #[arg(long, value_delimiter = ',')]
    pub nogo_labels: Option<Vec<String>>,
    /// Skip bad rows (counted and reported) instead of stopping at the first.
    #[arg(long)]
    pub skip_bad_rows: bool,
    /// Most units to hold in memory (4 bytes per reading each).
    #[arg(long, default_value_t = 50_000_000)]
    pub max_rows: usize,
}

impl LogArgs {
    /// The reader options these flags ask for (`quiet` turns progress off).
    pub fn options(&self, quiet: bool) -> LogOptions {
        let d = LogOptions::default();
        let lower = |v: &Option<Vec<String>>, def: Vec<String>| {
            v.as_ref()
                .map_or(def, |v| v.iter().map(|s| s.to_lowercase()).collect())
        };
        LogOptions {
            channels: self.channels.clone(),
            label: self.label.clone(),
            unit_id: self.unit_id.clone(),
            timestamp: self.timestamp.clone(),
            ignore: self.ignore.clone(),
            go_labels: lower(&self.go_labels, d.go_labels),
            nogo_labels: lower(&self.nogo_labels, d.nogo_labels),
            skip_bad_rows: self.skip_bad_rows,
            max_line_len: d.max_line_len,
            max_rows: self.max_rows,
            progress: !quiet && std::io::stderr().is_terminal(),
        }
    }
}

#[derive(Args, Clone)]
pub struct ReleaseArgs {
    /// Float model (from `linegate train`).
    #[arg(long)]
    pub model: PathBuf,
    /// The training log the model was trained on.
    #[arg(long)]
    pub train: PathBuf,
    /// A holdout log, audited too.
    #[arg(long)]
    pub holdout: Option<PathBuf>,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Weight word length in bits (2..=32).
    #[arg(long, default_value_t = 16)]
    pub weight_bits: u8,
    /// Scaled input word: 8 or 16 bits.
    #[arg(long, default_value_t = 16)]
    pub input_bits: u8,
    /// Force the accumulator width (32 or 64); default: narrowest proved safe.
    #[arg(long)]
    pub acc_bits: Option<u8>,
    /// Plain rounding only (no margin-preserving search).
    #[arg(long)]
    pub no_optimise: bool,
    /// RECHECK half-band around the threshold, in float score units.
    #[arg(long, default_value_t = 0.0)]
    pub recheck_band: f64,
    /// Sensor noise per channel, physical units, e.g. --noise vibration_mg=2.5 (overrides the sheet).
    #[arg(long, value_name = "CHANNEL=VALUE", value_delimiter = ',')]
    pub noise: Vec<String>,
    /// Smallest acceptable fixed margin, in LSB.
    #[arg(long, default_value_t = 1.0)]
    pub min_margin_lsb: f64,
    /// Largest acceptable number of flipped decisions.
    #[arg(long, default_value_t = 0)]
    pub max_flips: usize,
    /// Do not require the analytic rounding guarantee.
    #[arg(long)]
    pub no_require_guarantee: bool,
}

/// What `audit` and `pack` work from.
pub struct Release {
    pub fm: FloatModel,
    pub train: Dataset,
    pub holdout: Option<Dataset>,
    pub qc: QuantConfig,
    pub noise: Vec<Option<f64>>,
    pub ac: AuditConfig,
}

impl Release {
    /// Quantises and audits: the step `audit` and `pack` share.
    pub fn run(&self) -> Result<(Quantised, audit::AuditReport)> {
        Ok(audit::release(
            &self.fm,
            &self.train,
            self.holdout.as_ref(),
            self.qc,
            &self.noise,
            self.ac,
        )?)
    }
}

/// Reads the model and logs and validates the flags `audit` and `pack` share.
///
/// # Errors
/// Unreadable or mismatched files, and `--noise` entries that name no channel or no number.
pub fn release_inputs(r: &ReleaseArgs, quiet: bool) -> Result<Release> {
    let fm = FloatModel::read(&r.model)?;
    let opts = r.log_args.options(quiet);
    let train = workflow::load_for_model(&r.train, &opts, &fm)?;
    let holdout = r
        .holdout
        .as_ref()
        .map(|h| workflow::load_for_model(h, &opts, &fm))
        .transpose()?;
    let mut noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    for spec in &r.noise {
        let (name, value) = spec
            .split_once('=')
            .with_context(|| format!("--noise '{spec}': expected CHANNEL=VALUE"))?;
        let i = fm
            .channels
            .iter()
            .position(|c| c.name == name)
            .with_context(|| format!("--noise: no channel '{name}' in the model"))?;
        let v: f64 = value
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .with_context(|| format!("--noise '{spec}': value must be a non-negative number"))?;
        noise[i] = Some(v);
    }
    let qc = QuantConfig {
        input_bits: r.input_bits,
        weight_bits: r.weight_bits,
        optimise: !r.no_optimise,
        acc_bits: r.acc_bits,
        recheck_band: r.recheck_band,
    };
    let ac = AuditConfig {
        min_margin_lsb: r.min_margin_lsb,
        max_flips: r.max_flips,
        require_guarantee: !r.no_require_guarantee,
    };
    Ok(Release {
        fm,
        train,
        holdout,
        qc,
        noise,
        ac,
    })
}

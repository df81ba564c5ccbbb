//! Flag groups several commands share (how to read a log; what to release and how), and
//! their conversion into the library's validated configurations.

use std::io::IsTerminal;
use std::path::PathBuf;

use crate::ingest::LogOptions;
use crate::ingest::dataset::Dataset;
use crate::project::Setting;
use crate::release::applying::Apply;
use crate::release::gates::{AuditConfig, Limit};
use crate::release::model_gates::{self, GivenGates};
use crate::release::quantise::QuantConfig;
use crate::release::sign;
use crate::train::float_model::FloatModel;
use crate::workflow::release::{self as release_step, ReleaseLogs, ReleaseOutcome, ReleaseRequest};
use anyhow::Result;
use clap::Args;

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
    /// GO tokens, comma-separated, case-insensitive (default: go,pass,ok,good). A number or
    /// boolean label is never guessed: map it, e.g. --go-labels 1 --nogo-labels 0.
    #[arg(long, value_delimiter = ',')]
    pub go_labels: Option<Vec<String>>,
    /// NO-GO tokens (default: nogo,no-go,no_go,fail,ng,bad,reject).
    #[arg(long, value_delimiter = ',')]
    pub nogo_labels: Option<Vec<String>>,
    /// A class of units and the label tokens that stand for it (case-insensitive), e.g.
    /// --class GO=go,pass --class SHORT=short --class CRACK=crack,cracked. Repeat for each
    /// class (2 to 8; names 1 to 24 bytes). With --class the labels name these classes
    /// instead of GO and NO-GO (--go-labels/--nogo-labels then do not apply), and `train`
    /// trains a model of classes: GO, one failure class, or RECHECK.
    #[arg(long = "class", value_name = "NAME=TOKEN[,TOKEN…]", value_parser = crate::ingest::classes::parse_class)]
    pub classes: Vec<crate::ingest::classes::Class>,
    /// Which --class is GO (good units): a class name, or none (diagnosis only: every
    /// class is a failure). Default: the class named GO; without one, name it here.
    #[arg(long, value_name = "NAME|none", requires = "classes")]
    pub go_class: Option<String>,
    /// Skip bad rows (counted and reported) instead of stopping at the first.
    #[arg(long)]
    pub skip_bad_rows: bool,
    /// Most units to hold in memory (4 bytes per reading each).
    #[arg(long, default_value_t = 50_000_000)]
    pub max_rows: usize,
    /// Field delimiter: comma, semicolon, tab or pipe (or the character itself). Default:
    /// tab for .tsv and .tab files, otherwise the most frequent of the four in the header row.
    /// A Parquet file has columns, not delimiters: the option does not apply to it.
    #[arg(long, value_parser = parse_delimiter, value_name = "DELIMITER")]
    pub delimiter: Option<u8>,
    /// A comma in a number is the decimal mark (5,1 = 5.1). Default: on for files not
    /// separated by commas (semicolon exports of spreadsheets set to a decimal comma), off
    /// for comma-separated ones and for a Parquet file's text columns. A cell holding both
    /// '.' and ',' is refused.
    #[arg(long)]
    pub decimal_comma: bool,
}

/// `--delimiter`'s value: a name or the character.
fn parse_delimiter(s: &str) -> Result<u8, String> {
    match s.to_ascii_lowercase().as_str() {
        "comma" | "," => Ok(b','),
        "semicolon" | ";" => Ok(b';'),
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        "pipe" | "|" => Ok(b'|'),
        _ => Err(format!(
            "'{s}' is not a delimiter: use comma, semicolon, tab or pipe"
        )),
    }
}

impl LogArgs {
    /// Refuses `--class`/`--go-class` for a model whose classes they are not: a two-sided
    /// model, or another list of names, another order or another GO class (the labels
    /// would be coded in another order than the model's rows). Tokens may differ: a field
    /// log may spell its labels otherwise.
    fn same_classes_as(&self, fm: &FloatModel, path: &std::path::Path) -> Result<()> {
        let Some(given) = self.declared_classes()? else {
            return Ok(());
        };
        let Some(fc) = &fm.classes else {
            anyhow::bail!(
                "--class: {} is a two-sided (GO / NO-GO) model; --class applies to a model of several classes (map labels with --go-labels / --nogo-labels)",
                path.display()
            );
        };
        let names: Vec<&str> = given.names().collect();
        let model: Vec<&str> = fc.rows.iter().map(|r| r.name.as_str()).collect();
        let go = given.go.map(usize::from);
        if names != model || go != fc.go {
            let go_name = |g: Option<usize>, n: &[&str]| {
                g.and_then(|k| n.get(k).copied())
                    .unwrap_or("none")
                    .to_string()
            };
            anyhow::bail!(
                "--class/--go-class name the classes {} (GO: {}), but {} decides between {} (GO: {}), in that order; give its classes in its order, or leave --class out to read with the model's",
                names.join(", "),
                go_name(go, &names),
                path.display(),
                model.join(", "),
                go_name(fc.go, &model)
            );
        }
        Ok(())
    }

    /// The classes `--class` and `--go-class` declare (`None` without `--class`).
    ///
    /// # Errors
    /// The list `Classes::declared` refuses (count, names, tokens, the GO class), naming
    /// the classes and the flag.
    pub fn declared_classes(&self) -> Result<Option<crate::ingest::classes::Classes>> {
        use crate::ingest::classes::{Classes, GoClass};
        if self.classes.is_empty() {
            return Ok(None);
        }
        let go = self
            .go_class
            .as_deref()
            .map_or(GoClass::Default, GoClass::parse);
        Classes::declared(self.classes.clone(), &go)
            .map(Some)
            .map_err(|e| anyhow::anyhow!(e))
    }

    /// The reader options these flags ask for (`quiet` turns progress off). Declared
    /// classes are checked by [`Self::declared_classes`], which `train` calls first; a list
    /// it refuses is left out here (the other commands take their classes from the model).
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
            classes: self.declared_classes().ok().flatten(),
            skip_bad_rows: self.skip_bad_rows,
            max_line_len: d.max_line_len,
            max_rows: self.max_rows,
            progress: !quiet && std::io::stderr().is_terminal(),
            label_optional: false,
            delimiter: self.delimiter,
            decimal_comma: self.decimal_comma.then_some(true),
            keep_times: false,
            digest: true,
        }
    }
}

impl LogArgs {
    /// The reader options for a log the model `fm` (read from `path`) reads: what these
    /// flags say, and where they say nothing, how the model's training log was read (each
    /// value so taken is added to `settings` with the model as its source).
    ///
    /// # Errors
    /// `--class`/`--go-class` that are not the model's classes (names, order, GO class):
    /// the labels would be coded in another order than the model's rows.
    pub fn options_for_model(
        &self,
        quiet: bool,
        fm: &FloatModel,
        path: &std::path::Path,
        settings: &mut Vec<Setting>,
    ) -> Result<LogOptions> {
        self.same_classes_as(fm, path)?;
        let mut o = self.options(quiet);
        let Some(rw) = &fm.provenance.read_with else {
            return Ok(o);
        };
        let mut took = |flag: &str, value: Vec<String>| {
            settings.retain(|s| s.flag != flag);
            settings.push(Setting {
                flag: flag.into(),
                value,
                source: format!("model {}", path.display()),
            });
        };
        let d = LogOptions::default();
        let mut column = |given: &Option<String>,
                          rec: &Option<String>,
                          slot: &mut Option<String>,
                          flag: &str| {
            if let (None, Some(v)) = (given, rec) {
                *slot = Some(v.clone());
                took(flag, vec![v.clone()]);
            }
        };
        column(&self.label, &rw.label, &mut o.label, "--label");
        column(&self.unit_id, &rw.unit_id, &mut o.unit_id, "--unit-id");
        column(
            &self.timestamp,
            &rw.timestamp,
            &mut o.timestamp,
            "--timestamp",
        );
        if self.ignore.is_empty() && !rw.ignore.is_empty() {
            o.ignore = rw.ignore.clone();
            took("--ignore", rw.ignore.clone());
        }
        if self.go_labels.is_none() && rw.go_labels != d.go_labels {
            o.go_labels = rw.go_labels.clone();
            took("--go-labels", rw.go_labels.clone());
        }
        if self.nogo_labels.is_none() && rw.nogo_labels != d.nogo_labels {
            o.nogo_labels = rw.nogo_labels.clone();
            took("--nogo-labels", rw.nogo_labels.clone());
        }
        if self.classes.is_empty() && !rw.classes.is_empty() {
            let go = rw
                .go_class
                .as_deref()
                .map_or(crate::ingest::classes::GoClass::None, |g| {
                    crate::ingest::classes::GoClass::parse(g)
                });
            // The model's own list, checked when it was trained.
            if let Ok(c) = crate::ingest::classes::Classes::declared(rw.classes.clone(), &go) {
                took(
                    "--class",
                    c.list
                        .iter()
                        .map(|c| format!("{}={}", c.name, c.tokens.join(",")))
                        .collect(),
                );
                took("--go-class", vec![c.go_name()]);
                o.classes = Some(c);
            }
        }
        if !self.skip_bad_rows && rw.skip_bad_rows {
            o.skip_bad_rows = true;
            took("--skip-bad-rows", vec!["true".into()]);
        }
        if let (None, Some(c)) = (self.delimiter, rw.delimiter)
            && let Ok(b) = u8::try_from(u32::from(c))
        {
            o.delimiter = Some(b);
            took("--delimiter", vec![c.to_string()]);
        }
        if let (false, Some(true)) = (self.decimal_comma, rw.decimal_comma) {
            o.decimal_comma = Some(true);
            took("--decimal-comma", vec!["true".into()]);
        }
        Ok(o)
    }
}

#[derive(Args, Clone)]
pub struct ReleaseArgs {
    /// Float model (from `linegate train`; or `[outputs] model` in the project file).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// The training log's files (repeat the flag, or give a quoted glob pattern such as
    /// 'logs/day-*.csv'). Default: the files the model records. Their SHA-256 must be the
    /// model's; a holdout split recorded by `train` is taken out again and audited as the
    /// log "held-out".
    #[arg(long, value_name = "LOG")]
    pub train: Vec<PathBuf>,
    /// A holdout log, audited too (named "holdout" in the reports); repeat the flag or give
    /// a glob pattern for a log of several files.
    #[arg(long, value_name = "LOG")]
    pub holdout: Vec<PathBuf>,
    /// Further validation logs, each audited and gated on its own (repeat the flag; named
    /// "validation-1", "validation-2", … in the reports). Each is a file, or a quoted glob
    /// pattern naming the several files of one log.
    #[arg(long, value_name = "LOG")]
    pub validate: Vec<PathBuf>,
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
    /// RECHECK half-band around the threshold, in float score units. Default: the band of
    /// the model's operating point (chosen by `train` on held-out scores), else 0.
    #[arg(long, value_name = "BAND")]
    pub recheck_band: Option<f64>,
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
    /// Most NO-GO units the device may pass, per log: a count (e.g. 0), a rate of the log's
    /// NO-GO units (e.g. 0.1%), or a rate the log must show at a confidence level (e.g.
    /// 1%@95%: the exact one-sided upper bound on the false-GO rate at most 1 %).
    /// Default: the model's operating point (its false-GO target, or the upper bound of the
    /// false-GO rate on the held-out units it was chosen on), else 0.
    #[arg(long, value_name = "LIMIT")]
    pub max_false_go: Option<Limit>,
    /// Most GO units the device may turn away (NO-GO, or FAULT on a GO unit), per log: a count,
    /// a rate of the log's GO units, or a bound such as 2%@95%.
    /// Default: 1 %, or the upper bound of the false-NO-GO rate on the held-out units the
    /// model's operating point was chosen on, if that is higher.
    #[arg(long, value_name = "LIMIT")]
    pub max_false_nogo: Option<Limit>,
    /// Most units sent to retest (RECHECK), per log: a count, a rate of all its units, or a
    /// bound such as 5%@95%.
    /// Default: 5 %, or the upper bound of the RECHECK share on the held-out units the model's
    /// operating point was chosen on, if that is higher.
    #[arg(long, value_name = "LIMIT")]
    pub max_recheck: Option<Limit>,
    /// Do not fail units whose GO/NO-GO verdict the declared noise could swap (by default
    /// such a unit must fall in the RECHECK band).
    #[arg(long)]
    pub no_noise_gate: bool,
    /// Widen the RECHECK band to the one the noise analysis suggests (until no unit's GO/NO-GO
    /// verdict can be swapped by the declared noise); the report records the band used.
    #[arg(long)]
    pub apply_suggested_band: bool,
    /// Use the word lengths the sweep recommends (the narrowest that pass) instead of
    /// --weight-bits/--input-bits; the report records them.
    #[arg(long)]
    pub apply_recommended_format: bool,
    /// Sign the blob with this private key file (from `linegate key new`): a version-2
    /// blob that a device built with the matching public key requires. The audit report
    /// then records the key id and the signed blob's SHA-256.
    #[arg(long, value_name = "KEY_FILE")]
    pub sign: Option<PathBuf>,
    /// A model of several classes: the most units of a failure class that may be decided
    /// another failure class (misrouted), per class and log: a count (0), a rate (1%) or a
    /// rate the log must show at a confidence (1%@95%). Default 1%.
    #[arg(long, value_name = "LIMIT")]
    pub max_misroute: Option<Limit>,
}

impl ReleaseArgs {
    /// The files this command reads, for the output set: no output may replace one.
    pub fn name_inputs(&self, set: &mut crate::output::OutputSet) {
        if let Some(m) = &self.model {
            set.input("float model (--model)", m);
        }
        for t in &self.train {
            set.input("training log (--train)", t);
        }
        for h in &self.holdout {
            set.input("holdout log (--holdout)", h);
        }
        for v in &self.validate {
            set.input("validation log (--validate)", v);
        }
        if let Some(k) = &self.sign {
            set.input("private key (--sign)", k);
        }
    }
}

/// What `audit` and `pack` work from.
pub struct Release {
    pub fm: FloatModel,
    pub train: Dataset,
    /// Holdout and validation logs, with their report names.
    pub others: Vec<(String, Dataset)>,
    pub qc: QuantConfig,
    pub noise: Vec<Option<f64>>,
    pub ac: AuditConfig,
    pub apply: Apply,
    pub quiet: bool,
    /// The release key, when the blob is to be signed.
    pub signer: Option<ed25519_dalek::SigningKey>,
    /// Settings taken from the model's operating point, in words (recorded in the report).
    pub from_model: Vec<String>,
    /// Every setting with its source (recorded in the report; `pack` compares them).
    pub settings: Vec<Setting>,
    /// The misrouting limit of a model of several classes (`--max-misroute`, else 1 %).
    pub max_misroute: Limit,
}

impl Release {
    /// The holdout and validation logs as the audit takes them.
    pub fn named_others(&self) -> Vec<(&str, &Dataset)> {
        self.others.iter().map(|(n, d)| (n.as_str(), d)).collect()
    }

    /// The release step `audit` and `pack` share ([`release_step::release`]), applying what
    /// `--apply-…` asked. Says on stderr what it chose, so no default changes a verdict
    /// silently.
    pub fn run(&mut self) -> Result<ReleaseOutcome> {
        let others = self.named_others();
        let done = release_step::release(&ReleaseRequest {
            fm: &self.fm,
            train: &self.train,
            others: &others,
            qc: self.qc,
            noise: &self.noise,
            ac: self.ac,
            apply: self.apply,
            signer: self.signer.as_ref(),
            from_model: self.from_model.clone(),
            settings: self.settings.clone(),
            command_line: Some(command_line()),
        })?;
        if !self.quiet {
            for a in &done.report.applied {
                eprintln!("applied: {a}");
            }
            for a in &done.report.from_model {
                eprintln!("from the model's operating point: {a}");
            }
        }
        self.qc = done.qc;
        Ok(done)
    }
}

/// This process's command line as a shell would take it back: the program's name, then
/// each argument, quoted with single quotes where it holds anything but plain characters.
pub(super) fn command_line() -> String {
    let plain = |a: &str| {
        !a.is_empty()
            && a.bytes()
                .all(|b| b.is_ascii_alphanumeric() || b"-_./=:,+@%".contains(&b))
    };
    std::iter::once("linegate".to_string())
        .chain(std::env::args().skip(1).map(|a| {
            if plain(&a) {
                a
            } else {
                format!("'{}'", a.replace('\'', "'\\''"))
            }
        }))
        .collect::<Vec<_>>()
        .join(" ")
}

/// Reads the model and logs and validates the flags `audit` and `pack` share.
///
/// # Errors
/// Unreadable or mismatched files, and `--noise` entries that name no channel or no number.
pub fn release_inputs(r: &ReleaseArgs, quiet: bool, mut settings: Vec<Setting>) -> Result<Release> {
    let model_path = super::settings::required(&r.model, "--model", "[outputs] model")?;
    let fm = FloatModel::read(model_path)?;
    if r.max_misroute.is_some() && fm.classes.is_none() {
        anyhow::bail!(
            "--max-misroute applies to a model of several classes; {} is two-sided (GO / NO-GO)",
            model_path.display()
        );
    }
    let mut opts = r
        .log_args
        .options_for_model(quiet, &fm, model_path, &mut settings)?;
    opts.keep_times = fm
        .provenance
        .holdout_split
        .as_ref()
        .is_some_and(|s| s.after.is_some());
    if r.train.is_empty() {
        settings.push(Setting {
            flag: "--train".into(),
            value: release_step::recorded_training_files(&fm)
                .iter()
                .map(|f| f.display().to_string())
                .collect(),
            source: format!("model {}", model_path.display()),
        });
    }
    let ReleaseLogs { train, others } = release_step::load_logs(
        &fm,
        model_path,
        (!r.train.is_empty()).then_some(r.train.as_slice()),
        &r.holdout,
        &r.validate,
        &opts,
    )?;
    let noise = crate::release::tolerance::declared_noise(&fm, &r.noise)?;
    let given = GivenGates {
        max_false_go: r.max_false_go,
        max_false_nogo: r.max_false_nogo,
        max_recheck: r.max_recheck,
        recheck_band: r.recheck_band,
    };
    let qc = QuantConfig {
        input_bits: r.input_bits,
        weight_bits: r.weight_bits,
        optimise: !r.no_optimise,
        acc_bits: r.acc_bits,
        recheck_band: model_gates::recheck_band(&given, &fm),
    };
    if let (Some(b), Some(op), false) = (r.recheck_band, &fm.operating_point, quiet)
        && b != op.band
    {
        {
            eprintln!(
                "note: --recheck-band {b} replaces the band ±{} of the model's operating point, chosen by train on {}",
                op.band, op.source
            );
        }
    }
    let (gates, from_model) = model_gates::model_gates(&given, &fm, qc.recheck_band);
    let ac = AuditConfig {
        min_margin_lsb: r.min_margin_lsb,
        max_flips: r.max_flips,
        require_guarantee: !r.no_require_guarantee,
        max_false_go: gates.0,
        max_false_nogo: gates.1,
        max_recheck: gates.2,
        noise_gate: !r.no_noise_gate,
    };
    if !quiet {
        super::warn_skipped(&train.name(), &train.skipped);
        for (_, ds) in &others {
            super::warn_skipped(&ds.name(), &ds.skipped);
        }
    }
    Ok(Release {
        fm,
        train,
        others,
        qc,
        noise,
        ac,
        apply: Apply {
            recommended_format: r.apply_recommended_format,
            suggested_band: r.apply_suggested_band,
            progress: !quiet && std::io::stderr().is_terminal(),
        },
        quiet,
        signer: r.sign.as_deref().map(sign::read_secret).transpose()?,
        from_model,
        settings,
        max_misroute: r
            .max_misroute
            .unwrap_or(crate::release::class_gates::DEFAULT_MISROUTE),
    })
}

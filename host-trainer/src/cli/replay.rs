//! `linegate replay`: the device kernel over a log (one or several files), printing each
//! unit in a form (`field::score`): the device's own lines, those lines with the unit's id,
//! timestamp and fault names, CSV or JSON Lines.

use std::path::PathBuf;

use crate::field::score::{self, Form, Printer, ReleaseIds};
use crate::ingest::LogOptions;
use anyhow::Result;
use clap::Args;

use super::CheckFailed;
use super::args::LogArgs;
use crate::output::OutputSet;
use crate::release::{replay, sign};
use crate::train::float_model::FloatModel;

/// Flags of `linegate replay`.
#[derive(Args)]
pub struct ReplayArgs {
    /// The log: a bench log (delimited text or Parquet) or, for a model with signal
    /// features, a signal log (file or folder). Several files (or a quoted glob pattern)
    /// are one log: units are numbered on over the files.
    #[arg(value_name = "LOG", required = true)]
    pub log: Vec<PathBuf>,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// The blob (default: `[outputs] blob` of the project file).
    #[arg(long)]
    pub blob: Option<PathBuf>,
    /// The float model (its channel scaling converts physical readings to raw; the log is
    /// read with the columns and label tokens it was trained with unless flags say
    /// otherwise). The blob must be one this model produces; exit 1 if not. Default:
    /// `[outputs] model` of the project file.
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Require a valid signature by this public key file (from `linegate key new`) before
    /// replaying; exit 1 if the blob is unsigned, signed by another key, or changed after
    /// signing.
    #[arg(long, value_name = "PUB_FILE")]
    pub public_key: Option<PathBuf>,
    /// How each unit is printed. device: exactly the device's lines (`<index> GO 1234`,
    /// `<index> FAULT ch0`), byte for byte, to diff with a device's serial log. text: the
    /// device's line, then ` # ` and `unit=<id> time=<timestamp>` (when the log has those
    /// columns), `channel=<name>` or `signal=<name>` for a FAULT, `file=<path>` (several
    /// files) and `line=<n>`; everything before ` # ` is the device's line. csv: a header
    /// row and one RFC 4180 row per unit: file, line, index, unit_id, timestamp, label,
    /// agrees, verdict, score, fault, fault_name. json: JSON Lines, first the release
    /// (model id, blob id, key id, model line, files), then one object per unit with the
    /// CSV's fields.
    #[arg(long, value_enum, default_value = "text")]
    pub form: FormArg,
    /// Write the lines to this file (all or nothing) instead of standard output.
    #[arg(short = 'o', long)]
    pub output: Option<PathBuf>,
    /// Also write the raw test vectors here (one unit per line).
    #[arg(long)]
    pub vectors: Option<PathBuf>,
    /// Overwrite the output and vectors files.
    #[arg(long)]
    pub force: bool,
}

/// `--form`'s values.
#[derive(Clone, Copy, clap::ValueEnum)]
pub enum FormArg {
    /// Exactly the device's lines.
    Device,
    /// The device's line, then ` # ` and the unit's id, timestamp, fault name and line.
    Text,
    /// CSV with a header row (RFC 4180).
    Csv,
    /// JSON Lines: the release, then one object per unit.
    Json,
}

impl From<FormArg> for Form {
    fn from(f: FormArg) -> Self {
        match f {
            FormArg::Device => Form::Device,
            FormArg::Text => Form::Text,
            FormArg::Csv => Form::Csv,
            FormArg::Json => Form::Json,
        }
    }
}

impl ReplayArgs {
    /// Runs `linegate replay`. Every check that can fail on the blob, the model, the key or
    /// the log's header runs before the first line is printed.
    pub fn run(&self, quiet: bool, mut settings: Vec<crate::project::Setting>) -> Result<()> {
        let model = super::settings::required(&self.model, "--model", "[outputs] model")?;
        let blob = super::settings::required(&self.blob, "--blob", "[outputs] blob")?;
        let fm = FloatModel::read(model)?;
        let (bytes, m) = super::read_blob_of_model(&fm, blob, model)?;
        if let Some(k) = &self.public_key {
            let key = sign::read_public(k)?;
            sign::verify(&bytes, &key)
                .map_err(|e| CheckFailed(format!("{}: {e} ({})", blob.display(), k.display())))?;
        } else if shared_model::blob::signature(&bytes).is_some() && !quiet {
            eprintln!(
                "note: {} is signed, but its signature was not checked: give --public-key",
                blob.display()
            );
        }
        let files = super::log_files(&self.log, "name the log (or several files of it)")?;
        let printer = Printer::new(self.form.into(), &files, &fm, &m);
        let ids = ReleaseIds::of_blob(&m, &bytes);
        let mut sink = Sink::new(printer.head(&ids), self.output.is_some());
        let mut vec_text = self
            .vectors
            .as_ref()
            .map(|_| replay::model_line(&m, &bytes));
        let mut skipped = crate::ingest::SkipReport::default();
        // New units have no verdict yet: replay scores logs without a label column.
        // Replay prints no digest of the log, so it hashes none. Timestamps are kept for
        // the forms that show them.
        let opts = LogOptions {
            label_optional: true,
            digest: false,
            keep_times: true,
            ..self
                .log_args
                .options_for_model(quiet, &fm, model, &mut settings)?
        };
        // A bench log or a signal log, as the float model says; the vectors hold each
        // unit's reading channels' raw readings and then every signal's window, as the
        // example device application takes them.
        let streamed = score::score_logs(&files, &opts, &fm, &m, &mut skipped, |u| {
            sink.unit(|out| printer.unit(out, u));
            if let Some(t) = vec_text.as_mut() {
                t.push_str(&replay::vector(u.raw, u.windows));
                t.push('\n');
            }
        });
        // On standard output the lines before an error are the device's too: they go out
        // before the error (none if the log failed before its first unit).
        let text = sink.finish(streamed.is_ok());
        streamed?;
        if !quiet {
            super::warn_skipped(&super::files_name(&files), &skipped);
        }
        let mut set = OutputSet::default();
        if let (Some(o), Some(text)) = (&self.output, text) {
            set.add(o, text);
        }
        if let (Some(v), Some(text)) = (&self.vectors, vec_text) {
            set.add(v, text);
        }
        if set.paths().next().is_some() {
            set.commit(self.force)?;
        }
        Ok(())
    }
}

/// Where the lines go: standard output in 64 KiB batches (one write per unit would be a
/// system call per unit), or a buffer for `-o`. The head (model line, CSV header, release
/// record) waits for the first unit, so a log that fails before it prints nothing.
struct Sink {
    pending: Option<String>,
    out: String,
    to_file: bool,
}

impl Sink {
    fn new(head: String, to_file: bool) -> Self {
        Self {
            pending: Some(head),
            out: String::with_capacity(1 << 16),
            to_file,
        }
    }

    /// One unit, written by `write` (line end included).
    fn unit(&mut self, write: impl FnOnce(&mut String)) {
        if let Some(p) = self.pending.take() {
            self.out.push_str(&p);
        }
        write(&mut self.out);
        if !self.to_file && self.out.len() >= 1 << 16 {
            flush(&mut self.out);
        }
    }

    /// Ends the run: on success the head goes out even after no unit; the text for `-o`,
    /// if that is where the lines go.
    fn finish(mut self, ok: bool) -> Option<Vec<u8>> {
        if ok && let Some(p) = self.pending.take() {
            self.out.push_str(&p);
        }
        if self.to_file {
            return Some(self.out.into_bytes());
        }
        flush(&mut self.out);
        None
    }
}

/// Writes the batch to stdout; a reader that goes away ends the process quietly, as `say!`
/// does.
fn flush(out: &mut String) {
    use std::io::Write as _;
    if std::io::stdout().write_all(out.as_bytes()).is_err() {
        std::process::exit(141);
    }
    out.clear();
}

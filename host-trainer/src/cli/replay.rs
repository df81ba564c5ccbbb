//! `linegate replay`: the device kernel over a log, printing the lines the device prints.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;
use host_trainer::ingest::LogOptions;

use super::CheckFailed;
use super::args::LogArgs;
use host_trainer::output::OutputSet;
use host_trainer::release::{replay, sign};
use host_trainer::train::float_model::FloatModel;

/// Flags of `linegate replay`.
#[derive(Args)]
pub struct ReplayArgs {
    /// Bench log: delimited text (CSV, TSV, semicolon…) or Parquet.
    pub log: PathBuf,
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

impl ReplayArgs {
    /// Runs `linegate replay`. Every check that can fail on the blob, the model, the key or
    /// the log's header runs before the first line is printed.
    pub fn run(
        &self,
        quiet: bool,
        mut settings: Vec<host_trainer::project::Setting>,
    ) -> Result<()> {
        let model = super::settings::required(&self.model, "--model", "[outputs] model")?;
        let blob = super::settings::required(&self.blob, "--blob", "[outputs] blob")?;
        let fm = FloatModel::read(model)?;
        let bytes = host_trainer::input::read_bounded(
            blob,
            "model blob",
            host_trainer::input::MAX_IMAGE_FILE,
        )?;
        let m = super::blob_of_model(&fm, &bytes, blob, model)?;
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
        let mut sink = Sink::new(replay::model_line(&m, &bytes), self.output.is_some());
        let mut vec_text = self
            .vectors
            .as_ref()
            .map(|_| replay::model_line(&m, &bytes));
        let mut skipped = host_trainer::ingest::SkipReport::default();
        // New units have no verdict yet: replay scores logs without a label column.
        // Replay prints no digest of the log, so it hashes none.
        let opts = LogOptions {
            label_optional: true,
            digest: false,
            ..self
                .log_args
                .options_for_model(quiet, &fm, model, &mut settings)
        };
        // A bench log or a signal log, as the float model says; the vectors hold each
        // unit's reading channels' raw readings and then every signal's window, as the
        // example device application takes them.
        let streamed =
            replay::replay_log(&self.log, &opts, &fm, &m, &mut skipped, |line, raw, w| {
                sink.line(line);
                if let Some(t) = vec_text.as_mut() {
                    t.push_str(&replay::vector(raw, w));
                    t.push('\n');
                }
            });
        // On standard output the lines before an error are the device's too: they go out
        // before the error (none if the log failed before its first unit).
        let text = sink.finish(streamed.is_ok());
        streamed?;
        if !quiet {
            super::warn_skipped(&self.log, &skipped);
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
/// system call per unit), or a buffer for `-o`. The model line waits for the first unit,
/// so a log that fails before it prints nothing.
struct Sink {
    pending: Option<String>,
    out: Vec<u8>,
    to_file: bool,
}

impl Sink {
    fn new(model_line: String, to_file: bool) -> Self {
        Self {
            pending: Some(model_line),
            out: Vec::with_capacity(1 << 16),
            to_file,
        }
    }

    fn line(&mut self, line: &str) {
        if let Some(p) = self.pending.take() {
            self.out.extend_from_slice(p.as_bytes());
        }
        self.out.extend_from_slice(line.as_bytes());
        self.out.push(b'\n');
        if !self.to_file && self.out.len() >= 1 << 16 {
            flush(&mut self.out);
        }
    }

    /// Ends the run: on success the model line goes out even after no unit; the text for
    /// `-o`, if that is where the lines go.
    fn finish(mut self, ok: bool) -> Option<Vec<u8>> {
        if ok && let Some(p) = self.pending.take() {
            self.out.extend_from_slice(p.as_bytes());
        }
        if self.to_file {
            return Some(self.out);
        }
        flush(&mut self.out);
        None
    }
}

/// Writes the batch to stdout; a reader that goes away ends the process quietly, as `say!`
/// does.
fn flush(out: &mut Vec<u8>) {
    use std::io::Write as _;
    if std::io::stdout().write_all(out).is_err() {
        std::process::exit(141);
    }
    out.clear();
}

//! `linegate replay`: the device kernel over a log, printing the lines the device prints.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;
use host_trainer::ingest::LogOptions;

use super::args::LogArgs;
use host_trainer::output::OutputSet;
use host_trainer::release::replay;
use host_trainer::train::float_model::FloatModel;

/// Flags of `linegate replay`.
#[derive(Args)]
pub struct ReplayArgs {
    /// Bench log: delimited text (CSV, TSV, semicolon…) or Parquet.
    pub log: PathBuf,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// The blob.
    #[arg(long)]
    pub blob: PathBuf,
    /// The float model (its channel scaling converts physical readings to raw).
    #[arg(long)]
    pub model: PathBuf,
    /// Also write the raw test vectors here (one unit per line).
    #[arg(long)]
    pub vectors: Option<PathBuf>,
    /// Overwrite the vectors file.
    #[arg(long)]
    pub force: bool,
}

impl ReplayArgs {
    /// Runs `linegate replay`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let Self {
            log,
            log_args,
            blob,
            model,
            vectors,
            force,
        } = self;
        let fm = FloatModel::read(model)?;
        let bytes = host_trainer::input::read_bounded(
            blob,
            "model blob",
            host_trainer::input::MAX_IMAGE_FILE,
        )?;
        if !fm.signals.is_empty() {
            return self.run_signals(&fm, &bytes, quiet);
        }
        let m = shared_model::blob::decode(&bytes).map_err(|e| match e {
            shared_model::DecodeError::Signals => anyhow::anyhow!(
                "{}: the blob's channels include features of sample windows (format version {}), but the float model {} has no signals: give the float model the blob was packed from",
                blob.display(),
                shared_model::blob::Header::read(&bytes).map_or(0, |h| h.version),
                model.display()
            ),
            e => anyhow::anyhow!("{}: {e}", blob.display()),
        })?;
        // Streams: a log of any length, one line out per unit in.
        let line = replay::model_line(&m, &bytes);
        let mut vec_text = vectors.as_ref().map(|_| line.clone());
        say_raw!("{line}");
        let mut index = 0usize;
        let mut skipped = host_trainer::ingest::SkipReport::default();
        let mut out: Vec<u8> = Vec::with_capacity(1 << 16);
        let streamed = host_trainer::ingest::stream_units(
            log,
            // New units have no verdict yet: replay scores logs without a label column.
            // Replay prints no digest of the log, so it hashes none.
            &LogOptions {
                label_optional: true,
                digest: false,
                ..log_args.options(quiet)
            },
            &fm.channels,
            &mut skipped,
            |u| {
                put_line(&mut out, &replay::line(index, &m, u.raw));
                if let Some(t) = vec_text.as_mut() {
                    let row: Vec<String> = u.raw.iter().map(|r| r.to_string()).collect();
                    t.push_str(&row.join(" "));
                    t.push('\n');
                }
                index += 1;
                Ok(())
            },
        );
        // The lines before an error are the device's too: they go out before the error.
        flush(&mut out);
        streamed?;
        if !quiet {
            super::warn_skipped(log, &skipped);
        }
        if let (Some(v), Some(text)) = (vectors, vec_text) {
            let mut set = OutputSet::default();
            set.add(v, text);
            set.commit(*force)?;
        }
        Ok(())
    }

    /// Replay of a model with signal features over a signal log: each unit's windows go to
    /// the device's entry point ([`replay::signal_line`]). The vectors hold, per unit, the
    /// reading channels' raw readings and then every signal's window, as the example
    /// device application takes them.
    fn run_signals(&self, fm: &FloatModel, bytes: &[u8], quiet: bool) -> Result<()> {
        let m = shared_model::blob::decode_signals(bytes)
            .map_err(|e| anyhow::anyhow!("{}: {e}", self.blob.display()))?;
        if m.signals().is_empty() {
            anyhow::bail!(
                "{}: the blob has no signals (format version {}): it was packed from a model of readings, not from the float model {}",
                self.blob.display(),
                shared_model::blob::Header::read(bytes).map_or(0, |h| h.version),
                self.model.display()
            );
        }
        if m.signals() != &fm.signal_section() {
            anyhow::bail!(
                "{}: the blob's signals or channel sources differ from those of the float model {}; give the float model the blob was packed from",
                self.blob.display(),
                self.model.display()
            );
        }
        let line = replay::model_line(m.model(), bytes);
        let mut vec_text = self.vectors.as_ref().map(|_| line.clone());
        say_raw!("{line}");
        let mut skipped = host_trainer::ingest::SkipReport::default();
        let mut out: Vec<u8> = Vec::with_capacity(1 << 16);
        let streamed = replay::replay_signal_log(
            &self.log,
            &LogOptions {
                label_optional: true,
                digest: false,
                ..self.log_args.options(quiet)
            },
            fm,
            &m,
            &mut skipped,
            |line, raw, windows| {
                put_line(&mut out, line);
                if let Some(t) = vec_text.as_mut() {
                    t.push_str(&replay::signal_vector(raw, windows));
                    t.push('\n');
                }
            },
        );
        flush(&mut out);
        streamed?;
        if !quiet {
            super::warn_skipped(&self.log, &skipped);
        }
        if let (Some(v), Some(text)) = (&self.vectors, vec_text) {
            let mut set = OutputSet::default();
            set.add(v, text);
            set.commit(self.force)?;
        }
        Ok(())
    }
}

/// Lines go out in 64 KiB batches: one write per unit would be a system call per unit.
fn put_line(out: &mut Vec<u8>, line: &str) {
    out.extend_from_slice(line.as_bytes());
    out.push(b'\n');
    if out.len() >= 1 << 16 {
        flush(out);
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

//! `linegate values`: each unit's channel values as the device computes them (physical,
//! raw, scaled input), its score and its replay line, as a table, CSV or JSON.

use crate::release::pack::DeviceModel;
use std::path::PathBuf;

use crate::ingest::{LogOptions, SkipReport};
use crate::release::replay;
use crate::release::values::{self, ChannelInfo, Selection, UnitValues};
use crate::train::float_model::FloatModel;
use anyhow::Result;
use clap::Args;

/// The blob's model: of readings or with signal features.
type Model = DeviceModel;

use super::args::LogArgs;
use super::{shown, to_json};

/// The CSV columns, in order (README, "values").
pub const CSV_HEADER: [&str; 14] = [
    "index",
    "line",
    "unit_id",
    "channel",
    "name",
    "source",
    "unit",
    "physical",
    "raw",
    "scaled",
    "fault",
    "score",
    "verdict",
    "device_line",
];

/// Flags of `linegate values`.
#[derive(Args)]
pub struct ValuesArgs {
    /// Log: a bench log (one row per unit; CSV, TSV, Parquet…) or, for a model with signal
    /// features, a signal log (one row per sample). Read as `replay` reads it.
    pub log: PathBuf,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// The float model (its channel scaling converts physical readings to raw counts; the
    /// log is read with the columns and label tokens it was trained with unless flags say
    /// otherwise). Default: `[outputs] model` of the project file.
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// The blob, whose own conversions, weights and thresholds are then used. It must be
    /// one the model produces (exit 1 if not, as for replay). Without it the model is
    /// quantised plainly at --input-bits/--weight-bits: a packed blob's weights may differ
    /// by one LSB, so give the blob for the device's exact scores.
    #[arg(long)]
    pub blob: Option<PathBuf>,
    /// Without --blob: scaled input word, 8 or 16 bits.
    #[arg(long, default_value_t = 16, conflicts_with = "blob")]
    pub input_bits: u8,
    /// Without --blob: weight word, 2..=32 bits.
    #[arg(long, default_value_t = 16, conflicts_with = "blob")]
    pub weight_bits: u8,
    /// Show the unit(s) with this id (the log's unit-id column); repeat for more. An id no
    /// unit has is an error.
    #[arg(long = "unit", value_name = "ID")]
    pub units: Vec<String>,
    /// Show the unit whose first row is on this line of the log (1-based, the header is
    /// line 1); repeat for more.
    #[arg(long = "line", value_name = "N")]
    pub lines: Vec<u64>,
    /// Show at most the first N units (of those picked).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
    pub limit: Option<u64>,
    /// One CSV row per unit and channel, with a header (columns in the README).
    #[arg(long, conflicts_with = "json")]
    pub csv: bool,
    /// JSON: the model's channels and conversions, then every unit.
    #[arg(long)]
    pub json: bool,
}

impl ValuesArgs {
    /// Runs `linegate values`. Nothing is printed unless the whole log was read and every
    /// unit asked for was found.
    pub fn run(&self, quiet: bool, mut settings: Vec<crate::project::Setting>) -> Result<()> {
        let model_path = super::settings::required(&self.model, "--model", "[outputs] model")?;
        let fm = FloatModel::read(model_path)?;
        let (model, blob) = self.device_model(&fm)?;
        let blob_id = blob.as_ref().map(|b| b.0.as_str());
        let model_line = blob.as_ref().map(|b| b.1.as_str());
        let opts = LogOptions {
            label_optional: true,
            digest: false,
            ..self
                .log_args
                .options_for_model(quiet, &fm, model_path, &mut settings)?
        };
        let sel = Selection {
            units: self.units.clone(),
            lines: self.lines.clone(),
            limit: self.limit.map(|n| usize::try_from(n).unwrap_or(usize::MAX)),
        };
        let mut skipped = SkipReport::default();
        let units = values::unit_values(&self.log, &opts, &fm, &model, &sel, &mut skipped)?;
        if !quiet {
            super::warn_skipped(&self.log, &skipped);
        }
        let info = values::channel_info(&fm, &model);
        let text = if self.json {
            json(&fm, &model, (blob_id, model_line), &info, &units)
        } else if self.csv {
            csv(&info, &units)?
        } else {
            table(&model, self.head(model_line, &model), &info, &units)
        };
        say_raw!("{text}");
        Ok(())
    }

    /// The blob checked against the model as replay checks it, or the model quantised
    /// plainly; with the blob's id (its CRC-32, hex) and replay's model line when there is
    /// a blob.
    fn device_model(&self, fm: &FloatModel) -> Result<(Model, Option<(String, String)>)> {
        let Some(path) = &self.blob else {
            let m = values::plain_model(fm, self.input_bits, self.weight_bits)?;
            return Ok((m, None));
        };
        let model = self.model.as_deref().unwrap_or(std::path::Path::new(""));
        let (bytes, m) = super::read_blob_of_model(fm, path, model)?;
        let id = format!("{:08x}", shared_model::blob::blob_id(&bytes).unwrap_or(0));
        let line = replay::model_line(&m, &bytes).trim_end().to_string();
        Ok((m, Some((id, line))))
    }

    /// The table's first line: replay's model line, or what stands in for the blob.
    fn head(&self, model_line: Option<&str>, model: &Model) -> String {
        let id = crate::digest::lower_hex(&model.model().model_id);
        match model_line {
            Some(line) => line.to_string(),
            // A class model's rows are rounded plainly, as its blob's are; its score is
            // the leading class's lead over the runner-up.
            None if model.classes().is_some() => format!(
                "# model {id}, no blob: the classes quantised as a blob at {}-bit inputs, {}-bit weights holds them; score = the leading class's lead over the runner-up",
                self.input_bits, self.weight_bits
            ),
            None => format!(
                "# model {id}, no blob: the float model quantised plainly ({}-bit inputs, {}-bit weights); a packed blob's weights may differ by 1 LSB: give --blob for its exact scores",
                self.input_bits, self.weight_bits
            ),
        }
    }
}

/// A physical value to the channel's resolution (the decimals of its lsb).
fn physical_text(v: Option<f64>, lsb: f64) -> String {
    let Some(v) = v else { return "-".into() };
    let decimals = (-lsb.log10()).ceil().clamp(0.0, 12.0) as usize;
    format!("{v:.decimals$}")
}

/// The readable table: per unit a heading with its score and replay line, then one row per
/// channel.
fn table(model: &Model, head: String, info: &[ChannelInfo], units: &[UnitValues]) -> String {
    let q = model.model().input_bits - 1;
    let mut out = format!(
        "{head}\n# physical = zero + lsb·raw (a reading: the log's value at the channel's resolution); raw: counts (a feature: its integer); scaled: the kernel's Q{q} input word\n"
    );
    if units.is_empty() {
        out.push_str("(no units)\n");
    }
    let names: Vec<String> = info.iter().map(|c| shown(&c.name)).collect();
    let wn = names
        .iter()
        .map(|n| n.chars().count())
        .max()
        .unwrap_or(0)
        .max(7);
    let ws = info
        .iter()
        .map(|c| c.source.chars().count())
        .max()
        .unwrap_or(0)
        .max(6);
    for u in units {
        let id = u
            .unit_id
            .as_deref()
            .map_or(String::new(), |id| format!(", id {}", shown(id)));
        let score = u
            .score
            .map_or("no score".to_string(), |s| format!("score {s}"));
        out.push_str(&format!(
            "\nunit {} (line {}{id}): {score}, replay line \"{}\"\n",
            u.index, u.line, u.device_line
        ));
        let rows: Vec<[String; 5]> = u
            .channels
            .iter()
            .enumerate()
            .map(|(i, v)| {
                let fault = v.fault_name(i).map(|f| format!("FAULT {f}"));
                let raw = v
                    .raw
                    .map_or_else(|| fault.clone().unwrap_or_default(), |r| r.to_string());
                let scaled = v
                    .scaled
                    .map_or_else(|| fault.clone().unwrap_or_default(), |x| x.to_string());
                [
                    i.to_string(),
                    physical_text(v.physical, info[i].lsb),
                    shown(&info[i].unit),
                    raw,
                    scaled,
                ]
            })
            .collect();
        let w = |k: usize, title: &str| {
            rows.iter()
                .map(|r| r[k].chars().count())
                .max()
                .unwrap_or(0)
                .max(title.chars().count())
        };
        let (wp, wu, wr, wx) = (w(1, "physical"), w(2, "unit"), w(3, "raw"), w(4, "scaled"));
        out.push_str(&format!(
            "  {:>3}  {:<wn$}  {:<ws$}  {:>wp$}  {:<wu$}  {:>wr$}  {:>wx$}\n",
            "ch", "channel", "source", "physical", "unit", "raw", "scaled"
        ));
        for (r, (n, c)) in rows.iter().zip(names.iter().zip(info)) {
            out.push_str(&format!(
                "  {:>3}  {n:<wn$}  {:<ws$}  {:>wp$}  {:<wu$}  {:>wr$}  {:>wx$}\n",
                r[0], c.source, r[1], r[2], r[3], r[4]
            ));
        }
    }
    out
}

/// One row per unit and channel, under [`CSV_HEADER`].
fn csv(info: &[ChannelInfo], units: &[UnitValues]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(CSV_HEADER)?;
    let opt = |v: Option<String>| v.unwrap_or_default();
    for u in units {
        for (i, (v, c)) in u.channels.iter().zip(info).enumerate() {
            w.write_record([
                u.index.to_string(),
                u.line.to_string(),
                opt(u.unit_id.clone()),
                i.to_string(),
                c.name.clone(),
                c.source.clone(),
                c.unit.clone(),
                opt(v.physical.map(|p| p.to_string())),
                opt(v.raw.map(|r| r.to_string())),
                opt(v.scaled.map(|x| x.to_string())),
                opt(v.fault_name(i)),
                opt(u.score.map(|s| s.to_string())),
                u.verdict.clone(),
                u.device_line.clone(),
            ])?;
        }
    }
    Ok(String::from_utf8(w.into_inner()?)?)
}

/// The model's channels and conversions, then every unit with its channels.
fn json(
    fm: &FloatModel,
    model: &Model,
    (blob_id, model_line): (Option<&str>, Option<&str>),
    info: &[ChannelInfo],
    units: &[UnitValues],
) -> String {
    let m = model.model();
    let units: Vec<serde_json::Value> = units
        .iter()
        .map(|u| {
            let channels: Vec<serde_json::Value> = u
                .channels
                .iter()
                .enumerate()
                .map(|(i, v)| {
                    serde_json::json!({
                        "channel": i,
                        "name": info[i].name,
                        "physical": v.physical,
                        "raw": v.raw,
                        "scaled": v.scaled,
                        "fault": v.fault_name(i),
                    })
                })
                .collect();
            serde_json::json!({
                "index": u.index,
                "line": u.line,
                "unit_id": u.unit_id,
                "channels": channels,
                "score": u.score,
                "verdict": u.verdict,
                "device_line": u.device_line,
            })
        })
        .collect();
    to_json(&serde_json::json!({
        "model_id": fm.model_id,
        "blob_id": blob_id,
        "model_line": model_line,
        "input_bits": m.input_bits,
        "weight_bits": m.weight_bits,
        "bias": m.bias,
        "nogo_max": m.nogo_max,
        "go_min": m.go_min,
        "channels": info,
        "units": units,
    }))
}

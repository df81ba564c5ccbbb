//! `linegate train --class …`: a model of several classes, its gaps and what it decides on
//! held-out units, printed per class.

use std::path::{Path, PathBuf};

use anyhow::Result;

use crate::confidence::{Rate, rate_text};
use crate::ingest::LogOptions;
use crate::ingest::dataset::Dataset;
use crate::ingest::sheet::ChannelSheet;
use crate::output::OutputSet;
use crate::release::gates::Limit;
use crate::train::c_choice::CPolicy;
use crate::train::class_point::{ClassCounts, ClassTarget};
use crate::train::class_rows::ClassRule;
use crate::train::class_train::{ClassOutcome, ClassRequest, train_classes};
use crate::train::eval::TrainerKind;
use crate::train::float_model::{HoldoutSplit, InputFile};
use crate::workflow;

use super::to_json;

/// The class flags of one `train` run.
pub struct ClassRun<'a> {
    pub files: &'a [PathBuf],
    pub holdout: &'a [PathBuf],
    pub sheet_path: Option<&'a Path>,
    pub rule: ClassRule,
    pub trainer: TrainerKind,
    pub epochs: u32,
    pub seed: u64,
    pub c: CPolicy,
    pub false_go_weight: f64,
    pub recheck_budget: Option<f64>,
    pub false_go_target: Option<Limit>,
    pub no_operating_point: bool,
    pub folds: usize,
    pub output: &'a Path,
    pub force: bool,
    pub json: bool,
}

impl ClassRun<'_> {
    /// Trains, writes the model, prints.
    #[allow(clippy::too_many_arguments)]
    pub fn run(
        &self,
        quiet: bool,
        opts: &LogOptions,
        ds: Dataset,
        held: Option<Dataset>,
        holdout_split: Option<HoldoutSplit>,
        sheet: Option<(ChannelSheet, InputFile)>,
        settings: Vec<crate::project::Setting>,
    ) -> Result<()> {
        let share = self
            .recheck_budget
            .unwrap_or(crate::train::operating_point::DEFAULT_RECHECK_BUDGET);
        let target = match (&self.false_go_target, self.no_operating_point) {
            (_, true) => ClassTarget::Smallest,
            (Some(Limit::Upper { rate, confidence }), _) => ClassTarget::FalseGo {
                rate: *rate,
                confidence: *confidence,
                share,
                false_go_weight: self.false_go_weight,
            },
            (Some(other), _) => anyhow::bail!(
                "--false-go-target {other}: give a rate at a confidence level, e.g. 1%@95%"
            ),
            (None, false) => ClassTarget::RecheckBudget {
                share,
                false_go_weight: self.false_go_weight,
            },
        };
        if self.rule == ClassRule::Joint && self.trainer != TrainerKind::MaxMargin {
            anyhow::bail!(
                "--class-rule joint trains every row by the multi-class maximum margin; --trainer {} applies to --class-rule one-vs-rest",
                self.trainer.name()
            );
        }
        let req = ClassRequest {
            rule: self.rule,
            trainer: self.trainer,
            epochs: self.epochs,
            seed: self.seed,
            c: self.c.clone(),
            false_go_weight: self.false_go_weight,
            target,
            folds: self.folds,
            point_holdout: held.as_ref(),
            holdout_split,
            read_with: Some(opts.into()),
            settings,
            progress: !quiet,
        };
        let mut out = train_classes(&ds, sheet.as_ref().map(|(_, f)| f), &req)?;
        // The release of a model of several classes takes readings only (its quantiser
        // refuses feature channels): refused here, before a model file is written.
        if !out.model.signals.is_empty() {
            anyhow::bail!(
                "a model of several classes over signal features cannot be released yet (audit and pack take readings only); train it on a bench log of the features' values"
            );
        }
        if !quiet {
            for n in &out.notes {
                eprintln!("note: {n}");
            }
        }
        if let Some(hd) = &held {
            out.evaluate_holdout(hd);
        }
        let holdout_files = if self.holdout.is_empty() {
            Vec::new()
        } else {
            crate::input::expand_files(self.holdout)?
        };
        if !holdout_files.is_empty() {
            let hd = workflow::load_for_model(&holdout_files, opts, &out.model)?;
            if !quiet {
                super::warn_skipped(&hd.name(), &hd.skipped);
            }
            out.evaluate_holdout(&hd);
        }
        let mut set = OutputSet::default();
        for f in self.files {
            set.input("bench log", f);
        }
        if let Some(s) = self.sheet_path {
            set.input("channel sheet (--sheet)", s);
        }
        for h in &holdout_files {
            set.input("holdout log (--holdout)", h);
        }
        set.add_as("float model (-o)", self.output, out.model.to_json());
        set.commit(self.force)?;
        if self.json {
            say_raw!("{}", to_json(&out));
        } else if !quiet {
            print_classes(&out, self.output);
        }
        Ok(())
    }
}

/// A confusion table: true class by row, decided class (then RECHECK) by column.
fn print_table(names: &[String], c: &ClassCounts) {
    let w = names.iter().map(String::len).max().unwrap_or(5).max(7);
    let mut head = format!("  {:<w$}", "class");
    for n in names.iter().map(String::as_str).chain(["RECHECK"]) {
        head.push_str(&format!(" {n:>w$}"));
    }
    say!("{head}");
    for (n, row) in names.iter().zip(&c.table) {
        let mut line = format!("  {n:<w$}");
        for v in row {
            line.push_str(&format!(" {v:>w$}"));
        }
        say!("{line}");
    }
}

fn print_classes(o: &ClassOutcome, path: &Path) {
    let m = &o.model;
    let (Some(c), Some(s)) = (&m.classes, &m.summary.classes) else {
        return;
    };
    let names: Vec<String> = c.rows.iter().map(|r| r.name.clone()).collect();
    let rule = match c.rule {
        ClassRule::OneVsRest => format!("one-vs-rest ({})", m.provenance.trainer),
        ClassRule::Joint => "joint (multi-class maximum margin)".to_string(),
    };
    say!(
        "trained {} classes, {rule}, on {} units; GO class: {}",
        names.len(),
        m.summary.units,
        c.go.and_then(|g| names.get(g))
            .map_or("none", String::as_str)
    );
    say!("{:<24} {:>9} {:>16}", "class", "units", "training errors");
    for f in &s.classes {
        say!("{:<24} {:>9} {:>16}", f.name, f.units, f.training_errors);
    }
    if let Some(ch) = &s.c_choice {
        say!(
            "{:>10} {:>9} {:>8} {:>10} {:>9}",
            "C",
            "false GO",
            "GO lost",
            "misrouted",
            "cost"
        );
        for r in &ch.rows {
            say!(
                "{:>10} {:>9} {:>8} {:>10} {:>9}{}",
                r.c,
                r.false_go,
                r.go_lost,
                r.misrouted,
                r.cost,
                if r.c == ch.chosen { "  ← chosen" } else { "" }
            );
        }
        say!("{}", ch.reason);
    } else if let Some(cv) = m.provenance.c {
        say!("C = {cv}");
    }
    if let Some(j) = &s.joint {
        say!(
            "joint objective {:.9} after {} passes (largest violation {:.1e})",
            j.objective,
            j.passes,
            j.violation
        );
    }
    if let Some(h) = &s.held_out {
        say!(
            "held-out ({}), every leader decided: accuracy {:.4} ({} of {})",
            s.gaps.source,
            h.accuracy(),
            h.correct,
            h.units
        );
        print_table(&names, h);
    }
    let g = &s.gaps;
    say!(
        "gaps: GO {:.6e}, class {:.6e} (score units); {}",
        c.go_gap,
        c.class_gap,
        g.reason
    );
    if g.counts.units > 0 {
        let fg = Rate::new(
            g.counts.false_go as u64,
            g.failure_units as u64,
            crate::confidence::DEFAULT_CONFIDENCE,
        );
        say!(
            "  on those units: false GO {}; GO lost {}; misrouted {}; RECHECK {} of {}",
            rate_text(&fg, "failure units"),
            g.counts.go_lost,
            g.counts.misrouted,
            g.counts.recheck,
            g.counts.units
        );
    }
    if let Some(h) = &o.holdout {
        say!(
            "holdout, with the gaps: accuracy {:.4} ({} of {}); false GO {}; GO lost {}; misrouted {}; RECHECK {}",
            h.accuracy(),
            h.correct,
            h.units,
            h.false_go,
            h.go_lost,
            h.misrouted,
            h.recheck
        );
        print_table(&names, h);
    }
    say!("wrote {} (model id {})", path.display(), m.model_id);
}

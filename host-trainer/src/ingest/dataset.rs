//! A bench log in memory: raw readings per unit, labels, and where each unit came from.
//!
//! Readings are kept as the raw integers the device will see (4 bytes each);
//! trainers scale them on the fly, so a log costs the memory of its data as f32.

use std::path::{Path, PathBuf};

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;

use crate::ingest::classes::{ClassId, Classes};
use crate::ingest::scaling::ChannelScale;
use crate::ingest::signal_scale::SignalScale;
use crate::ingest::skip::SkipReport;

/// The digest of a log of several files: SHA-256 over each file's digest, one per line,
/// in reading order (so the same files in another order are another log).
pub fn combined_digest(parts: &[LogPart]) -> String {
    let text: String = parts.iter().map(|p| format!("{}\n", p.sha256)).collect();
    crate::digest::sha256_hex(text.as_bytes())
}

/// Units of one bench log, with the channel scaling that turned readings into raw integers.
#[derive(Clone, Debug)]
pub struct Dataset {
    /// The file read.
    pub path: PathBuf,
    /// SHA-256 of the file, hex; empty when the reader was asked for no digest
    /// ([`LogOptions::digest`](super::LogOptions::digest)).
    pub sha256: String,
    /// Per-channel scaling, in column order.
    pub scales: Vec<ChannelScale>,
    /// The signals a signal log's feature channels are computed from (empty for a log of
    /// readings).
    pub signals: Vec<SignalScale>,
    /// Raw readings, row-major: unit `i`, channel `j` at `i * dim + j`.
    pub raw: Vec<i32>,
    /// Each unit's class as its code ([`Classes::code`]): +1 the GO class of
    /// [`classes`](Self::classes), −1, −2… the others, 0 a unit without label (a log scored
    /// without verdicts). With GO and NO-GO (every log today) this is exactly the ±1
    /// GO-vs-rest view every trainer reads; with more classes a trainer takes a view of its
    /// own from the codes. The unit's class itself: [`class_of`](Self::class_of).
    pub labels: Vec<i8>,
    /// The classes the log's labels name (GO and NO-GO today), each with its tokens.
    pub classes: Classes,
    /// 1-based line of each unit in the file.
    pub lines: Vec<u64>,
    /// Unit ids, if the log has a unit-id column (else empty).
    pub unit_ids: UnitIds,
    /// Rows skipped under `--skip-bad-rows`.
    pub skipped: SkipReport,
    /// Timestamp cells, when read for a holdout split by time (else empty).
    pub times: UnitIds,
    /// The files of a log read from several, in reading order (empty for one file).
    pub parts: Vec<LogPart>,
    /// Each unit's index into [`parts`](Self::parts) (empty for one file).
    pub part_of: Vec<u32>,
}

/// One file of a log read from several files.
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct LogPart {
    /// The file.
    pub path: PathBuf,
    /// Its SHA-256, hex.
    pub sha256: String,
    /// The units read from it.
    pub units: usize,
}

/// Why `next` cannot join a log of the files `earlier`, in words, when it is one of them:
/// the same path (after resolving links), or the same bytes under another name (same
/// SHA-256; an empty digest is not compared). Its units would count twice. The one rule for
/// every log of several files: read whole ([`Dataset::append`]) or counted in parts.
pub fn counted_twice(earlier: &[LogPart], next: &LogPart) -> Option<String> {
    let same = |a: &Path, b: &Path| {
        a == b || matches!((a.canonicalize(), b.canonicalize()), (Ok(x), Ok(y)) if x == y)
    };
    earlier.iter().find_map(|p| {
        if same(&p.path, &next.path) {
            Some(format!(
                "this file is already part of the log ({}): its units would count twice",
                p.path.display()
            ))
        } else if !p.sha256.is_empty() && p.sha256 == next.sha256 {
            Some(format!(
                "this file has the same bytes (SHA-256 {}) as {}, already part of the log: its units would count twice",
                next.sha256,
                p.path.display()
            ))
        } else {
            None
        }
    })
}

/// How messages name a log of `files` files whose first is `first`: the file itself, or
/// "`first` and N more files".
pub fn log_name(first: &Path, files: usize) -> PathBuf {
    match files {
        0 | 1 => first.to_path_buf(),
        n => format!("{} and {} more files", first.display(), n - 1).into(),
    }
}

impl Dataset {
    /// An empty dataset for `path` with the given scaling.
    pub fn empty(path: &Path, scales: Vec<ChannelScale>) -> Self {
        Self {
            path: path.to_path_buf(),
            sha256: String::new(),
            scales,
            signals: Vec::new(),
            raw: Vec::new(),
            labels: Vec::new(),
            classes: Classes::default(),
            lines: Vec::new(),
            unit_ids: UnitIds::default(),
            skipped: SkipReport::default(),
            times: UnitIds::default(),
            parts: Vec::new(),
            part_of: Vec::new(),
        }
    }

    /// Unit `i`'s class: its index into [`classes`](Self::classes), from its label
    /// (`None` for a unit without label).
    pub fn class_of(&self, i: usize) -> Option<ClassId> {
        self.classes.class_of_code(*self.labels.get(i)?)
    }

    /// Each class's name and how many units it has, in class order.
    pub fn class_counts(&self) -> Vec<(&str, usize)> {
        let mut counts = vec![0usize; self.classes.list.len()];
        for i in 0..self.labels.len() {
            if let Some(c) = self
                .class_of(i)
                .and_then(|c| counts.get_mut(usize::from(c)))
            {
                *c += 1;
            }
        }
        self.classes.names().zip(counts).collect()
    }

    /// SHA-256 of the places (file and line, one per line) of the units `idx`: what a
    /// holdout split records so that a later split of the same log can be shown equal.
    pub fn split_digest(&self, idx: &[usize]) -> String {
        let text: String = idx.iter().map(|&i| self.origin(i) + "\n").collect();
        crate::digest::sha256_hex(text.as_bytes())
    }

    /// The log's name for messages: its file, or for a log of several files the first and
    /// how many more (`day-1.csv and 2 more files`).
    pub fn name(&self) -> PathBuf {
        log_name(&self.path, self.parts.len())
    }

    /// The file unit `i` came from (the log's own path for a log of one file).
    pub fn file_of(&self, i: usize) -> &Path {
        self.part_of
            .get(i)
            .and_then(|&k| self.parts.get(k as usize))
            .map_or(self.path.as_path(), |p| p.path.as_path())
    }

    /// Where unit `i` came from: `line N`, with the file's name first for a log of several
    /// files (`day-2.csv line N`).
    pub fn origin(&self, i: usize) -> String {
        let line = self.lines.get(i).copied().unwrap_or(0);
        if self.parts.is_empty() {
            format!("line {line}")
        } else {
            format!("{} line {line}", self.file_of(i).display())
        }
    }

    /// Appends the units of `next`, another file of the same log read with the same
    /// channels and scaling: the log becomes one of several files, each kept in
    /// [`parts`](Self::parts) with its digest, and the log's digest becomes the digest of the
    /// files' digests in order.
    ///
    /// # Errors
    /// [`InputError::Format`](crate::error::InputError::Format) when `next` is a file the log already holds (the same path,
    /// or the same bytes under another name): its units would count twice.
    pub fn append(&mut self, next: Dataset) -> Result<(), crate::error::InputError> {
        // The files read so far: this log's one file until a second is appended.
        let first;
        let earlier: &[LogPart] = if self.parts.is_empty() {
            first = [LogPart {
                path: self.path.clone(),
                sha256: self.sha256.clone(),
                units: self.len(),
            }];
            &first
        } else {
            &self.parts
        };
        let file = LogPart {
            path: next.path.clone(),
            sha256: next.sha256.clone(),
            units: next.len(),
        };
        if let Some(message) = counted_twice(earlier, &file) {
            return Err(crate::error::InputError::Format {
                path: next.path.clone(),
                message,
            });
        }
        if self.parts.is_empty() {
            self.parts.push(LogPart {
                path: self.path.clone(),
                sha256: self.sha256.clone(),
                units: self.len(),
            });
            self.part_of = vec![0; self.len()];
        }
        let k = self.parts.len() as u32;
        self.parts.push(LogPart {
            path: next.path.clone(),
            sha256: next.sha256.clone(),
            units: next.len(),
        });
        self.part_of.extend(std::iter::repeat_n(k, next.len()));
        self.raw.extend_from_slice(&next.raw);
        self.labels.extend_from_slice(&next.labels);
        self.lines.extend_from_slice(&next.lines);
        for i in 0..next.len() {
            if let Some(u) = next.unit_ids.get(i) {
                self.unit_ids.push(u.as_bytes());
            }
            if let Some(t) = next.times.get(i) {
                self.times.push(t.as_bytes());
            }
        }
        self.skipped.merge(&next.skipped);
        self.sha256 = combined_digest(&self.parts);
        Ok(())
    }

    /// Builds a dataset from points already in [-1, 1] (tests and references).
    ///
    /// Each channel gets range [-1, 1] at an lsb of 1e-9, so the scaled values equal the points to 1e-9.
    ///
    /// # Panics
    /// On a point outside [-1, 1]: the caller's data is wrong, not a log's.
    // Test and reference support only: a log never comes this way.
    #[allow(clippy::expect_used)]
    pub fn from_scaled(points: &[Vec<f64>], labels: &[i8]) -> Self {
        let d = points.first().map_or(0, Vec::len);
        let scales: Vec<ChannelScale> = (0..d)
            .map(|j| {
                ChannelScale::new(&format!("x{j}"), "", -1.0, 1.0, 1e-9, 0.0).expect("valid range")
            })
            .collect();
        let mut ds = Self::empty(Path::new("<memory>"), scales);
        for (i, (p, &l)) in points.iter().zip(labels).enumerate() {
            for (v, s) in p.iter().zip(&ds.scales) {
                ds.raw.push(s.to_raw(*v).expect("point inside [-1, 1]"));
            }
            ds.labels.push(l);
            ds.lines.push(i as u64 + 2);
        }
        ds
    }

    /// Number of units.
    pub fn len(&self) -> usize {
        self.labels.len()
    }

    /// True if there are no units.
    pub fn is_empty(&self) -> bool {
        self.labels.is_empty()
    }

    /// Number of channels.
    pub fn dim(&self) -> usize {
        self.scales.len()
    }

    /// Raw readings of unit `i`.
    pub fn raw_row(&self, i: usize) -> &[i32] {
        let d = self.dim();
        &self.raw[i * d..(i + 1) * d]
    }

    /// Scaled readings of unit `i` into `out` (length `dim`).
    #[inline]
    pub fn scaled_row(&self, i: usize, out: &mut [f64]) {
        for ((o, &r), s) in out.iter_mut().zip(self.raw_row(i)).zip(&self.scales) {
            *o = s.scaled(r);
        }
    }

    /// A scaler for hot loops: multiplies by precomputed reciprocals instead of dividing.
    /// Its values may differ from [`scaled_row`](Self::scaled_row) in the last bit.
    pub fn scaler(&self) -> Scaler {
        Scaler {
            off: self.scales.iter().map(|s| f64::from(s.offset)).collect(),
            inv: self.scales.iter().map(|s| 1.0 / s.half as f64).collect(),
            dim: self.dim(),
        }
    }

    /// The first channel whose raw reading of unit `i` is outside its valid range: the
    /// channel the device would report as a FAULT, or `None`.
    pub fn fault(&self, i: usize) -> Option<usize> {
        self.raw_row(i)
            .iter()
            .zip(&self.scales)
            .position(|(&r, s)| r < s.raw_min || r > s.raw_max)
    }

    /// Label of unit `i` as ±1.0.
    #[inline]
    pub fn y(&self, i: usize) -> f64 {
        f64::from(self.labels[i])
    }

    /// A name for unit `i` in reports: its unit id, or where it came from.
    pub fn unit_name(&self, i: usize) -> String {
        match self.unit_ids.get(i) {
            Some(u) if !u.is_empty() => u.to_string(),
            _ => self.origin(i),
        }
    }

    /// Every unit index.
    pub fn all(&self) -> Vec<usize> {
        (0..self.len()).collect()
    }

    /// The units `idx` as a dataset of their own (same file, scaling and lines).
    pub fn subset(&self, idx: &[usize]) -> Self {
        let mut out = Self::empty(&self.path, self.scales.clone());
        out.signals = self.signals.clone();
        out.classes = self.classes.clone();
        out.sha256 = self.sha256.clone();
        out.skipped = self.skipped.clone();
        out.parts = self.parts.clone();
        for &i in idx {
            if let Some(&k) = self.part_of.get(i) {
                out.part_of.push(k);
            }
            out.raw.extend_from_slice(self.raw_row(i));
            out.labels.push(self.labels[i]);
            out.lines.push(self.lines[i]);
            if let Some(u) = self.unit_ids.get(i) {
                out.unit_ids.push(u.as_bytes());
            }
            if let Some(t) = self.times.get(i) {
                out.times.push(t.as_bytes());
            }
        }
        out
    }

    /// A seeded, stratified holdout: `fraction` of each class (rounded, and at least one
    /// unit of each class left to train on) goes to the second list. Both lists are in file
    /// order.
    pub fn split_fraction(&self, fraction: f64, seed: u64) -> (Vec<usize>, Vec<usize>) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let (mut train, mut hold) = (Vec::new(), Vec::new());
        for class in self.strata() {
            let idx = self.shuffled_class(class, &mut rng);
            let n =
                ((idx.len() as f64 * fraction).round() as usize).min(idx.len().saturating_sub(1));
            hold.extend_from_slice(&idx[..n]);
            train.extend_from_slice(&idx[n..]);
        }
        train.sort_unstable();
        hold.sort_unstable();
        (train, hold)
    }

    /// A holdout by time: units whose timestamp comes after `after` go to the second list.
    /// Timestamps compare as numbers when both are numbers (epoch seconds), otherwise as
    /// text, which orders ISO 8601 times (`2026-11-30T14:05:00`) of one format correctly.
    ///
    /// # Errors
    /// The log was read without timestamps, or a unit's timestamp is empty (its line).
    pub fn split_after(&self, after: &str) -> Result<(Vec<usize>, Vec<usize>), String> {
        if self.times.len() != self.len() {
            return Err("the log has no timestamp column (timestamp, time or date; or name it with --timestamp)".into());
        }
        let limit = after.trim();
        let limit_num = limit.parse::<f64>().ok();
        let (mut train, mut hold) = (Vec::new(), Vec::new());
        for i in 0..self.len() {
            let t = self.times.get(i).unwrap_or("");
            if t.is_empty() {
                return Err(format!("{}: the timestamp is empty", self.origin(i)));
            }
            let later = match (t.parse::<f64>().ok(), limit_num) {
                (Some(a), Some(b)) => a > b,
                _ => t > limit,
            };
            if later { hold.push(i) } else { train.push(i) }
        }
        Ok((train, hold))
    }

    /// The class codes folds and holdout splits stratify by, in draw order: GO (+1), then
    /// NO-GO (−1); a log of declared classes adds −2, −3… (each class its own stratum).
    fn strata(&self) -> Vec<i8> {
        let more = if self.classes.declared {
            self.classes.list.len()
        } else {
            1
        };
        std::iter::once(1i8)
            .chain((1..=more).filter_map(|k| i8::try_from(k).ok().map(|k| -k)))
            .collect()
    }

    /// The units of one class in a seeded random order (folds and holdout splits draw
    /// GO first, then NO-GO, from one generator).
    fn shuffled_class(&self, class: i8, rng: &mut ChaCha8Rng) -> Vec<usize> {
        let mut idx: Vec<usize> = (0..self.len())
            .filter(|&i| self.labels[i] == class)
            .collect();
        idx.shuffle(rng);
        idx
    }

    /// The units that train fold `f` of `folds`: every other fold's, in fold order.
    pub fn training_of_fold(folds: &[Vec<usize>], f: usize) -> Vec<usize> {
        folds
            .iter()
            .enumerate()
            .filter(|(g, _)| *g != f)
            .flat_map(|(_, v)| v.iter().copied())
            .collect()
    }

    /// Splits the units into `k` folds after a seeded shuffle; each fold keeps the class ratio.
    pub fn folds(&self, k: usize, seed: u64) -> Vec<Vec<usize>> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut folds = vec![Vec::new(); k.max(1)];
        for class in self.strata() {
            let idx = self.shuffled_class(class, &mut rng);
            for (n, i) in idx.into_iter().enumerate() {
                folds[n % k.max(1)].push(i);
            }
        }
        for f in &mut folds {
            f.sort_unstable();
        }
        folds
    }
}

/// Fast row scaling, from [`Dataset::scaler`].
#[derive(Clone, Debug)]
pub struct Scaler {
    off: Vec<f64>,
    inv: Vec<f64>,
    dim: usize,
}

impl Scaler {
    /// Scaled readings of unit `i` of `ds` into `out`.
    #[inline]
    pub fn row(&self, ds: &Dataset, i: usize, out: &mut [f64]) {
        let raw = &ds.raw[i * self.dim..(i + 1) * self.dim];
        for (((o, &r), off), inv) in out.iter_mut().zip(raw).zip(&self.off).zip(&self.inv) {
            *o = (f64::from(r) - off) * inv;
        }
    }
}

impl Scaler {
    /// ⟨x, scaled row⟩ as one affine function of the raw readings, Σ (xₖ/halfₖ)·rawₖ − c:
    /// a pass over a million units reads the raw integers and multiplies once per reading,
    /// instead of scaling each row first.
    pub fn projection(&self, x: &[f64]) -> Projection {
        let coef: Vec<f64> = x.iter().zip(&self.inv).map(|(x, inv)| x * inv).collect();
        let constant = coef.iter().zip(&self.off).map(|(c, o)| c * o).sum();
        Projection { coef, constant }
    }
}

/// An affine function of a unit's raw readings, from [`Scaler::projection`].
#[derive(Clone, Debug)]
pub struct Projection {
    coef: Vec<f64>,
    constant: f64,
}

impl Projection {
    /// The value for unit `i` of `ds`: equal to ⟨x, scaled row⟩ up to rounding.
    #[inline]
    pub fn of(&self, ds: &Dataset, i: usize) -> f64 {
        let d = self.coef.len();
        let raw = &ds.raw[i * d..(i + 1) * d];
        let mut acc = [0.0f64; 4];
        let mut k = 0;
        while k + 4 <= d {
            for (j, a) in acc.iter_mut().enumerate() {
                *a += self.coef[k + j] * f64::from(raw[k + j]);
            }
            k += 4;
        }
        for (c, &r) in self.coef[k..].iter().zip(&raw[k..]) {
            acc[0] += c * f64::from(r);
        }
        (acc[0] + acc[1]) + (acc[2] + acc[3]) - self.constant
    }
}

/// Dot product with four independent partial sums: the additions no longer wait on each
/// other, which is several times faster than one running sum. Deterministic for given inputs.
#[inline]
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f64; 4];
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for k in 0..4 {
            acc[k] += x[k] * y[k];
        }
    }
    let tail: f64 = ra.iter().zip(rb).map(|(x, y)| x * y).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// Unit ids packed into one string: a million ids cost their bytes plus four per id, not an
/// allocation each.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct UnitIds {
    text: String,
    ends: Vec<u32>,
}

impl UnitIds {
    /// Appends an id (lossily decoded).
    pub fn push(&mut self, id: &[u8]) {
        // The strict check is the fast one; ids are nearly always valid UTF-8.
        match std::str::from_utf8(id) {
            Ok(text) => self.text.push_str(text),
            Err(_) => self.text.push_str(&String::from_utf8_lossy(id)),
        }
        self.ends
            .push(u32::try_from(self.text.len()).unwrap_or(u32::MAX));
    }

    /// Appends the ids packed in `bytes`, id `k` ending at `ends[k]` (as the reader packs
    /// them): one UTF-8 check and one copy for a run of ids, each id as [`push`](Self::push)
    /// would append it.
    pub fn extend_packed(&mut self, bytes: &[u8], ends: &[usize]) {
        // Valid as a whole with every end on a character boundary: then each id is valid
        // on its own (two invalid halves can make one valid character across an end, which
        // `push` would have decoded lossily, id by id).
        match std::str::from_utf8(bytes) {
            Ok(text) if ends.iter().all(|&e| text.is_char_boundary(e)) => {
                let base = self.text.len();
                self.text.push_str(text);
                self.ends.extend(
                    ends.iter()
                        .map(|&e| u32::try_from(base + e).unwrap_or(u32::MAX)),
                );
            }
            _ => {
                let mut start = 0;
                for &end in ends {
                    self.push(bytes.get(start..end).unwrap_or_default());
                    start = end;
                }
            }
        }
    }

    /// The id of unit `i`.
    pub fn get(&self, i: usize) -> Option<&str> {
        let end = *self.ends.get(i)? as usize;
        let start = if i == 0 { 0 } else { self.ends[i - 1] as usize };
        self.text.get(start..end)
    }

    /// Number of ids.
    pub fn len(&self) -> usize {
        self.ends.len()
    }

    /// True if there are none.
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }

    /// Removes every id.
    pub fn clear(&mut self) {
        self.text.clear();
        self.ends.clear();
    }
}

/// A linear score on scaled inputs rewritten over raw readings, Σ wⱼ·rawⱼ + c, so hot loops
/// convert and multiply once per reading, with four independent partial sums.
#[derive(Clone, Debug)]
pub struct RawForm {
    w: Vec<f64>,
    c: f64,
}

impl RawForm {
    /// For `weights·x + bias` with xⱼ = (rawⱼ − offsetⱼ)/halfⱼ.
    pub fn new(ds: &Dataset, weights: &[f64], bias: f64) -> Self {
        let w: Vec<f64> = ds
            .scales
            .iter()
            .zip(weights)
            .map(|(s, wj)| wj / s.half as f64)
            .collect();
        let c = bias
            - ds.scales
                .iter()
                .zip(&w)
                .map(|(s, wj)| wj * f64::from(s.offset))
                .sum::<f64>();
        Self { w, c }
    }

    /// For the perceptron's `v·z/R` over augmented inputs z = (x, 1).
    pub fn augmented(ds: &Dataset, v: &[f64], r: f64) -> Self {
        let d = ds.dim();
        let scaled: Vec<f64> = v[..d].iter().map(|vj| vj / r).collect();
        Self::new(ds, &scaled, v[d] / r)
    }

    /// The weights on raw readings.
    pub fn weights(&self) -> &[f64] {
        &self.w
    }

    /// The constant term.
    pub fn constant(&self) -> f64 {
        self.c
    }

    /// The score of one unit's raw readings.
    #[inline]
    pub fn score(&self, raw: &[i32]) -> f64 {
        let mut acc = [0.0f64; 4];
        let (cw, cr) = (self.w.chunks_exact(4), raw.chunks_exact(4));
        let tail: f64 = cw
            .remainder()
            .iter()
            .zip(cr.remainder())
            .map(|(w, &x)| w * f64::from(x))
            .sum();
        for (w, x) in cw.zip(cr) {
            for k in 0..4 {
                acc[k] += w[k] * f64::from(x[k]);
            }
        }
        (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail + self.c
    }
}

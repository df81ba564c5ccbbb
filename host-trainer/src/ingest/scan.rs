//! The pipelined scan: one pass over a log, each block read while the one before it is
//! parsed (pieces in parallel) and hashed, rows handed on in file order.

use std::fs::File;
use std::path::Path;

use sha2::{Digest, Sha256};

use super::fast;
use super::header::{Columns, Header, read_header};
use super::options::LogOptions;
use super::parse::{Parsed, Parser, Row};
use super::records::{BlockReader, count_lf, record_ends};
use super::skip::SkipReport;
use crate::error::InputError;
use crate::ingest::scaling::ChannelScale;

/// Bytes read per block by the parallel reader.
pub(super) const BLOCK: usize = 4 << 20;

/// Streams the log once, calling `on_row` for each good row in file order. Returns the
/// file's SHA-256 (empty unless `hash`: a first pass for observed ranges needs none). A Parquet file (known by its magic) goes to the Parquet reader; a text
/// log is read in blocks; each block's complete records are split
/// into pieces parsed in parallel, then handed on in order.
#[allow(clippy::too_many_arguments)]
pub(super) fn scan(
    path: &Path,
    opts: &LogOptions,
    model: Option<&[ChannelScale]>,
    scales: Option<&[ChannelScale]>,
    skipped: &mut SkipReport,
    on_row: impl FnMut(&Columns, Row<'_>) -> Result<(), InputError> + Send,
    on_run: Option<&mut RunSink<'_>>,
    hash: bool,
) -> Result<(Columns, String), InputError> {
    crate::input::regular_file(path)?;
    if super::parquet_file::is_parquet(path) {
        return super::parquet::scan_parquet(path, opts, model, scales, skipped, on_row, hash);
    }
    let pass = Pass { block: BLOCK, hash };
    scan_blocks(path, opts, model, scales, skipped, (on_row, on_run), pass)
}

/// Takes a whole parsed run of good rows at once (no errors in it), in file order: what a
/// reader that only appends rows does with slices instead of a call per row (a million
/// calls cost a quarter of the read's CPU time).
pub(super) type RunSink<'a> = dyn FnMut(&Columns, &Parsed) -> Result<(), InputError> + Send + 'a;

/// How a text scan reads: bytes per block, and whether it hashes the file.
#[derive(Clone, Copy, Debug)]
pub(super) struct Pass {
    pub(super) block: usize,
    pub(super) hash: bool,
}

/// [`scan`] of a text log with a given block size (small blocks exercise the block seams in
/// tests).
pub(super) fn scan_blocks(
    path: &Path,
    opts: &LogOptions,
    model: Option<&[ChannelScale]>,
    scales: Option<&[ChannelScale]>,
    skipped: &mut SkipReport,
    (mut on_row, mut on_run): (
        impl FnMut(&Columns, Row<'_>) -> Result<(), InputError> + Send,
        Option<&mut RunSink<'_>>,
    ),
    pass: Pass,
) -> Result<(Columns, String), InputError> {
    let Pass { block, hash } = pass;
    let io = |e| InputError::io(path, e);
    crate::input::regular_file(path)?;
    let file = File::open(path).map_err(io)?;
    let len = file.metadata().map(|m| m.len()).unwrap_or(0);
    let bar = (opts.progress && len > 16 << 20).then(|| {
        let b = crate::progress::bar(len, "{msg} [{bar:30}] {bytes}/{total_bytes} ({eta})");
        b.set_message(format!("reading {}", path.display()));
        b
    });
    let mut hasher = Sha256::new();
    let mut reader = BlockReader {
        file,
        bar: bar.clone(),
        block,
        eof: false,
    };
    let mut buf: Vec<u8> = Vec::new();
    // Bytes are hashed later, beside the parsing; `hashed` counts those already hashed.
    let mut hashed = 0usize;
    let Header {
        names,
        start: mut pos,
        end: header_end,
        delimiter,
        trailing_empty,
    } = read_header(path, opts, &mut reader, &mut buf)?;
    let mut line = 1 + count_lf(&buf[pos..header_end]);
    pos = header_end;
    let mut cols = Columns::resolve(path, names, opts, model)?;
    cols.width += trailing_empty;
    skipped.empty_columns = trailing_empty;
    let decimal_comma = opts.decimal_comma.unwrap_or(delimiter != b',');
    let parser = Parser {
        path,
        opts,
        cols: &cols,
        delimiter,
        decimal_comma,
        scales,
        keep_faults: model.is_some(),
        fast: fast::FastPlan::new(&cols, scales, delimiter, decimal_comma, opts),
        classes: opts.classes(),
    };
    // Hands on the rows of parsed runs in file order. A row's error is skipped and counted
    // under `skip_bad_rows`; any other error ends the scan.
    let mut feed = |runs: &mut [Parsed], skipped: &mut SkipReport| -> Result<(), InputError> {
        let d = cols.channels.len();
        skipped.empty_rows += runs.iter().map(|p| p.empty_rows).sum::<usize>();
        let mut settle = |e: InputError| skipped.settle(opts.skip_bad_rows, e);
        for parsed in runs.iter_mut() {
            if parsed.errors.is_empty()
                && let Some(run) = on_run.as_mut()
            {
                run(&cols, parsed)?;
                continue;
            }
            let mut errors = parsed.errors.drain(..).peekable();
            for k in 0..=parsed.labels.len() {
                while let Some((_, e)) = errors.next_if(|(at, _)| *at == k) {
                    settle(e)?;
                }
                let Some(&label) = parsed.labels.get(k) else {
                    break;
                };
                let row = Row {
                    line: parsed.lines[k],
                    values: parsed.values.get(k * d..(k + 1) * d).unwrap_or(&[]),
                    raw: parsed.raw.get(k * d..(k + 1) * d).unwrap_or(&[]),
                    label,
                    unit: packed_cell(&parsed.unit_bytes, &parsed.unit_ends, k),
                    time: packed_cell(&parsed.time_bytes, &parsed.time_ends, k),
                };
                on_row(&cols, row).or_else(&mut settle)?;
            }
        }
        Ok(())
    };
    let pieces = rayon::current_num_threads() * 4;
    // Parsed runs are reused: fresh buffers for every block would cost page faults.
    let mut pool: Vec<Parsed> = Vec::new();
    // The previous block's parsed runs, handed on while the next block is parsed.
    let mut ready: Vec<Parsed> = Vec::new();
    let mut ready_len = 0usize;
    // The next block is read into `next` while this one is parsed and hashed.
    let mut next: Vec<u8> = Vec::new();
    let mut in_quote = false;
    let mut discarding = false; // inside an over-long line being skipped
    loop {
        let body = &buf[pos..];
        let mut q = in_quote;
        // Without a quote, record ends are line feeds, searched for only where needed;
        // with quotes, all record ends are listed.
        let plain = !in_quote && memchr::memchr(b'"', body).is_none();
        let mut ends = if plain {
            Vec::new()
        } else {
            record_ends(body, &mut q)
        };
        let (mut first_end, mut last_end) = if plain {
            let lf = |k: usize| k + 1;
            (
                memchr::memchr(b'\n', body).map(lf),
                memchr::memrchr(b'\n', body).map(lf),
            )
        } else {
            (ends.first().copied(), ends.last().copied())
        };
        if reader.eof && last_end != Some(body.len()) && !body.is_empty() {
            ends.push(body.len());
            last_end = Some(body.len());
            first_end = first_end.or(last_end);
        }
        // Complete records to parse now, as (start, end) of `buf`, split into pieces.
        let mut work: Vec<(usize, usize)> = Vec::new();
        let mut starts: Vec<u64> = Vec::new();
        if discarding {
            match first_end {
                Some(e) => {
                    line += count_lf(&body[..e]);
                    pos += e;
                    discarding = false;
                    in_quote = false;
                    continue;
                }
                None => {
                    pos = buf.len();
                    in_quote = q;
                }
            }
        } else if first_end.is_none() && body.len() > opts.max_line_len {
            // The rows before this line come first, errors included.
            feed(&mut ready[..ready_len], skipped)?;
            ready_len = 0;
            let e = InputError::LineTooLong {
                path: path.into(),
                line,
                max: opts.max_line_len,
            };
            if !opts.skip_bad_rows {
                return Err(e);
            }
            skipped.add(&e);
            discarding = true;
            line += count_lf(body);
            pos = buf.len();
            in_quote = q;
        } else if let Some(cut) = last_end {
            // Split the complete records into pieces of about equal size, at record ends.
            let step = cut / pieces + 1;
            let mut bounds = Vec::with_capacity(pieces + 1);
            if plain {
                let mut from = 0;
                while from < cut {
                    let e = memchr::memchr(b'\n', &body[(from + step).min(cut)..cut])
                        .map_or(cut, |k| (from + step).min(cut) + k + 1);
                    bounds.push(e);
                    from = e;
                }
            } else {
                let mut from = 0;
                for &e in &ends {
                    if e - from >= step || e == cut {
                        bounds.push(e);
                        from = e;
                    }
                }
            }
            // Line feeds per piece, counted in parallel, give each piece its first line.
            let mut from = 0;
            for e in bounds {
                work.push((pos + from, pos + e));
                from = e;
            }
            use rayon::prelude::*;
            let counts: Vec<u64> = work
                .par_iter()
                .map(|&(a, b)| count_lf(&buf[a..b]))
                .collect();
            for n in counts {
                starts.push(line);
                line += n;
            }
            pos += cut;
        }
        let done = reader.eof && pos >= buf.len();
        next.clear();
        next.extend_from_slice(&buf[pos..]);
        let carried = next.len();
        if pool.len() < work.len() {
            pool.resize_with(work.len(), Parsed::default);
        }
        let (unhashed, whole) = (&buf[hashed..], &buf[..]);
        // Four jobs at once: parse this block, hash it, read the next, and hand on the rows
        // of the previous one (in file order, so the first error is still the first).
        let ((), (read, fed)) = rayon::join(
            || {
                use rayon::prelude::*;
                rayon::join(
                    || {
                        pool.par_iter_mut()
                            .zip(work.par_iter().zip(&starts))
                            .for_each(|(out, (&(a, b), &first))| {
                                parser.piece(&whole[a..b], first, plain, out);
                            });
                    },
                    || {
                        if hash {
                            hasher.update(unhashed);
                        }
                    },
                );
            },
            || {
                rayon::join(
                    || {
                        if done {
                            Ok(())
                        } else {
                            reader.refill(&mut next)
                        }
                    },
                    || feed(&mut ready[..ready_len], skipped),
                )
            },
        );
        fed?;
        read.map_err(io)?;
        std::mem::swap(&mut pool, &mut ready);
        ready_len = work.len();
        if done {
            feed(&mut ready[..ready_len], skipped)?;
            break;
        }
        std::mem::swap(&mut buf, &mut next);
        // The carried-over tail was hashed with the block it came from.
        hashed = carried;
        pos = 0;
    }
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let digest = if hash {
        crate::digest::lower_hex(&hasher.finalize())
    } else {
        String::new()
    };
    Ok((cols, digest))
}

/// Cell `k` of cells packed end to end in `bytes`, `ends[k]` marking where each ends.
fn packed_cell<'b>(bytes: &'b [u8], ends: &[usize], k: usize) -> Option<&'b [u8]> {
    let end = *ends.get(k)?;
    let start = k.checked_sub(1).map_or(0, |j| ends[j]);
    bytes.get(start..end)
}

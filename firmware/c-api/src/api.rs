//! The safe half: Linegate's Rust types to the C interface's, and back.

use firmware::{
    ClassSection, Classifier, CusumPlan, CusumState, Decision, DecodeError, Fault, FieldPlan,
    FieldStats, StationFault, Step, Verdict,
};

use crate::{
    LG_NO_CLASS, lg_cusum, lg_cusum_plan, lg_fault, lg_field, lg_field_plan, lg_result, lg_status,
    lg_verdict,
};

/// The classifier C holds: a model of readings, two-sided (blob versions 1 and 2) or of
/// several classes (5 and 6).
pub type CClassifier = Classifier<shared_model::Readings, ClassSection>;

/// The status a blob's validation error maps to.
pub fn status_of(e: DecodeError) -> lg_status {
    match e {
        DecodeError::Truncated { .. } => lg_status::LG_ERR_TRUNCATED,
        DecodeError::BadMagic => lg_status::LG_ERR_BAD_MAGIC,
        DecodeError::UnsupportedVersion(_) => lg_status::LG_ERR_VERSION,
        // A model with signal features (version 3 or 4) needs sample windows, which this
        // interface does not pass yet: to it, the version is not one it reads.
        DecodeError::Signals => lg_status::LG_ERR_VERSION,
        // A model of several classes (version 5 or 6) in a two-sided station: likewise.
        DecodeError::Classes => lg_status::LG_ERR_VERSION,
        DecodeError::TrailingBytes { .. } => lg_status::LG_ERR_TRAILING_BYTES,
        DecodeError::CrcMismatch { .. } => lg_status::LG_ERR_CRC,
        DecodeError::ChannelOverCapacity(_) => lg_status::LG_ERR_TOO_MANY_CHANNELS,
        DecodeError::MalformedPayload => lg_status::LG_ERR_MALFORMED,
        DecodeError::InconsistentLengths => lg_status::LG_ERR_INCONSISTENT,
        DecodeError::Invalid(_) => lg_status::LG_ERR_INVALID_MODEL,
        DecodeError::Unsigned => lg_status::LG_ERR_UNSIGNED,
        DecodeError::UnknownKey => lg_status::LG_ERR_UNKNOWN_KEY,
        DecodeError::BadSignature => lg_status::LG_ERR_BAD_SIGNATURE,
    }
}

fn verdict_of(v: Verdict) -> lg_verdict {
    match v {
        Verdict::Go => lg_verdict::LG_GO,
        Verdict::NoGo => lg_verdict::LG_NOGO,
        Verdict::Recheck => lg_verdict::LG_RECHECK,
    }
}

/// A NO-GO result for `fault`, with nothing else set.
fn faulted(fault: lg_fault) -> lg_result {
    lg_result {
        score: 0,
        verdict: lg_verdict::LG_NOGO,
        fault,
        channel: 0,
        raw: 0,
        first: false,
        class_index: LG_NO_CLASS,
    }
}

fn reading_fault(f: Fault) -> lg_result {
    match f {
        Fault::ReadingCount { .. } => faulted(lg_fault::LG_FAULT_COUNT),
        Fault::OutOfRange { channel, raw } => lg_result {
            channel: u32::from(channel),
            raw,
            ..faulted(lg_fault::LG_FAULT_RANGE)
        },
    }
}

/// The result of one classification: the decision, or NO-GO with the fault.
pub fn result_of(r: Result<Decision, Fault>) -> lg_result {
    match r {
        Ok(d) => lg_result {
            score: d.score,
            verdict: verdict_of(d.verdict),
            class_index: d.class.unwrap_or(LG_NO_CLASS),
            ..faulted(lg_fault::LG_FAULT_NONE)
        },
        Err(f) => reading_fault(f),
    }
}

/// The result of one station step.
pub fn step_result<SE>(s: Step<SE>) -> lg_result {
    match s {
        Step::Decided(d) => result_of(Ok(d)),
        Step::Faulted { fault, first } => lg_result {
            first,
            ..match fault {
                StationFault::Blob(_) => faulted(lg_fault::LG_FAULT_BLOB),
                StationFault::Sensor(_) => faulted(lg_fault::LG_FAULT_SENSOR),
                StationFault::Reading(f) => reading_fault(f),
                // Only a station of sample windows reports these, and the C interface runs
                // stations of readings; a refused window is a refused input all the same.
                StationFault::Window(_) => faulted(lg_fault::LG_FAULT_RANGE),
            }
        },
    }
}

/// Copies channel `index`'s name into `buf` with a terminating NUL.
pub fn channel_name(c: &CClassifier, index: usize, buf: &mut [u8]) -> lg_status {
    let Some(ch) = c.model().model().channels.get(index) else {
        return lg_status::LG_ERR_INDEX;
    };
    copy_name(ch.name.as_bytes(), buf)
}

/// Copies class `class`'s name into `buf` with a terminating NUL (`LG_ERR_CLASS` past the
/// classes, and for a two-sided model, which has none).
pub fn class_name(c: &CClassifier, class: u8, buf: &mut [u8]) -> lg_status {
    match c.class_name(class) {
        Some(name) => copy_name(name.as_bytes(), buf),
        None => lg_status::LG_ERR_CLASS,
    }
}

/// `name` and a terminating NUL into `buf`, or `LG_ERR_BUFFER` (nothing written) when it
/// does not fit. Byte by byte: no length check the optimiser must prove (a copy of the
/// whole slice kept a panic path for a class's name on Cortex-M0).
fn copy_name(name: &[u8], buf: &mut [u8]) -> lg_status {
    if buf.len() <= name.len() {
        return lg_status::LG_ERR_BUFFER;
    }
    let mut rest = buf.iter_mut();
    // `name` first: zip stops on it without taking one more byte of `rest`.
    for (&s, d) in name.iter().zip(rest.by_ref()) {
        *d = s;
    }
    match rest.next() {
        Some(nul) => {
            *nul = 0;
            lg_status::LG_OK
        }
        None => lg_status::LG_ERR_BUFFER,
    }
}

fn cusum_plan_of(p: &CusumPlan) -> lg_cusum_plan {
    lg_cusum_plan {
        target: p.target,
        slack: p.slack,
        limit: p.limit,
    }
}

fn cusum_of(c: &CusumState) -> lg_cusum {
    lg_cusum {
        up: c.up,
        down: c.down,
        alarm_up: c.alarm_up,
        alarm_down: c.alarm_down,
    }
}

/// A C plan as the station takes it (its blob id is the station's own), or `LG_ERR_PLAN`
/// for a bin shift above 62.
pub fn plan_of(p: &lg_field_plan) -> Result<FieldPlan, lg_status> {
    if p.shift > 62 {
        return Err(lg_status::LG_ERR_PLAN);
    }
    let cusum = |c: &lg_cusum_plan| CusumPlan {
        target: c.target,
        slack: c.slack,
        limit: c.limit,
    };
    Ok(FieldPlan {
        blob_id: 0,
        origin: p.origin,
        shift: p.shift,
        go: cusum(&p.go),
        nogo: cusum(&p.nogo),
    })
}

/// The field statistics as the C struct mirrors them.
pub fn field_of(f: &FieldStats) -> lg_field {
    lg_field {
        blob_id: f.plan.blob_id,
        plan: lg_field_plan {
            origin: f.plan.origin,
            shift: f.plan.shift,
            go: cusum_plan_of(&f.plan.go),
            nogo: cusum_plan_of(&f.plan.nogo),
        },
        channels: f.channels,
        signals: f.signals,
        saturated: f.saturated,
        units: f.units,
        go: f.go,
        nogo: f.nogo,
        recheck: f.recheck,
        faults: f.faults,
        other_faults: f.other_faults,
        below: f.below,
        above: f.above,
        bins: f.bins,
        cusum_go: cusum_of(&f.cusum_go),
        cusum_nogo: cusum_of(&f.cusum_nogo),
        channel_faults: f.channel_faults,
        signal_faults: f.signal_faults,
        min: f.min,
        max: f.max,
        sum: f.sum,
    }
}

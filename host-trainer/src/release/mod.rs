//! Release: a float model in, a checked fixed-point blob and flash images out.
//!
//! [`quantise`] turns the float model into integer weights, conversions and thresholds;
//! [`audit`] runs `shared_model`'s kernel (the code the firmware runs) over every unit of
//! every log ([`tally`]) and proves the rounding bound ([`bound`]); [`tolerance`] says what
//! declared noise can do; [`audit_report`] holds what the audit found; [`sweep`] audits every
//! word length; [`applying`] is the release step (quantise + audit, applying the tool's
//! choices); [`blob_release`] makes the marked, maybe signed bytes `pack` writes; [`pack`] writes the blob and inspects one; [`matching`]
//! checks a blob comes from a float model; [`hex`] writes and reads Intel HEX images;
//! [`image`] reads a blob back from any file `pack` writes and checks a pack's files agree;
//! [`blob_match`] checks a blob against its key, model and audit report;
//! [`audit_part`] is one log's audit over part of its units (a file, a partition) with the
//! exact merge an engine reduces parts with;
//! [`replay`] prints the lines the device prints; [`sign`] holds the owner's release key
//! and signs blobs (format version 2, or 4 for a model with signal features); [`keyfile`] reads and writes its key files.
//! [`audit_baseline`] keeps what the model met on the held-out log for `drift`.
//! [`features`] audits a model's signal features: ranges, overflow proofs and noise bounds.
//! [`gates`] holds the release gates, each rate with its exact bounds
//! (`crate::confidence`), and [`model_gates`] the gates and band a model's operating point
//! sets when the flags leave them out; [`units`] streams every unit's scores to `--units`;
//! [`values`] lists a unit's channel values as the device computes them.
//! A model of several classes: [`quantise_classes`] (every row in one Q-format, the gaps),
//! [`class_tally`] (confusion matrix, flips, the per-pair rounding proof), [`class_gates`]
//! (per class: false GO, misrouting) and [`class_audit`] (the audit and its units CSV);
//! [`words`] holds the pieces both quantisers start from.

pub mod applying;
pub mod audit;
pub mod audit_baseline;
pub mod audit_part;
pub mod audit_record;
pub mod audit_report;
pub mod blob_match;
pub mod blob_release;
pub mod bound;
pub mod class_audit;
pub mod class_gates;
pub mod class_tally;
pub mod features;
pub mod gates;
pub mod hex;
pub mod image;
pub mod keyfile;
pub mod matching;
pub mod model_gates;
pub mod pack;
pub mod point_record;
pub mod quantise;
pub mod quantise_classes;
pub mod replay;
pub mod sign;
pub mod sweep;
pub mod tally;
pub mod tolerance;
pub mod units;
pub mod values;
pub mod words;

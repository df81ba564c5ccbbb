//! After the release: what a released model meets on the line. Scoring field logs with
//! the device's kernel, comparing two releases on the same logs, and watching for drift
//! against the release audit's baseline (on the desk, or from the device's own field
//! record).
//!
//! This step sits after `release` in the data flow: it reads released models, blobs and
//! audit records and never changes them; `report` renders what it finds.
//!
//! Scoring: [`score`] writes replay's forms (device, text, CSV, JSON Lines);
//! [`replay_part`] gives one file's device lines and counts, merged in order over a log. Change control:
//! [`compare`] runs two releases over the same logs, [`compare_report`] writes what a
//! reviewer signs.
//!
//! Drift: [`baseline`] reads the audit's baseline and prints the device plan; [`run`] feeds
//! a field log's units (or the device's lines, [`device_lines`]) through the field
//! statistics the device keeps, counted as a [`run_part`] (parts of a log counted apart merge
//! into the single pass's figures exactly; [`cusum_part`] composes the CUSUMs); [`record`] reads and writes the device's field record;
//! [`ks`] is the Kolmogorov–Smirnov test, [`fisher`] the rates' exact test; [`drift`] the
//! whole test with its rules.

pub mod baseline;
pub mod compare;
pub mod compare_report;
pub mod cusum_part;
pub mod device_lines;
pub mod drift;
pub mod fisher;
pub mod ks;
pub mod record;
pub mod replay_part;
pub mod run;
pub mod run_part;
pub mod score;

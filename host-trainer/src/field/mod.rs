//! After the release: what a released model meets on the line. Scoring field logs with
//! the device's kernel, comparing two releases on the same logs, and watching for drift
//! against the release audit's baseline (on the desk, or from the device's own field
//! record).
//!
//! This step sits after `release` in the data flow: it reads released models, blobs and
//! audit records and never changes them; `report` renders what it finds.

pub mod compare;
pub mod compare_report;
pub mod score;

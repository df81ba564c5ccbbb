//! Training: scaled units in, a float linear model out.
//!
//! Every trainer solves a two-sided task ([`task`]: the units and the side each belongs on)
//! and produces a [`linear::Linear`]:
//! - [`perceptron`] (classic in Novikoff form, averaged, pocket), its mistake scan
//!   ([`mistake_scan`]), its radius ([`extent`]) and row helpers ([`lanes`]);
//! - [`maxmargin`] (which solver; settings and result in [`svm`]): the exact hard margin
//!   ([`hard_margin`], by Wolfe's nearest-points algorithm, [`wolfe`]) and the soft margin
//!   ([`soft_margin`] by SMO, [`soft_dual`] on larger logs), on [`working_set`]s;
//!
//! [`separability`] decides exactly, with certificates, whether any hyperplane splits the
//! classes, and shows Novikoff's figures ([`novikoff`]); [`eval`] is the trainer registry
//! and runs trainers on holdout logs and k folds; [`c_choice`] picks the soft margin's C;
//! [`operating_point`] places the decision boundary and its RECHECK band; [`float_model`] is
//! the file that carries the trained model to the release step.

pub mod c_choice;
pub mod class_file;
pub mod class_model;
pub mod class_point;
pub mod class_rows;
pub mod class_train;
pub mod crammer_singer;
pub mod eval;
pub mod extent;
pub mod float_model;
pub mod hard_margin;
pub mod lanes;
pub mod linear;
pub mod maxmargin;
pub mod mistake_scan;
pub mod novikoff;
pub mod one_vs_rest;
pub mod operating_point;
pub mod perceptron;
pub mod separability;
pub mod soft_dual;
pub mod soft_margin;
pub mod spread;
pub mod svm;
pub mod task;
pub mod wolfe;
pub mod working_set;

//! Training: scaled units in, a float linear model out.
//!
//! [`perceptron`] (classic in Novikoff form, averaged, pocket) and [`maxmargin`] (exact hard
//! margin by Wolfe's nearest-points algorithm, soft margin by SMO) all produce a
//! [`linear::Linear`]; [`separability`] decides exactly, with certificates, whether any
//! hyperplane splits the classes; [`eval`] runs trainers on holdout logs and k folds;
//! [`float_model`] is the file that carries the trained model to the release step.

pub mod c_choice;
pub mod eval;
pub mod float_model;
pub mod linear;
pub mod maxmargin;
pub mod operating_point;
pub mod perceptron;
pub mod separability;
pub mod soft_dual;
pub mod spread;

//! Clockwright core: a stability-and-sensitivity model of optical atomic clocks.
//!
//! Data flow: a [`design::Design`] is validated; its [`sequence`] gives the two-level
//! dynamics, the line shape and the [`sensitivity`] function; the [`noise`] model gives the
//! laser's spectrum; [`projection`] and [`dick`] give the atom-side noise; [`allan`]
//! integrates spectra to Allan deviations; [`budget`] combines everything for the locked
//! laser and returns an [`result::Evaluation`].

pub mod allan;
pub mod budget;
pub mod demo;
pub mod design;
pub mod dick;
pub mod error;
pub mod estimate;
pub mod finite;
pub mod measured;
pub mod noise;
pub mod projection;
pub mod result;
pub mod sensitivity;
pub mod pair;
pub mod reach;
pub mod sequence;
pub mod simulate;
pub mod species;
pub mod study;
pub mod synthesis;

pub use budget::evaluate;
pub use design::Design;
pub use error::InputError;
pub use result::{EvalOptions, Evaluation};

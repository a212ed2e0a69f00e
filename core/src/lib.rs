//! steadycal-core: an allocation-free monitor that keeps a sensor's calibration honest.
//!
//! See the crate README and ARCHITECTURE.md for the data flow. Modules, one concept each:
//! [`real`] (the float trait), [`basis`] (regressors), [`fit`] (recursive least squares),
//! [`transform`] (Box–Cox rungs), [`spread`] (spread against level), [`ladder`] (shadow fits
//! per rung), [`event`] (events and their queue), [`sample`] (inputs and outcomes),
//! [`monitor`] (the composition).
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

#[cfg(test)]
extern crate std;

pub mod basis;
pub mod event;
pub mod fit;
pub mod real;
pub mod sample;
pub mod spread;
pub mod transform;

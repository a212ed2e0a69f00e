//! steadycal-core: an allocation-free monitor that keeps a sensor's calibration honest.
//!
//! A [`monitor::Monitor`] watches one channel. Checks (samples with a reference) update
//! recursive least-squares fits of the sensor's raw output against the reference, one per
//! rung of a ladder of variance-stabilizing (Box–Cox) transforms; the residual spread is
//! tracked against the level; when the scatter tracks the level the calibration moves to
//! the rung that makes it constant, and the mean is re-checked after the move. Samples
//! without a reference come back as calibrated readings with their uncertainty.
//!
//! Modules, one concept each: [`real`] (the float trait), [`basis`] (regressors),
//! [`fit`] (recursive least squares), [`transform`] (Box–Cox rungs), [`spread`] (spread
//! against level), [`ladder`] (shadow fits per rung), [`origin`] (where levels are measured from: the
//! sensor's baseline), [`adequacy`] (mean check after a
//! switch), [`detect`] (drift and fault detectors, alarms), [`event`] (events and their
//! queue), [`sample`] (inputs and outcomes),
//! [`monitor`] (the composition), [`snapshot`] (the monitor as bytes, to resume after a
//! power loss), [`store`] (two snapshot slots on a NOR flash), [`record`] (the device log
//! format).
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
// `!(a > b)` is used on purpose: it is true for NaN, which is how the core refuses NaN.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

#[cfg(test)]
extern crate std;

pub mod adequacy;
pub mod basis;
pub mod checksum;
#[cfg(test)]
mod codec_tests;
#[cfg(feature = "defmt")]
mod defmt_format;
pub mod detect;
pub mod event;
pub mod fit;
mod fit_encoding;
#[cfg(feature = "hal")]
pub mod hal;
pub mod ladder;
pub mod monitor;
pub mod origin;
pub mod real;
pub mod record;
pub mod sample;
pub mod snapshot;
pub mod spread;
pub mod store;
pub mod transform;
mod wire;

//! The float type the core runs in on the host.

use serde::Serialize;

/// Float type the core runs in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Precision {
    /// Single precision, as on a Cortex-M4F board.
    F32,
    /// Double precision.
    F64,
}

//! [`Wire`] for the alarm board: a child of `detect::alarm` for its private fields; the
//! bytes are postcard's (see [`crate::wire`]).

use super::{AlarmBoard, AlarmState};
use crate::wire::wire_struct;

wire_struct!(impl[] AlarmState { present, quiet, raised });
wire_struct!(impl[] AlarmBoard { states, raises });

//! [`Walk`](crate::wire::Walk) for the alarm board: a child of `detect::alarm` for its
//! private fields; the bytes are postcard's (see [`crate::wire`]).

use super::{AlarmBoard, AlarmState};
use crate::wire::walk_struct;

walk_struct!(impl[] AlarmState { present, quiet, raised });
walk_struct!(impl[] AlarmBoard { states, raises });

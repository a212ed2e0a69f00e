//! [`Walk`](crate::wire::Walk) for the run of rejections under way: a child of
//! `detect::rejections` for its private fields; the bytes are postcard's (see
//! [`crate::wire`]). `noted` is not written: it is false between samples (serde skips it
//! too).

use super::RejectionRun;
use crate::wire::{Transfer, Walk};

impl Walk for RejectionRun {
    fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        // Every field named, so a field added breaks this build until it is handled.
        let RejectionRun {
            reason: _,
            count: _,
            last_seq: _,
            noted: _,
        } = self;
        let t = self.reason.walk(t);
        let t = self.count.walk(t);
        self.last_seq.walk(t)
    }
}

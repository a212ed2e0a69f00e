//! [`Wire`] for the event queue: a child of `event` for its private fields; the bytes are
//! postcard's (see [`crate::wire`]): the waiting events as a sequence, oldest first, then
//! the dropped count. A sequence longer than the queue does not decode.

use super::EventQueue;
use crate::real::Real;
use crate::wire::{Reader, Wire, Writer};

impl<R: Real, const Q: usize> Wire for EventQueue<R, Q> {
    fn put(&self, w: &mut Writer<'_>) {
        w.varint(self.events.len() as u64);
        for event in &self.events {
            event.put(w);
        }
        self.dropped.put(w);
    }

    fn get(r: &mut Reader<'_>) -> Self {
        let mut queue = EventQueue::new();
        queue.read(r);
        queue
    }
    fn read(&mut self, r: &mut Reader<'_>) {
        let len = r.len();
        if len > Q {
            r.fail();
        }
        self.events.clear();
        for _ in 0..len.min(Q) {
            // Cannot be full: at most Q pushes.
            let _ = self.events.push_back(Wire::get(r));
        }
        self.dropped.read(r);
    }
}

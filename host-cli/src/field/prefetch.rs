//! An iterator run ahead on its own thread ([`Prefetch`]): its items are handed over in
//! batches of [`BATCH`] through a channel holding at most [`IN_FLIGHT`] batches, in order.
//! A log's rows are thus parsed while the consumer joins or replays the ones before.
//!
//! Invariants: the items come out exactly as the inner iterator gives them; memory is
//! bounded by `BATCH · (IN_FLIGHT + 2)` items whatever the length of the input; dropping the
//! [`Prefetch`] early ends the thread at its next batch. A panic of the inner iterator is
//! passed on to the consumer when it reaches the end.

use std::sync::mpsc::{sync_channel, Receiver};
use std::thread::JoinHandle;

/// Items per batch.
pub const BATCH: usize = 4096;
/// Batches waiting at most.
pub const IN_FLIGHT: usize = 4;

/// The items of an iterator computed on another thread.
pub struct Prefetch<I: Iterator> {
    receiver: Receiver<Vec<I::Item>>,
    current: std::vec::IntoIter<I::Item>,
    thread: Option<JoinHandle<I>>,
    finished: Option<I>,
}

impl<I> Prefetch<I>
where
    I: Iterator + Send + 'static,
    I::Item: Send + 'static,
{
    /// Starts `inner` on its own thread.
    pub fn new(mut inner: I) -> Self {
        let (sender, receiver) = sync_channel::<Vec<I::Item>>(IN_FLIGHT);
        let thread = std::thread::spawn(move || loop {
            let batch: Vec<I::Item> = inner.by_ref().take(BATCH).collect();
            let last = batch.len() < BATCH;
            if sender.send(batch).is_err() || last {
                return inner;
            }
        });
        Prefetch {
            receiver,
            current: Vec::new().into_iter(),
            thread: Some(thread),
            finished: None,
        }
    }

    /// The inner iterator, once every item has come out.
    pub fn finished(&self) -> Option<&I> {
        self.finished.as_ref()
    }
}

impl<I> Iterator for Prefetch<I>
where
    I: Iterator + Send + 'static,
    I::Item: Send + 'static,
{
    type Item = I::Item;

    fn next(&mut self) -> Option<I::Item> {
        loop {
            if let Some(item) = self.current.next() {
                return Some(item);
            }
            match self.receiver.recv() {
                Ok(batch) => self.current = batch.into_iter(),
                Err(_) => {
                    if let Some(thread) = self.thread.take() {
                        match thread.join() {
                            Ok(inner) => self.finished = Some(inner),
                            Err(panic) => std::panic::resume_unwind(panic),
                        }
                    }
                    return None;
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn items_come_out_in_order_and_the_inner_iterator_comes_back() {
        let n = BATCH * 3 + 17;
        let mut prefetch = Prefetch::new(0..n);
        let got: Vec<usize> = prefetch.by_ref().collect();
        assert_eq!(got, (0..n).collect::<Vec<_>>());
        assert!(prefetch.finished().is_some());
        assert_eq!(prefetch.next(), None);
    }

    #[test]
    fn an_exact_multiple_of_the_batch_and_an_early_drop() {
        let got: Vec<usize> = Prefetch::new(0..BATCH * 2).collect();
        assert_eq!(got.len(), BATCH * 2);
        let mut endless = Prefetch::new(0u64..);
        assert_eq!(endless.nth(BATCH * 5), Some(BATCH as u64 * 5));
        drop(endless);
    }
}

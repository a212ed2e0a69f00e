//! A Parquet feed file replayed: its record batches are decoded on a second thread (at most
//! [`PARQUET_BATCHES_IN_FLIGHT`] waiting) while the engine runs them through
//! [`replay_labelled`] on this one, as a CSV feed is parsed beside the engine. `fleet`, whose
//! channels already run in parallel, decodes on the channel's own thread.

use anyhow::Result;

use crate::feed::parquet::ParquetFeed;
use crate::replay::options::ReplayOptions;
use crate::replay::record_batches::replay_labelled;
use crate::replay::run::ReplayResult;

/// Decoded record batches waiting at most for the engine.
pub const PARQUET_BATCHES_IN_FLIGHT: usize = 2;

/// Replays the Parquet file `options.feed`.
pub fn replay_parquet(options: &ReplayOptions) -> Result<ReplayResult> {
    let feed = ParquetFeed::open(&options.feed, &options.columns, &options.missing)?;
    let file = options.feed.display().to_string();
    let length = std::fs::metadata(&options.feed)
        .map(|m| m.len())
        .unwrap_or(0);
    let bytes_per_row = match feed.rows {
        0 => 0.0,
        rows => length as f64 / rows as f64,
    };
    let schema = feed.schema.clone();
    if !options.pipelined {
        return replay_labelled(&file, schema, feed, options, "parquet", bytes_per_row);
    }
    let (sender, receiver) = std::sync::mpsc::sync_channel(PARQUET_BATCHES_IN_FLIGHT);
    std::thread::scope(|scope| {
        let decoder = scope.spawn(move || {
            for batch in feed {
                let stop = batch.is_err();
                // The engine hung up (a bad row or an output error): stop decoding.
                if sender.send(batch).is_err() || stop {
                    return;
                }
            }
        });
        let result = replay_labelled(&file, schema, receiver, options, "parquet", bytes_per_row);
        // Dropping the receiver (in the call above) lets the decoder stop.
        if let Err(panic) = decoder.join() {
            std::panic::resume_unwind(panic);
        }
        result
    })
}

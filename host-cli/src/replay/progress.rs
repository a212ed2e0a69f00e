//! The progress bar of a long replay, on standard error.

use crate::replay::options::ReplayOptions;

/// A bar for the options' feed, when asked for and the feed file is long enough.
pub fn progress_bar(options: &ReplayOptions) -> Option<indicatif::ProgressBar> {
    if !options.progress || options.feed.as_os_str() == "-" {
        return None;
    }
    let length = std::fs::metadata(&options.feed).ok()?.len();
    if length < PROGRESS_MIN_BYTES {
        return None;
    }
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(length),
        indicatif::ProgressDrawTarget::stderr_with_hz(8),
    );
    let template = if crate::terminal::colour_enabled() {
        "{spinner:.green} {bytes}/{total_bytes} [{bar:40.cyan/blue}] {bytes_per_sec}, {eta} left"
    } else {
        "{spinner} {bytes}/{total_bytes} [{bar:40}] {bytes_per_sec}, {eta} left"
    };
    if let Ok(style) = indicatif::ProgressStyle::with_template(template) {
        bar.set_style(style.progress_chars("=> "));
    }
    Some(bar)
}

/// Feeds smaller than this get no progress bar (they take well under a second).
pub const PROGRESS_MIN_BYTES: u64 = 32 << 20;

//! `steadycal report`: one self-contained HTML page (inline SVG, no scripts, no network)
//! with the plots an engineer reads first, for a replay run or a lab assessment.
//!
//! - [`checks`]: the per-check table `replay --checks` writes and the report reads,
//! - [`model`]: the run read from files (summary, events, checks, config), alarm intervals,
//! - [`thin`]: thinning of long runs (extremes and points near events kept),
//! - [`plot`]: one module per plot (plotters, SVG backend, built-in text metrics),
//! - [`html`]: page assembly, [`escape`]: escaping of every outside string,
//! - [`run_page`] ([`run_report`], with its figures and timeline in child modules) and
//!   [`assess_page`] ([`assess_report`]): what goes on the page for each kind of input.
//!
//! # Contract
//! - The page depends only on its inputs: two reports of the same run are byte-identical.
//! - Every plot is an `<svg data-plot="ID">` whose series are `<g class="series"
//!   data-series="NAME" data-points="N">`; the tests read these.
//! - Every page carries the caution that the tool supports, and does not replace,
//!   calibration under the applicable standards, local codes and licensed practice.

pub mod assess_page;
pub mod checks;
pub mod escape;
pub mod html;
pub mod model;
pub mod plot;
pub mod run_page;
pub mod thin;

pub use assess_page::assess_report;
pub use run_page::run_report;

use serde_json::Value;

use plot::short;
use plot::spread::SpreadBin;

/// The cautions every report starts its list with.
pub fn base_cautions() -> Vec<String> {
    vec![
        "steadycal supports, and does not replace, calibration under the applicable standards, local codes and licensed practice. An alarm cleared by the tool, or a report made with it, is not a certified calibration.".into(),
        "Readings can feed decisions about safety (gas detection, structural loads): act on them only within the procedures of the site.".into(),
    ]
}

/// How times are shown: offset from the first time, in a unit that suits the span.
#[derive(Clone, Debug)]
pub struct TimeAxis {
    /// The first time, seconds.
    pub t0: f64,
    /// Seconds per display unit.
    pub unit: f64,
    /// The axis label.
    pub label: String,
}

impl TimeAxis {
    /// A time axis for times in `[t0, t1]` seconds.
    pub fn new(t0: f64, t1: f64) -> TimeAxis {
        let t0 = if t0.is_finite() { t0 } else { 0.0 };
        let span = if t1.is_finite() { t1 - t0 } else { 0.0 };
        let (unit, name) = if span <= 300.0 {
            (1.0, "s")
        } else if span <= 3.0 * 3600.0 {
            (60.0, "min")
        } else if span <= 4.0 * 86_400.0 {
            (3600.0, "h")
        } else {
            (86_400.0, "d")
        };
        let origin = if t0 > 1e8 {
            time::OffsetDateTime::from_unix_timestamp(t0.floor() as i64)
                .ok()
                .and_then(|t| {
                    t.format(&time::format_description::well_known::Rfc3339)
                        .ok()
                })
                .unwrap_or_else(|| format!("t = {t0} s"))
        } else {
            format!("t = {} s", short(t0))
        };
        TimeAxis {
            t0,
            unit,
            label: format!("time since {origin} ({name})"),
        }
    }
    /// A time in display units.
    pub fn at(&self, t: f64) -> f64 {
        (t - self.t0) / self.unit
    }
}

fn get_f64(value: &Value, path: &[&str]) -> Option<f64> {
    let mut v = value;
    for key in path {
        v = v.get(*key)?;
    }
    v.as_f64()
}

fn display(value: &Value) -> String {
    match value {
        Value::Null => "-".into(),
        Value::String(s) => s.clone(),
        Value::Number(n) => n.as_f64().map(short).unwrap_or_else(|| n.to_string()),
        other => other.to_string(),
    }
}

/// λ of a rung name.
pub fn rung_lambda(name: &str) -> Option<f64> {
    steadycal_core::transform::Rung::from_name(name).map(|r| r.lambda::<f64>())
}

/// Residual SDs in `bins` log-spaced level bins over `[low, high]` (Welford per bin;
/// standard error of an SD from n residuals ≈ SD/√(2(n − 1)), the normal-theory
/// approximation of JCGM 100:2008 (GUM) Table E.1, which G.1.2 quotes as "about 13 percent"
/// for 30 observations: 1/√58 = 0.131). Bins with fewer than 3 residuals are left out.
pub fn spread_bins(
    levels: &[f64],
    residuals: &[f64],
    low: f64,
    high: f64,
    bins: usize,
) -> Vec<SpreadBin> {
    let (l0, l1) = (low.ln(), high.ln());
    let mut acc = vec![(0.0f64, 0.0f64, 0.0f64, 0.0f64); bins]; // n, mean, m2, sum ln level
    for (&level, &residual) in levels.iter().zip(residuals) {
        if !(level > 0.0 && residual.is_finite()) {
            continue;
        }
        let position = (level.ln() - l0) / (l1 - l0) * bins as f64;
        if !(0.0..bins as f64).contains(&position) {
            continue;
        }
        let a = &mut acc[position as usize];
        a.0 += 1.0;
        let delta = residual - a.1;
        a.1 += delta / a.0;
        a.2 += delta * (residual - a.1);
        a.3 += level.ln();
    }
    acc.into_iter()
        .filter(|a| a.0 >= 3.0)
        .map(|(n, _, m2, sum_ln)| {
            let sd = (m2 / (n - 1.0)).sqrt();
            SpreadBin {
                level: (sum_ln / n).exp(),
                sd,
                se: sd / (2.0 * (n - 1.0)).sqrt(),
                count: n,
            }
        })
        .collect()
}

/// Scatter cells of the residual plots: time slices × level bins.
pub const SCATTER_SLICES: usize = 4;
/// Level bins of the residual plots' thinning grid.
pub const SCATTER_BINS: usize = 30;
/// Time buckets of the parameter plots' thinning.
pub const SERIES_BUCKETS: usize = 600;
/// Most rows listed in the events table.
pub const EVENT_ROWS: usize = 400;

//! What every key means: unit, default, valid range and meaning, written once. The written
//! file's comments and the README's key table come from this list (`tests/keys.rs` checks
//! the README against it and that every key of the schema is listed).

/// One key's documentation.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Key {
    /// Dotted key; `KIND` stands for each detector alarm kind.
    pub key: &'static str,
    /// Unit.
    pub unit: &'static str,
    /// Default.
    pub default: &'static str,
    /// Valid values.
    pub range: &'static str,
    /// Meaning.
    pub meaning: &'static str,
}

const fn key(
    key: &'static str,
    unit: &'static str,
    default: &'static str,
    range: &'static str,
    meaning: &'static str,
) -> Key {
    Key {
        key,
        unit,
        default,
        range,
        meaning,
    }
}

/// Every key, in the order of the file.
pub const KEYS: &[Key] = &[
    key("range.low", "raw units above the origin", "1", "> 0, below `range.high`", "lower end of the working range (spread bins start here)"),
    key("range.high", "raw units above the origin", "1000", "finite, above `range.low`", "upper end of the working range"),
    key("range.origin", "raw units", "the sensor's baseline", "finite", "known level origin: levels are measured from it from the first check and power rungs need values above it; not given: from the end of the warm-up, levels are measured from the sensor's baseline (its fitted raw output at zero reference)"),
    key("basis.quadratic", "bool", "false", "true, false", "add `c·ref²` to the calibration mean"),
    key("basis.temperature", "bool", "false", "true, false; not with `quadratic`", "add `d·(T − T₀)` (3 parameters at most)"),
    key("basis.reference_scale", "reference units", "`range.high`", "> 0", "regressor scaling"),
    key("basis.temperature_reference", "°C", "20", "finite", "T₀"),
    key("basis.temperature_scale", "°C", "10", "> 0", "scaling of T − T₀"),
    key("fit.forgetting", "—", "0.999", "(0, 1]", "forgetting factor β of every fit and running sum"),
    key("fit.initial_variance", "—", "1e6", "> 0", "initial covariance diagonal, also the wind-up ceiling"),
    key("fit.warm_up", "checks", "200", "integer ≥ 0", "checks before the spread bins and the likelihoods start"),
    key("ladder.initial_rung", "rung", "`identity`", "`identity`, `sqrt`, `log`, `inv_sqrt`, `inverse`", "rung to start on"),
    key("ladder.switch_alpha", "probability", "0.001", "(0, 1)", "switch margin = χ²₁(1 − α)/2 (5.414)"),
    key("ladder.switch_margin", "log-likelihood", "5.414", "> 0", "the margin itself (instead of `switch_alpha`)"),
    key("ladder.switch_hold", "checks", "200", "integer ≥ 0", "consecutive winning checks before a switch"),
    key("spread.alpha", "probability", "0.001", "(0, 1)", "Koenker threshold = χ²₁(1 − α) (10.83)"),
    key("spread.threshold", "χ²", "10.83", "> 0", "the threshold itself (instead of `spread.alpha`)"),
    key("spread.every", "checks", "32", "integer ≥ 1", "how often k and the Koenker statistic are evaluated"),
    key("spread.interval_level", "probability", "0.95", "(0, 1)", "interval reported for k: z = Φ⁻¹((1 + level)/2) (1.960)"),
    key("spread.interval_z", "—", "1.960", "> 0", "the quantile itself (instead of `interval_level`)"),
    key("mean_check.alpha", "probability", "0.001", "(0, 1)", "mean-adequacy check: z = Φ⁻¹(1 − α) (3.090)"),
    key("mean_check.z", "—", "3.090", "> 0", "the quantile itself (instead of `alpha`)"),
    key("mean_check.after", "checks", "1000", "integer ≥ 0", "checks after a switch before the check runs"),
    key("mean_check.min_per_bin", "residuals", "20", "integer ≥ 0", "residuals a level bin needs to take part"),
    key("readings.coverage_factor", "—", "2", "> 0", "coverage factor of the expanded uncertainty"),
    key("columns.time", "header name", "`t`", "text", "time column (command-line options win)"),
    key("columns.raw", "header name", "`raw`", "text", "raw output column"),
    key("columns.reference", "header name", "`ref`", "text", "reference column"),
    key("columns.temperature", "header name", "`temp`", "text", "temperature column"),
    key("columns.missing", "cell texts", "`[]`", "texts; not `nan` or `inf`", "cells that mean \"no value\" besides the empty cell and `NA` (`[\"-200\"]`; `--missing` adds to them); a numeric marker also matches the same number written otherwise"),
    key("detect.screen.raw_low", "raw units", "origin − `range.high`", "finite, below `raw_high`", "lowest physically possible raw value: below it a sample is rejected (`signal_out_of_range`)"),
    key("detect.screen.raw_high", "raw units", "origin + 2·`range.high`", "finite, above `raw_low`", "highest physically possible raw value"),
    key("detect.screen.stuck_run", "samples", "50", "integer ≥ 2", "identical raw values in a row that make the signal stuck (`signal_stuck`)"),
    key("detect.screen.stuck_window", "checks", "32", "integer ≥ 0 (0 = off)", "window of the no-response test"),
    key("detect.screen.stuck_response", "fraction", "0.01", "[0, 1)", "the no-response test fires when the raw range of a window is below this fraction of the predicted range"),
    key("detect.screen.spike_bound", "standardized units", "6", "> 0, `inf` = off", "a check beyond it under every credible rung is rejected as a spike"),
    key("detect.screen.spike_run_limit", "checks", "3", "integer ≥ 1", "spikes in a row after which they are accepted as a change"),
    key("detect.screen.reference_gap_seconds", "s", "86400", "> 0, `inf` = off", "time without a check that makes a reference gap (`reference_gap`)"),
    key("detect.cusum.reference_value", "σ", "0.5", "≥ 0", "CUSUM reference value k (half the shift detected fastest)"),
    key("detect.cusum.decision_interval", "σ", "5 (in-control run length 465 checks)", "> 0", "CUSUM decision interval h (`bias_shift`)"),
    key("detect.cusum.in_control_run_length", "checks", "—", "> 1, ≤ 1e12, reachable with h ≤ 60", "false-alarm budget: sets h so the two-sided CUSUM's in-control average run length is this (Brook & Evans Markov chain); not with `decision_interval`"),
    key("detect.cusum.in_control_time", "duration (`\"30d\"`, `\"2w\"`)", "—", "> 0; needs `checks_per_hour`", "the same budget as a time: run length = hours × `checks_per_hour`"),
    key("detect.cusum.checks_per_hour", "checks per hour", "—", "> 0; only with `in_control_time`", "the check rate expected in the field"),
    key("detect.spread_jump.reference_value", "standardized `ln z²`", "0.3", "≥ 0", "reference value of the spread-jump CUSUM"),
    key("detect.spread_jump.decision_interval", "standardized `ln z²`", "8", "> 0", "decision interval of the spread-jump CUSUM (`spread_jump`)"),
    key("detect.drift.gain_tolerance_percent", "% of the baseline gain", "1", "≥ 0", "gain change beyond which a significant drift raises `gain_drift`"),
    key("detect.drift.offset_tolerance", "raw units", "`range.low`", "≥ 0", "offset change beyond which a significant drift raises `offset_drift`"),
    key("detect.drift.alpha", "probability", "0.001", "(0, 1)", "Wald test: quantiles χ²_p(1 − α), p = 1..4"),
    key("detect.drift.wald_quantiles", "χ²", "[10.828, 13.816, 16.266, 18.467]", "4 numbers > 0", "the quantiles themselves (instead of `alpha`)"),
    key("detect.drift.freeze_after", "checks after the warm-up", "1000", "integer ≥ 0", "when no baseline is commissioned, the monitor freezes its own then"),
    key("detect.drift.every", "checks", "16", "integer ≥ 1", "how often the drift test runs"),
    key("detect.alarms.KIND.severity", "severity", "per kind (table below)", "`info`, `warn`, `alarm`", "severity of the raised alarm"),
    key("detect.alarms.KIND.raise_after", "observations", "per kind", "integer ≥ 1", "present observations of one episode that raise the alarm"),
    key("detect.alarms.KIND.clear_after", "observations", "per kind", "integer ≥ 1", "absent observations in a row that clear it"),
    key("baseline.offset", "raw units", "none (the monitor freezes a baseline)", "finite; required in `[baseline]`", "commissioned offset the drift test compares with"),
    key("baseline.gain", "raw units per reference unit", "none", "finite; required in `[baseline]`", "commissioned gain"),
    key("baseline.quadratic", "raw units per reference unit²", "none", "finite; exactly when `basis.quadratic`", "commissioned quadratic term"),
    key("baseline.temperature", "raw units per °C", "none", "finite; exactly when `basis.temperature`", "commissioned temperature term"),
    key("baseline.covariance", "squared parameter units", "exact (zero)", "n × n, symmetric, positive semi-definite (n terms in use)", "covariance of the commissioned parameters, in the order offset, gain, further terms"),
    key("baseline.residual_sd", "raw units", "none", "≥ 0", "residual scale of the commissioning fit at the level √(low·high) above the origin (reported beside the field fit's)"),
    key("baseline.source", "text", "none", "text", "where the baseline comes from"),
    key("acceptance.source", "text", "none", "text", "where the criteria come from"),
    key("acceptance.slope_range", "raw units per reference unit", "none", "[low, high], low ≤ high", "OLS slope of the lab run must lie in it"),
    key("acceptance.intercept_range", "raw units", "none", "[low, high], low ≤ high", "OLS intercept must lie in it"),
    key("acceptance.r_squared_min", "—", "none", "[0, 1]", "smallest R² of the OLS line"),
    key("acceptance.residual_sd_max", "raw units", "none", "≥ 0", "largest residual SD of the OLS line"),
    key("acceptance.rmse_max", "raw units", "none", "≥ 0", "largest root mean square of `raw − ref` (sensor reporting in reference units)"),
    key("acceptance.nrmse_max_percent", "%", "none", "≥ 0", "largest RMSE as a percentage of the mean reference"),
    key("acceptance.lod_max", "reference units", "none", "≥ 0", "largest limit of detection"),
    key("acceptance.loq_max", "reference units", "none", "≥ 0", "largest limit of quantification"),
];

/// The documentation of a dotted key (an alarm kind's key matches its `KIND` line).
pub fn find(dotted: &str) -> Option<&'static Key> {
    let generic = match dotted.strip_prefix("detect.alarms.") {
        Some(rest) => match rest.split_once('.') {
            Some((_, field)) => format!("detect.alarms.KIND.{field}"),
            None => dotted.to_string(),
        },
        None => dotted.to_string(),
    };
    KEYS.iter().find(|k| k.key == generic)
}

/// The README's key table (Markdown), rendered from [`KEYS`].
pub fn markdown_table() -> String {
    let mut out = String::from(
        "| key | unit | default | valid | meaning |\n| --- | --- | --- | --- | --- |\n",
    );
    for k in KEYS {
        out.push_str(&format!(
            "| `{}` | {} | {} | {} | {} |\n",
            k.key, k.unit, k.default, k.range, k.meaning
        ));
    }
    out
}

//! Where the drift test's baseline came from, for the summary: the configuration's
//! `[baseline]` (a commissioning run), frozen by the monitor from its own fit (at which
//! sample), or carried by a resumed snapshot; and the CUSUM's decision interval in force
//! with the in-control run length it gives.

use std::fmt::Display;

use serde::Serialize;
use steadycal_config::{arl, Commissioned};
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;

use crate::number::Shortest;

/// The origin of a monitor's baseline.
#[derive(Clone, Debug, PartialEq)]
pub enum BaselineOrigin {
    /// None yet: the monitor will freeze one.
    Pending,
    /// Set from the configuration's `[baseline]`.
    Commissioning {
        /// The section's `source`.
        source: Option<String>,
        /// The commissioning fit's residual scale.
        residual_sd: Option<f64>,
    },
    /// Frozen by the monitor after the sample with this `seq` (`None`: before a resume).
    Frozen {
        /// The sample after which the baseline existed.
        seq: Option<u64>,
    },
}

impl BaselineOrigin {
    /// Sets the commissioned baseline on a fresh monitor.
    pub fn commission<R: Real>(
        monitor: &mut Monitor<R>,
        baseline: &Commissioned,
    ) -> anyhow::Result<Self> {
        let parameters = baseline.parameters.map(R::from_f64);
        let covariance = baseline
            .covariance
            .map(|rows| rows.map(|row| row.map(R::from_f64)));
        monitor
            .set_baseline(parameters, covariance)
            .map_err(|error| anyhow::anyhow!("`baseline`: refused by the monitor ({error:?})"))?;
        Ok(BaselineOrigin::Commissioning {
            source: baseline.source.clone(),
            residual_sd: baseline.residual_sd,
        })
    }

    /// The origin of a resumed monitor's baseline: the commissioned one when it carries
    /// exactly that, frozen before the resume otherwise.
    pub fn resumed<R: Real>(monitor: &Monitor<R>, baseline: Option<&Commissioned>) -> Self {
        match (monitor.baseline(), baseline) {
            (None, _) => BaselineOrigin::Pending,
            (Some(held), Some(commissioned))
                if held.parameters == commissioned.parameters.map(R::from_f64) =>
            {
                BaselineOrigin::Commissioning {
                    source: commissioned.source.clone(),
                    residual_sd: commissioned.residual_sd,
                }
            }
            (Some(_), _) => BaselineOrigin::Frozen { seq: None },
        }
    }

    /// Notes the sample after which a pending baseline appeared (called after each push).
    #[inline]
    pub fn observe<R: Real>(&mut self, monitor: &Monitor<R>, seq: u64) {
        if *self == BaselineOrigin::Pending && monitor.baseline().is_some() {
            *self = BaselineOrigin::Frozen { seq: Some(seq) };
        }
    }

    /// The summary's `drift.baseline` fields saying where it came from.
    pub fn summary(&self) -> OriginSummary {
        let mut entries = OriginSummary::default();
        match self {
            BaselineOrigin::Pending => {}
            BaselineOrigin::Commissioning {
                source,
                residual_sd,
            } => {
                entries.source = Some("commissioning");
                entries.commissioned_from = Some(source.clone());
                entries.residual_sd = Some(*residual_sd);
            }
            BaselineOrigin::Frozen { seq } => {
                entries.source = Some("frozen");
                entries.frozen_at_seq = Some(*seq);
            }
        }
        entries
    }
}

/// Where a baseline came from, as the summary writes it (`source` always, null while
/// pending; the other fields only for their origin).
#[derive(Clone, Debug, Default, Serialize)]
pub struct OriginSummary {
    /// `commissioning`, `frozen`, or null while pending.
    pub source: Option<&'static str>,
    /// The commissioning section's `source`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub commissioned_from: Option<Option<String>>,
    /// The commissioning fit's residual scale.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub residual_sd: Option<Option<f64>>,
    /// The sample after which the monitor froze its own.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub frozen_at_seq: Option<Option<u64>>,
}

/// The summary's CUSUM figures: `cusum_k`, `cusum_h` in force and the two-sided in-control
/// average run length they give (checks, rounded; Brook & Evans, see
/// `steadycal_config::arl`; null when infinite).
#[derive(Clone, Copy, Debug, Serialize)]
pub struct CusumSummary {
    /// Reference value k.
    pub cusum_k: Shortest,
    /// Decision interval h.
    pub cusum_h: Shortest,
    /// In-control average run length.
    pub cusum_in_control_run_length: Option<f64>,
}

impl CusumSummary {
    /// The figures of `monitor`'s configuration.
    pub fn of<R: Real + Display>(monitor: &Monitor<R>) -> Self {
        let cusum = monitor.config().detect.cusum;
        let (k, h) = (cusum.reference_value, cusum.decision_interval);
        let run_length = arl::two_sided(k.to_f64(), h.to_f64(), 0.0);
        CusumSummary {
            cusum_k: Shortest::of(k),
            cusum_h: Shortest::of(h),
            cusum_in_control_run_length: run_length.is_finite().then(|| run_length.round()),
        }
    }
}

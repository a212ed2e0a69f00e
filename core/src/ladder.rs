//! The power ladder: one shadow calibration fit per Box–Cox rung, compared by their profile
//! log-likelihood on the raw scale.
//!
//! Every rung keeps the calibration mean on the raw scale, `raw = f(ref; θ)`, and transforms
//! both sides through it (Carroll & Ruppert): its residual is `g_λ(raw) − g_λ(f)`. To first
//! order that is weighted least squares with weight `g_λ'(f)² = f^(2λ−2)`, so each rung is a
//! [`RecursiveFit`] updated with that weight evaluated at the rung's own current prediction.
//! The fit takes the weight's reciprocal, the relative variance `f^(2−2λ)`
//! ([`Rung::relative_variance`]), which needs multiplications only.
//! A transform therefore changes how the scatter is treated and never bends the line. The
//! regressor is never transformed.
//!
//! Rungs are compared by the Box–Cox profile log-likelihood
//! `ℓ(λ) = −(N/2)·ln(RSS_λ/N) + (λ − 1)·Σ ln u`, with `RSS_λ` the sum of squared transformed
//! residuals and `u` the scaled level, all kept as exponentially weighted running sums at the
//! fits' forgetting rate. Levels are scaled by a fixed `level_scale` so that the transforms
//! stay well conditioned in `f32`; the scale cancels in every difference of `ℓ`.
//!
//! # Invariants
//! - The active rung always has a fit that has seen every sample the other rungs saw, so a
//!   switch hands over a warmed-up fit and causes no transient.
//! - The likelihood sums only take samples that every rung could use (level above the
//!   origin, prediction above the origin), so the rungs are compared on the same data, and
//!   only samples at or above the bottom of the working range (`level_floor`).
//! - A check that is the mean of `m` values ([`Averaging`]) has weight `m` times a single
//!   value's in every rung's fit, counts `m` times its squared transformed residual in the
//!   likelihood sums (still one check in `N` and in `Σ ln u`), and is standardized by
//!   `√(σ²·(1/(m·w(f)) + xᵀPx))`. With `m = 1` each factor is exactly 1: the same bits as
//!   the arithmetic without it.
//! - A rung only becomes active after it has led the active rung by the required lead at
//!   every comparison (one each `decide_every` checks) over `switch_hold` checks; that is,
//!   for `switch_hold` checks in a row. The required lead is `switch_margin·(1 + s)`, with
//!   `s` the count of recent switches (each fades over eight memories of the fits,
//!   `8/(1 − β)` checks), and `switch_margin·(1 + 2s)` for going back to the rung left
//!   last: a ladder that has just switched needs more evidence to switch again, and more
//!   still to undo the switch.
//! - While held ([`PowerLadder::hold`], the monitor holds it while the calibration mean is
//!   inadequate), no rung becomes active and no challenger is followed.
//! - [`PowerLadder::provisional`] is true during the warm-up and while a challenger leads
//!   but has not yet won: the active rung is not yet backed by the evidence.

use serde::{Deserialize, Serialize};

use crate::fit::{FitConfig, Forgetting, RecursiveFit};
use crate::real::Real;
use crate::sample::Averaging;
use crate::transform::{Rung, RUNG_COUNT};

/// Settings of a [`PowerLadder`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct LadderConfig<R> {
    /// Settings of every rung's fit.
    pub fit: FitConfig<R>,
    /// Levels are measured above this origin; power rungs need values above it.
    pub level_origin: R,
    /// Levels are divided by this scale before transforming (for example the geometric
    /// mean of the working range).
    pub level_scale: R,
    /// `1 / level_scale`: the scaling is a multiplication on every check.
    pub inverse_level_scale: R,
    /// `ln level_scale`, so that `ln(value − origin)` is `ln u + ln level_scale` when the
    /// `log` rung has `ln u` at hand.
    pub log_level_scale: R,
    /// Smallest scaled prediction used for a weight (keeps weights bounded near the origin).
    pub level_floor: R,
    /// Checks before the likelihood sums start (the fits are still poor before).
    pub warm_up: u32,
    /// Log-likelihood lead a rung needs over the active one to count as winning.
    pub switch_margin: R,
    /// Checks a rung must keep winning (compared every `decide_every` checks) for a switch.
    pub switch_hold: u32,
    /// The rungs are compared every this many checks (a comparison costs an exponential,
    /// and a logarithm when another rung leads).
    pub decide_every: u32,
}

/// The state of one rung.
#[derive(Clone, Debug, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct RungState<R, const P: usize> {
    /// The rung's calibration fit (raw-scale mean, transform-both-sides weights).
    pub fit: RecursiveFit<R, P>,
    /// Exponentially weighted sum of squared transformed residuals.
    pub transformed_sse: R,
}

/// A switch of the active rung.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Switch<R> {
    /// Previous rung.
    pub from: Rung,
    /// New rung.
    pub to: Rung,
    /// Log-likelihood lead of `to` over `from` at the switch.
    pub gain: R,
    /// The lead it needed (the margin grown by recent switches).
    pub required: R,
    /// Checks over which `to` kept the lead before the switch.
    pub held: u32,
}

/// What one check did to the ladder, seen from the active rung before the update.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct LadderStep<R> {
    /// The active rung's a-priori prediction of the raw value.
    pub prediction: R,
    /// `raw − prediction`.
    pub residual: R,
    /// The residual standardized by the active rung's spread model at this level,
    /// including the uncertainty of the prediction. `None` until the fit has a residual
    /// variance.
    pub standardized: Option<R>,
    /// The value or the prediction was at or below the origin: the power rungs skipped it.
    pub below_origin: bool,
    /// A switch that happened on this check.
    pub switch: Option<Switch<R>>,
    /// `ln(prediction − origin)` when the active rung is `log` and its pass took the
    /// logarithm of the prediction anyway (`ln u + ln level_scale`); `None` otherwise, and
    /// whenever that level is not positive and finite.
    pub log_level: Option<R>,
}

/// The active rung's a-priori view of one check (see [`PowerLadder::assess`]).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Assessment<R> {
    /// The active rung's a-priori prediction of the raw value.
    pub prediction: R,
    /// `raw − prediction`.
    pub residual: R,
    /// The residual standardized by the active rung's spread model at this level
    /// (`residual / √(σ²·(1/(m·w(f)) + xᵀPx))`, `m` the values the raw value is the mean
    /// of); `None` until the fit has a residual variance.
    pub standardized: Option<R>,
}

/// What every rung's part of one check reads, and the comparison it builds.
struct RungPass<'a, R, const P: usize> {
    x: &'a [R; P],
    raw: R,
    raw_level: R,
    /// The likelihood sums have started and the raw value is above the origin: every rung
    /// computes its transformed residual.
    comparing: bool,
    /// `g_λ(raw)` on every rung on entry (zeros when the raw value is below the origin);
    /// each rung's pass, when `comparing`, subtracts `g_λ` of its own prediction, leaving
    /// the transformed residual. (Starting from the raw transforms spares zeroing an
    /// array on every check.)
    transformed: [R; RUNG_COUNT],
    /// Every power rung's own prediction is above the origin so far.
    predictions_positive: bool,
    /// `ln u` of the `log` rung's own prediction, when it was taken (`comparing`).
    log_rung_log_level: Option<R>,
    /// `β`, `1/β` and the covariance ceiling, shared by every rung's fit.
    forgetting: Forgetting<R>,
    /// Scaled levels below this floor take it for the rung weights.
    level_floor: R,
}

/// Shadow fits on every rung, and the choice between them.
#[derive(Clone, Debug, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct PowerLadder<R, const P: usize> {
    rungs: [RungState<R, P>; RUNG_COUNT],
    log_level_sum: R,
    sample_weight: R,
    active: Rung,
    candidate: Option<Rung>,
    lead: u32,
    checks: u32,
    since_decision: u32,
    /// Recent switches, each fading over eight memories of the fits.
    recent_switches: R,
    /// The rung left at the last switch.
    left: Option<Rung>,
    /// No switch while true (the calibration mean is inadequate).
    held: bool,
}

/// Recent switches fade over this many memories `1/(1 − β)` of the fits.
const SWITCH_MEMORIES: f64 = 8.0;

impl<R: Real, const P: usize> PowerLadder<R, P> {
    /// A ladder of `dim`-parameter fits, starting on `initial` rung. A calibration has at
    /// least an offset and a gain: `dim` below 2 is taken as 2 (and above `P` as `P`).
    pub fn new(dim: usize, config: &LadderConfig<R>, initial: Rung) -> Self {
        let dim = dim.max(2);
        let rung = RungState {
            fit: RecursiveFit::new(dim, config.fit),
            transformed_sse: R::ZERO,
        };
        PowerLadder {
            rungs: core::array::from_fn(|_| rung.clone()),
            log_level_sum: R::ZERO,
            sample_weight: R::ZERO,
            active: initial,
            candidate: None,
            lead: 0,
            checks: 0,
            since_decision: 0,
            recent_switches: R::ZERO,
            left: None,
            held: false,
        }
    }

    /// True while the active rung is not yet backed by the evidence: during the warm-up,
    /// and while a challenger leads but has not yet won.
    pub fn provisional(&self, config: &LadderConfig<R>) -> bool {
        !self.warmed_up(config) || self.candidate.is_some()
    }

    /// The challenger leading the active rung, and the checks it has held the lead.
    pub fn challenger(&self) -> Option<(Rung, u32)> {
        self.candidate.map(|rung| (rung, self.lead))
    }

    /// Holds the active rung (`true`: no switch until released) or releases it.
    pub fn hold(&mut self, held: bool) {
        self.held = held;
        if held {
            self.candidate = None;
            self.lead = 0;
        }
    }

    /// True while the ladder is held.
    pub fn held(&self) -> bool {
        self.held
    }

    /// The lead `rung` needs over the active one to count as winning: the margin, grown
    /// by recent switches, and twice as much for going back to the rung left last.
    pub fn required_lead(&self, config: &LadderConfig<R>, rung: Rung) -> R {
        let back = if self.left == Some(rung) {
            R::TWO
        } else {
            R::ONE
        };
        config.switch_margin * (R::ONE + back * self.recent_switches)
    }

    /// The rung the calibration currently uses.
    pub fn active(&self) -> Rung {
        self.active
    }

    /// The fit of a rung.
    pub fn fit(&self, rung: Rung) -> &RecursiveFit<R, P> {
        &self.rungs[rung.index()].fit
    }

    /// The active rung's fit.
    pub fn active_fit(&self) -> &RecursiveFit<R, P> {
        self.fit(self.active)
    }

    /// Checks seen.
    pub fn checks(&self) -> u32 {
        self.checks
    }

    /// True once the likelihood sums have started.
    pub fn warmed_up(&self, config: &LadderConfig<R>) -> bool {
        self.checks > config.warm_up
    }

    /// The scaled level `(value − origin) / scale`, computed as a product with
    /// `inverse_level_scale`.
    #[inline]
    pub fn scaled_level(config: &LadderConfig<R>, value: R) -> R {
        (value - config.level_origin) * config.inverse_level_scale
    }

    /// Relative variance `1/w` of `rung` at raw-scale prediction `prediction`, with the
    /// scaled level bounded below by the floor (a NaN level takes the floor).
    #[inline]
    pub fn relative_variance(config: &LadderConfig<R>, rung: Rung, prediction: R) -> R {
        let scaled = Self::scaled_level(config, prediction);
        let floor = config.level_floor;
        rung.relative_variance(if scaled > floor { scaled } else { floor })
    }

    /// Puts the fit configuration back into every rung's fit after decoding (the fits'
    /// encoding leaves it out).
    pub fn set_fit_config(&mut self, config: FitConfig<R>) {
        for rung in self.rungs.iter_mut() {
            rung.fit.set_config(config);
        }
    }

    /// Profile log-likelihood of every rung (`None` before the sums start).
    pub fn log_likelihoods(&self) -> Option<[R; RUNG_COUNT]> {
        if !(self.sample_weight > R::ONE) {
            return None;
        }
        let n = self.sample_weight;
        let mut out = [R::ZERO; RUNG_COUNT];
        for rung in Rung::ALL {
            let sse = self.rungs[rung.index()]
                .transformed_sse
                .max(R::MIN_POSITIVE);
            out[rung.index()] =
                -(n * R::HALF) * (sse / n).ln() + rung.log_jacobian(self.log_level_sum);
        }
        Some(out)
    }

    /// The rung with the highest profile log-likelihood, and that log-likelihood.
    pub fn best(&self) -> Option<(Rung, R)> {
        Some(Self::best_of(self.active, &self.log_likelihoods()?))
    }

    /// The rung with the highest profile log-likelihood and its lead over the active rung
    /// (zero when the active rung leads; `None` before the sums start), with one
    /// exponential in place of a logarithm per rung.
    ///
    /// With `G = exp(Σ ln u / N)`, the weighted geometric mean of the scaled levels, the
    /// profile log-likelihood is `ℓ(λ) = −(N/2)·ln(Q_λ/N)` where `Q_λ = RSS_λ·G^{2(1−λ)}`
    /// (the residual sum of squares of the transform normalized by `G^{λ−1}`, the
    /// normalized form of Box and Cox 1964): the best rung has the smallest `Q_λ` and leads the active one by
    /// `(N/2)·ln(Q_active/Q_best)`. Each `Q_λ` is taken relative to the `log` rung's
    /// (a factor `G^{−2λ}`, powers −2 to 2, to keep the products in range); when a product
    /// over- or underflows, the log-likelihoods are compared directly.
    fn leader(&self) -> Option<(Rung, R)> {
        if !(self.sample_weight > R::ONE) {
            return None;
        }
        let n = self.sample_weight;
        let mean = (self.log_level_sum / n).exp();
        let inverse = R::ONE / mean;
        // Written out (no loop over the rungs): this runs at every decision.
        let sse = |rung: Rung| {
            self.rungs[rung.index()]
                .transformed_sse
                .max(R::MIN_POSITIVE)
        };
        let normalized = [
            sse(Rung::Identity) * (inverse * inverse),
            sse(Rung::Sqrt) * inverse,
            sse(Rung::Log),
            sse(Rung::InvSqrt) * mean,
            sse(Rung::Inverse) * (mean * mean),
        ];
        let [a, b, c, d, e] = normalized;
        if !(a.is_positive_finite()
            && b.is_positive_finite()
            && c.is_positive_finite()
            && d.is_positive_finite()
            && e.is_positive_finite())
        {
            let likelihoods = self.log_likelihoods()?;
            let (best, best_likelihood) = Self::best_of(self.active, &likelihoods);
            return Some((best, best_likelihood - likelihoods[self.active.index()]));
        }
        let active = self.active;
        let mut best = active;
        let mut lowest = normalized[active.index()];
        for (rung, q) in Rung::ALL.into_iter().zip(normalized) {
            if q < lowest {
                best = rung;
                lowest = q;
            }
        }
        if best == active {
            return Some((active, R::ZERO));
        }
        let ratio = normalized[active.index()] / lowest;
        Some((best, n * R::HALF * ratio.ln()))
    }

    fn best_of(active: Rung, likelihoods: &[R; RUNG_COUNT]) -> (Rung, R) {
        let mut best = (active, likelihoods[active.index()]);
        for rung in Rung::ALL {
            if likelihoods[rung.index()] > best.1 {
                best = (rung, likelihoods[rung.index()]);
            }
        }
        best
    }

    /// The active rung's view of a check before any fit changes: its a-priori prediction,
    /// residual and standardized residual (the same values [`PowerLadder::update`] reports
    /// in its [`LadderStep`]). Changes nothing; used by the screen to exclude spikes from
    /// every fit. `inverse` is `1/m` for a raw value that is the mean of `m` values
    /// ([`Averaging::inverse`]; 1 for a single value).
    #[inline]
    pub fn assess(
        &self,
        config: &LadderConfig<R>,
        x: &[R; P],
        raw: R,
        inverse: R,
    ) -> Assessment<R> {
        let (prediction, standardized) = self.standardized_on(config, self.active, x, raw, inverse);
        Assessment {
            prediction,
            residual: raw - prediction,
            standardized,
        }
    }

    /// A rung's a-priori prediction and standardized residual
    /// `(raw − f) / √(σ²·(inverse/w(f) + xᵀPx))` for a check, without changing anything,
    /// with `inverse` the check's `1/m` ([`Averaging::inverse`]; 1 for a single value).
    /// The standardized residual is `None` until that rung's fit has a residual variance.
    #[inline(always)]
    pub fn standardized_on(
        &self,
        config: &LadderConfig<R>,
        rung: Rung,
        x: &[R; P],
        raw: R,
        inverse: R,
    ) -> (R, Option<R>) {
        let fit = &self.rungs[rung.index()].fit;
        let prediction = fit.predict(x);
        let variance = fit.residual_variance();
        let relative = Self::relative_variance(config, rung, prediction) * inverse;
        let spread = variance * (relative + fit.leverage(x));
        let standardized = if fit.updates() as usize > fit.dim() && spread > R::ZERO {
            Some((raw - prediction) / spread.sqrt())
        } else {
            None
        };
        (prediction, standardized)
    }

    /// True when the check is beyond `bound` standardized units under every credible rung's
    /// spread model that has one (an outlier whatever the scatter model, not evidence for
    /// another rung). A rung is credible while its profile log-likelihood is within
    /// `switch_margin` of the best (a likelihood-ratio confidence set for λ). Only the active
    /// rung is computed unless its residual is beyond the bound. `inverse` as for
    /// [`PowerLadder::standardized_on`].
    pub fn beyond_on_every_rung(
        &self,
        config: &LadderConfig<R>,
        active: Option<R>,
        x: &[R; P],
        raw: R,
        bound: R,
        inverse: R,
    ) -> bool {
        let beyond = |z: Option<R>| matches!(z, Some(z) if !(z.abs() <= bound));
        if !beyond(active) {
            return false;
        }
        // Only rungs still credible as the scatter model may veto: those within
        // `switch_margin` of the best profile log-likelihood. A rung far behind (say
        // `inverse` on constant scatter, which expects huge scatter at the top of the range)
        // would otherwise excuse any spike there.
        let likelihoods = self.log_likelihoods();
        let best = likelihoods.map(|l| Self::best_of(self.active, &l).1);
        let credible = |rung: Rung| match (likelihoods, best) {
            (Some(l), Some(best)) => !(l[rung.index()] < best - config.switch_margin),
            _ => true,
        };
        Rung::ALL
            .into_iter()
            .filter(|&rung| rung != self.active && credible(rung))
            .all(|rung| {
                let (_, z) = self.standardized_on_out_of_line(config, rung, x, raw, inverse);
                z.is_none() || beyond(z)
            })
    }

    /// [`PowerLadder::standardized_on`] as one out-of-line copy for the spike veto, which
    /// runs only on a suspected spike; the check's own assessment keeps it inlined.
    #[inline(never)]
    fn standardized_on_out_of_line(
        &self,
        config: &LadderConfig<R>,
        rung: Rung,
        x: &[R; P],
        raw: R,
        inverse: R,
    ) -> (R, Option<R>) {
        self.standardized_on(config, rung, x, raw, inverse)
    }

    /// One check of a single value: `x` the regressors of the reference, `raw` the sensor
    /// output. The caller has screened `raw` and `x` to be finite.
    pub fn update(&mut self, config: &LadderConfig<R>, x: &[R; P], raw: R) -> LadderStep<R> {
        let assessment = self.assess(config, x, raw, R::ONE);
        self.update_assessed(config, x, raw, assessment, Averaging::SINGLE)
    }

    /// [`PowerLadder::update`] with the assessment already made by
    /// [`PowerLadder::assess`] on the same state, `x`, `raw` and `averaging.inverse`
    /// (saves computing it twice), for a raw value that is the mean of `averaging`'s `m`
    /// values.
    pub fn update_assessed(
        &mut self,
        config: &LadderConfig<R>,
        x: &[R; P],
        raw: R,
        assessment: Assessment<R>,
        averaging: Averaging<R>,
    ) -> LadderStep<R> {
        let Assessment {
            prediction,
            residual,
            standardized,
        } = assessment;

        let assessed_rung = self.active;
        let raw_level = Self::scaled_level(config, raw);
        let counting = self.checks >= config.warm_up;
        // Power rungs need the value above the origin; a rung whose own prediction is not
        // (yet) above it still learns, with its weight taken at the floor, but the sample
        // cannot enter the likelihood comparison.
        let raw_transforms = Rung::apply_every(raw_level);
        let below_origin = raw_transforms.is_none();
        let (raw_transforms, ln_raw) = raw_transforms.unwrap_or(([R::ZERO; RUNG_COUNT], R::ZERO));
        // One call per rung with the rung a constant, so each call compiles to that rung's
        // own transform and weight (no dispatch, no loop).
        let mut pass = RungPass {
            x,
            raw,
            raw_level,
            // Below the working range the rungs' weights sit at the floor and their
            // transforms at the steep end: such checks would decide between rungs on levels
            // the calibration does not serve, so they are left out of the comparison.
            comparing: counting && !below_origin && !(raw_level < config.level_floor),
            transformed: raw_transforms,
            predictions_positive: true,
            log_rung_log_level: None,
            forgetting: Forgetting::of(&config.fit).averaged(averaging.inverse),
            level_floor: config.level_floor,
        };
        // Every rung's fit has the ladder's dimension; the straight line (two parameters)
        // takes the written-out update inlined into each rung's pass. A ladder of capacity
        // two is always a straight line (`new` makes fits of at least two parameters, and a
        // restored monitor's fits must match its basis), so that capacity compiles only
        // this pass.
        if P == 2 || (P >= 2 && self.rungs[0].fit.dim() == 2) {
            self.step_every_rung::<true>(config, &mut pass, below_origin);
        } else {
            self.step_every_rung::<false>(config, &mut pass, below_origin);
        }
        // Comparable when every rung had its transformed residual and all are finite (a
        // non-finite value makes the sum of v·0 NaN).
        let comparable = pass.comparing && pass.predictions_positive && {
            let [a, b, c, d, e] = pass.transformed;
            (a * R::ZERO + b * R::ZERO + c * R::ZERO + d * R::ZERO + e * R::ZERO).is_finite()
        };
        self.checks = self.checks.saturating_add(1);

        let mut switch = None;
        if comparable {
            let beta = config.fit.forgetting;
            self.sample_weight = beta * self.sample_weight + R::ONE;
            self.log_level_sum = beta * self.log_level_sum + ln_raw;
            // Written out (no loop): the five residuals stay in registers. The mean of m
            // values counts its square m times (m = 1: the same bits).
            let [a, b, c, d, e] = pass.transformed;
            let m = averaging.count;
            let [ra, rb, rc, rd, re] = &mut self.rungs;
            ra.transformed_sse = beta * ra.transformed_sse + m * (a * a);
            rb.transformed_sse = beta * rb.transformed_sse + m * (b * b);
            rc.transformed_sse = beta * rc.transformed_sse + m * (c * c);
            rd.transformed_sse = beta * rd.transformed_sse + m * (d * d);
            re.transformed_sse = beta * re.transformed_sse + m * (e * e);
            self.since_decision = self.since_decision.saturating_add(1);
            if self.since_decision >= config.decide_every.max(1) {
                switch = self.decide(config);
            }
        }
        // The log rung's prediction is the assessed prediction when it was the active rung
        // (the same sum in the same order), so its logarithm gives the level's.
        let log_level = match (assessed_rung, pass.log_rung_log_level) {
            (Rung::Log, Some(log_u)) if log_u.is_finite() => Some(log_u + config.log_level_scale),
            _ => None,
        };
        LadderStep {
            prediction,
            residual,
            standardized,
            below_origin,
            switch,
            log_level,
        }
    }

    /// Every rung's part of a check (only `identity` when the value is below the origin).
    /// `TWO`: the fits use two parameters.
    #[inline(always)]
    fn step_every_rung<const TWO: bool>(
        &mut self,
        config: &LadderConfig<R>,
        pass: &mut RungPass<'_, R, P>,
        below_origin: bool,
    ) {
        self.step_rung::<TWO>(Rung::Identity, config, pass);
        if !below_origin {
            self.step_rung::<TWO>(Rung::Sqrt, config, pass);
            self.step_rung::<TWO>(Rung::Log, config, pass);
            self.step_rung::<TWO>(Rung::InvSqrt, config, pass);
            self.step_rung::<TWO>(Rung::Inverse, config, pass);
        }
    }

    /// One rung's part of a check: its transformed residual (when the check is being
    /// compared) and its fit update. `TWO`: the fit uses two parameters.
    #[inline(always)]
    fn step_rung<const TWO: bool>(
        &mut self,
        rung: Rung,
        config: &LadderConfig<R>,
        pass: &mut RungPass<'_, R, P>,
    ) {
        let state = &mut self.rungs[rung.index()];
        let rung_prediction = if TWO {
            state.fit.predict_two(pass.x)
        } else {
            state.fit.predict(pass.x)
        };
        let level = Self::scaled_level(config, rung_prediction);
        if pass.comparing {
            // Transformed residual against the a-priori prediction of this rung. A power
            // rung's prediction must be above the origin (a NaN or infinite transform is
            // caught by the finiteness probe over all five).
            let two = R::TWO;
            let g_fit = match rung {
                Rung::Identity => level - R::ONE,
                Rung::Sqrt => two * (level.sqrt() - R::ONE),
                Rung::Log => {
                    let log_level = level.ln();
                    pass.log_rung_log_level = Some(log_level);
                    log_level
                }
                Rung::InvSqrt => two * (R::ONE - R::ONE / level.sqrt()),
                Rung::Inverse => R::ONE - R::ONE / level,
            };
            // `log` and `inv_sqrt` of a level at or below zero are NaN or infinite, which
            // the probe catches; `sqrt` of zero and `inverse` of a negative level are
            // finite, so those two rungs check the sign.
            if matches!(rung, Rung::Sqrt | Rung::Inverse) {
                pass.predictions_positive &= level > R::ZERO;
            }
            pass.transformed[rung.index()] -= g_fit;
        }
        // During warm-up a rung's own prediction can be far off (even negative after two
        // checks), and a weight taken there would dominate the fit for thousands of checks;
        // the observed level is the safe start (iteratively reweighted least squares starts
        // the same way).
        let weight_level = if pass.comparing {
            level
        } else {
            pass.raw_level
        };
        // The floor is positive and finite (validated); a NaN level gets the floor.
        let floor = pass.level_floor;
        let relative_variance = rung.relative_variance(if weight_level > floor {
            weight_level
        } else {
            floor
        });
        // A refused update (a non-finite result, which is what a non-finite regressor or
        // raw value gives) leaves the rung as it was.
        let residual = pass.raw - rung_prediction;
        let _ = if TWO {
            state.fit.update_relative_variance_two(
                pass.x,
                residual,
                relative_variance,
                pass.forgetting,
            )
        } else {
            state
                .fit
                .update_relative_variance(pass.x, residual, relative_variance, pass.forgetting)
        };
    }

    fn decide(&mut self, config: &LadderConfig<R>) -> Option<Switch<R>> {
        let elapsed = core::mem::take(&mut self.since_decision);
        if self.recent_switches > R::ZERO {
            // Linear fading per comparison: `1 − (1 − β)·elapsed / SWITCH_MEMORIES`.
            let fade = R::ONE
                - (R::ONE - config.fit.forgetting)
                    * R::from_u32(elapsed)
                    * R::from_f64(1.0 / SWITCH_MEMORIES);
            self.recent_switches = (self.recent_switches * fade).max(R::ZERO);
        }
        let (best, lead) = self.leader()?;
        if self.held || best == self.active || !(lead >= self.required_lead(config, best)) {
            self.candidate = None;
            self.lead = 0;
            return None;
        }
        if self.candidate == Some(best) {
            self.lead = self.lead.saturating_add(elapsed);
        } else {
            self.candidate = Some(best);
            self.lead = elapsed;
        }
        if self.lead < config.switch_hold {
            return None;
        }
        let from = self.active;
        let required = self.required_lead(config, best);
        let held = self.lead;
        self.active = best;
        self.candidate = None;
        self.lead = 0;
        self.left = Some(from);
        self.recent_switches += R::ONE;
        Some(Switch {
            from,
            to: best,
            gain: lead,
            required,
            held,
        })
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real, const P: usize] PowerLadder<R, P> {
    rungs, log_level_sum, sample_weight, active, candidate, lead, checks, since_decision,
    recent_switches, left, held,
});
crate::wire::walk_struct!(impl[R: Real, const P: usize] RungState<R, P> { fit, transformed_sse });

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn config(level_scale: f64) -> LadderConfig<f64> {
        LadderConfig {
            fit: FitConfig {
                forgetting: 0.999,
                initial_variance: 1e6,
            },
            level_origin: 0.0,
            level_scale,
            inverse_level_scale: 1.0 / level_scale,
            log_level_scale: level_scale.ln(),
            level_floor: 0.01,
            warm_up: 5,
            switch_margin: 2.0,
            switch_hold: 16,
            decide_every: 8,
        }
    }

    #[test]
    fn a_ladder_has_at_least_offset_and_gain() {
        let ladder = PowerLadder::<f64, 3>::new(1, &config(1.0), Rung::Identity);
        assert!(Rung::ALL.iter().all(|&rung| ladder.fit(rung).dim() == 2));
        let ladder = PowerLadder::<f64, 3>::new(5, &config(1.0), Rung::Identity);
        assert!(Rung::ALL.iter().all(|&rung| ladder.fit(rung).dim() == 3));
    }

    proptest! {
        /// The normalized-RSS comparison picks the same leader, with the same lead, as
        /// comparing the profile log-likelihoods rung by rung.
        #[test]
        fn leader_matches_the_log_likelihoods(
            exponent in 0.0f64..2.0,
            level_scale in prop::sample::select(&[0.05, 1.0, 40.0][..]),
            seed in 0u64..1000,
        ) {
            let config = config(level_scale);
            let mut ladder = PowerLadder::<f64, 2>::new(2, &config, Rung::Identity);
            let mut state = seed.wrapping_mul(6364136223846793005).wrapping_add(1);
            for i in 0..300 {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                let noise = ((state >> 11) as f64 / (1u64 << 53) as f64) - 0.5;
                let reference = 1.0 + (i % 50) as f64 * 2.0;
                let raw = 0.5 + 1.1 * reference + 0.2 * noise * reference.powf(exponent);
                ladder.update(&config, &[1.0, reference], raw);
            }
            let likelihoods = ladder.log_likelihoods().unwrap();
            let (best, best_likelihood) = PowerLadder::<f64, 2>::best_of(ladder.active, &likelihoods);
            let (leader, lead) = ladder.leader().unwrap();
            let direct = best_likelihood - likelihoods[ladder.active.index()];
            if leader == best {
                prop_assert!((lead - direct).abs() <= 1e-9 * (1.0 + direct.abs()), "{lead} {direct}");
            } else {
                // Only a near tie may be resolved the other way by rounding.
                let gap = likelihoods[best.index()] - likelihoods[leader.index()];
                prop_assert!(gap.abs() <= 1e-9 * (1.0 + best_likelihood.abs()), "{gap}");
            }
        }
    }
}

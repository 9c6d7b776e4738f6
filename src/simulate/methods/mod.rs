//! The estimation methods and their registry: the names a scenario may ask for, the rule that picks
//! one (brute force within the step budget, else forward flux sampling), the rare-event methods'
//! runs and how each result fills the session's record.
//!
//! Brute force (first-passage ensembles with records, shards and resume) runs in the lanes of
//! [`super::engine`]; every other method is a module here with a `run_for(&Context)` that makes
//! its own set-up (interfaces, windows, budgets) and a result with a [`RareSummary`]. Adding one
//! touches this file (a variant in each enum below; the compiler lists the matches to extend) and
//! its own module.

pub mod ffs;
pub mod flux;

use super::{Dynamics, Plan, REFUSE_FACTOR, SimError, key_err};
use crate::system::System;
use crate::theory::TheoryReport;
use serde::{Deserialize, Serialize};
use std::sync::atomic::AtomicBool;

/// The estimation method asked for (`simulation.method`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum MethodRequest {
    /// brute force within the step budget, else forward flux sampling
    Auto,
    /// an ensemble of first passages
    BruteForce,
    /// forward flux sampling
    Ffs,
    /// reactive flux from the barrier top
    ReactiveFlux,
}

/// The simulation method that runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// plain escape ensembles
    BruteForce,
    /// forward flux sampling
    Ffs,
    /// Bennett–Chandler reactive flux
    ReactiveFlux,
}

impl Method {
    /// The name as in scenario files.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::BruteForce => "brute-force",
            Self::Ffs => "ffs",
            Self::ReactiveFlux => "reactive-flux",
        }
    }
}

/// The brute-force cost a choice weighs: expected steps, the budget, and the sentence that
/// explains both.
pub(crate) struct Cost {
    pub steps: f64,
    pub budget: f64,
    pub text: String,
}

/// The method for `request` and why: an explicit request is checked against what it needs; `auto`
/// (or none) takes brute force within the budget and forward flux sampling beyond it.
///
/// # Errors
/// Brute force more than [`REFUSE_FACTOR`] × over the budget, or reactive flux without inertia.
pub(crate) fn choose(
    request: Option<MethodRequest>,
    dynamics: Dynamics,
    cost: &Cost,
) -> Result<(Method, String), SimError> {
    let text = &cost.text;
    Ok(match request {
        Some(MethodRequest::BruteForce) => {
            if cost.steps > REFUSE_FACTOR * cost.budget {
                return Err(key_err(
                    "simulation.method",
                    format!(
                        "brute force refused: {text}, more than {REFUSE_FACTOR}x over; use simulation.method = \"ffs\" (forward flux sampling) or raise budget_steps"
                    ),
                ));
            }
            (Method::BruteForce, "requested".to_string())
        }
        Some(MethodRequest::Ffs) => (Method::Ffs, "requested".to_string()),
        Some(MethodRequest::ReactiveFlux) => {
            if dynamics != Dynamics::Underdamped {
                return Err(key_err(
                    "simulation.method",
                    "reactive flux needs underdamped dynamics (a mass and a friction)",
                ));
            }
            (Method::ReactiveFlux, "requested".to_string())
        }
        None | Some(MethodRequest::Auto) => {
            if cost.steps <= cost.budget {
                (Method::BruteForce, format!("auto: {text}"))
            } else {
                (
                    Method::Ffs,
                    format!("auto: {text}; forward flux sampling instead"),
                )
            }
        }
    })
}

/// What a rare-event method's run needs.
pub struct Context<'a> {
    /// the validated plan
    pub plan: &'a Plan,
    /// the physical system
    pub system: &'a System,
    /// its analysis (landscape, theory rates)
    pub theory: &'a TheoryReport,
    /// set to stop the run (it then returns [`SimError::Interrupted`])
    pub stop: &'a AtomicBool,
}

/// The part of a rare-event result the session's record shows for every method.
#[derive(Debug, Clone)]
pub struct RareSummary {
    /// trajectories (or trials) run
    pub trajectories: u64,
    /// the rate, per time unit
    pub rate: f64,
    /// its 95% interval
    pub rate_ci95: [f64; 2],
    /// how the interval was made
    pub rate_ci_method: &'static str,
    /// steps spent
    pub total_steps: u64,
    /// warnings about the estimate
    pub warnings: Vec<String>,
}

/// A rare-event estimate.
#[derive(Debug, Clone)]
pub enum RareResult {
    /// forward flux sampling
    Ffs(ffs::FfsResult),
    /// reactive flux
    Flux(flux::FluxResult),
}

/// Each method's own result in the record (JSON: one key per method, null unless it ran).
#[derive(Debug, Clone, Default, Serialize)]
pub struct MethodDetails {
    /// forward-flux details
    pub ffs: Option<ffs::FfsResult>,
    /// reactive-flux details
    pub reactive_flux: Option<flux::FluxResult>,
}

impl RareResult {
    /// The common part of the result.
    pub fn summary(&self) -> RareSummary {
        match self {
            Self::Ffs(r) => r.summary(),
            Self::Flux(r) => r.summary(),
        }
    }

    /// Moves the method's own result into its place in the record.
    pub fn store(self, d: &mut MethodDetails) {
        match self {
            Self::Ffs(r) => d.ffs = Some(r),
            Self::Flux(r) => d.reactive_flux = Some(r),
        }
    }
}

/// Runs the plan's rare-event method.
///
/// # Errors
/// The method's set-up errors, or an interruption.
pub(crate) fn run(ctx: &Context<'_>) -> Result<RareResult, SimError> {
    match ctx.plan.method {
        Method::Ffs => ffs::run_for(ctx).map(RareResult::Ffs),
        Method::ReactiveFlux => flux::run_for(ctx).map(RareResult::Flux),
        Method::BruteForce => Err(key_err(
            "simulation.method",
            "brute force runs through run_ensemble",
        )),
    }
}

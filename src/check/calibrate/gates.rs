//! The gates behind a calibration's verdict. Each default and the reason for it is in
//! docs/calibration.md ("Gates"); each can be overridden in the plan's `[limits]`. A
//! gate that shows the magnetometer (or its mounting) wrong fails the calibration; one
//! that shows the data cannot support the fit makes it inconclusive.

use nalgebra::Matrix3;

use super::{CalibrationResult, Method};
use crate::check::outcome::{Gate, GateRole};
use crate::log::plan::GateLimits;

/// Smallest tumble coverage (a hemisphere gives 0.5).
pub const COVERAGE_MIN: f64 = 0.6;
/// Smallest singular value of W.
pub const SOFT_IRON_MIN: f64 = 0.7;
/// Largest singular value of W.
pub const SOFT_IRON_MAX: f64 = 1.4;
/// Largest residual RMS as a share of the reference magnitude.
pub const RESIDUAL_MAX_FRACTION: f64 = 0.05;
/// Smallest share of the unflagged samples the fit uses.
pub const SAMPLES_USED_MIN: f64 = 0.9;
/// Largest share of a tumble's rows with a rod on or settling.
pub const RODS_ON_SHARE_MAX: f64 = 0.5;
/// Largest singular-value ratio of a cage's applied fields.
pub const APPLIED_FIELD_CONDITION_MAX: f64 = 100.0;
/// Largest cage misalignment against the plan's mounting, deg.
pub const ALIGNMENT_MAX_DEG: f64 = 3.0;
/// |hard iron| limit when there is no reference magnitude, nT: the strongest
/// geomagnetic field at the surface is about 66 000 nT (IGRF); 70 000 nT rounds it up.
pub const HARD_IRON_MAX_UNANCHORED_NT: f64 = 70_000.0;

/// What the gates need that the result does not hold.
#[derive(Debug, Clone, Copy)]
pub(super) struct GateFacts {
    /// Samples offered to the fit (after saturated and rod-on rows were left out).
    pub samples_offered: usize,
    /// Share of rows with a rod on or settling (0 without command columns).
    pub rods_on_share: f64,
    /// Singular-value ratio of the applied fields (cage only).
    pub design_condition: Option<f64>,
    /// Whether the plan gives both the cage mounting and the sensor mounting.
    pub alignment_known: bool,
}

/// Every gate of a calibration, in a fixed order.
pub(super) fn calibration_gates(
    r: &CalibrationResult,
    facts: &GateFacts,
    limits: &GateLimits,
    plan_residual_nt: Option<f64>,
) -> Vec<Gate> {
    let converged = if r.converged { 1.0 } else { 0.0 };
    let mut gates = vec![Gate::at_least("converged", converged, 1.0, GateRole::Data)];
    if r.method == Method::Tumble {
        gates.push(Gate::at_least(
            "coverage",
            r.coverage,
            limits.coverage_min.unwrap_or(COVERAGE_MIN),
            GateRole::Data,
        ));
    }
    let h = r.hard_iron_nt;
    let h_norm = (h[0] * h[0] + h[1] * h[1] + h[2] * h[2]).sqrt();
    let h_max = limits
        .hard_iron_max_nt
        .or(r.reference_nt)
        .unwrap_or(HARD_IRON_MAX_UNANCHORED_NT);
    gates.push(Gate::at_most(
        "hard_iron_magnitude",
        h_norm,
        h_max,
        GateRole::Article,
    ));
    gates.push(soft_iron_gate(r, limits));
    if let Some(reference) = r
        .reference_nt
        .or(r.cage.as_ref().map(|c| c.applied_mean_nt))
    {
        let fraction = limits
            .residual_max_fraction
            .unwrap_or(RESIDUAL_MAX_FRACTION);
        gates.push(Gate::at_most(
            "residual",
            r.residual_rms_nt,
            fraction * reference,
            GateRole::Article,
        ));
    }
    if let Some(l) = plan_residual_nt {
        gates.push(Gate::at_most(
            "residual_limit",
            r.residual_rms_nt,
            l,
            GateRole::Article,
        ));
    }
    let used_share = r.samples_used as f64 / facts.samples_offered.max(1) as f64;
    gates.push(Gate::at_least(
        "samples_used",
        used_share,
        limits.samples_used_min.unwrap_or(SAMPLES_USED_MIN),
        GateRole::Data,
    ));
    if facts.rods_on_share > 0.0 {
        gates.push(Gate::at_most(
            "rods_on_share",
            facts.rods_on_share,
            limits.rods_on_share_max.unwrap_or(RODS_ON_SHARE_MAX),
            GateRole::Data,
        ));
    }
    gates.extend(cage_gates(r, facts, limits));
    gates
}

/// W's singular values (its eigenvalues for a tumble's symmetric W) within the band:
/// the value shown is the one farthest outside it (by ratio), against the bound on its
/// side.
fn soft_iron_gate(r: &CalibrationResult, limits: &GateLimits) -> Gate {
    let lo = limits.soft_iron_min.unwrap_or(SOFT_IRON_MIN);
    let hi = limits.soft_iron_max.unwrap_or(SOFT_IRON_MAX);
    let w = Matrix3::from_fn(|i, j| r.soft_iron[i][j]);
    let sv = w.singular_values();
    let (smin, smax) = (sv.min(), sv.max());
    let name = "soft_iron_eigenvalues";
    let mut gate = if (lo / smin).ln() > (smax / hi).ln() {
        Gate::at_least(name, smin, lo, GateRole::Article)
    } else {
        Gate::at_most(name, smax, hi, GateRole::Article)
    };
    gate.ok = smin >= lo && smax <= hi;
    gate
}

/// The cage's own gates: the applied-field design, the handedness and the alignment.
fn cage_gates(r: &CalibrationResult, facts: &GateFacts, limits: &GateLimits) -> Vec<Gate> {
    let Some(c) = &r.cage else {
        return Vec::new();
    };
    let mut gates = Vec::new();
    if let Some(cond) = facts.design_condition {
        gates.push(Gate::at_most(
            "design_condition",
            cond,
            limits
                .design_condition_max
                .unwrap_or(APPLIED_FIELD_CONDITION_MAX),
            GateRole::Data,
        ));
    }
    let det = Matrix3::from_fn(|i, j| c.response[i][j]).determinant();
    gates.push(Gate::above("handedness", det, 0.0, GateRole::Article));
    if facts.alignment_known {
        gates.push(Gate::at_most(
            "alignment",
            c.misalignment_deg,
            limits.alignment_max_deg.unwrap_or(ALIGNMENT_MAX_DEG),
            GateRole::Article,
        ));
    }
    gates
}

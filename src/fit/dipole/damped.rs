//! A damped Gauss–Newton (Levenberg–Marquardt) solver on argmin's [`Solver`] trait, for
//! the dipole fit with a free position (argmin 0.11 has Gauss–Newton but no damping).
//! Method: Levenberg (1944), Marquardt (1963), with Marquardt's diagonal scaling.

use argmin::core::{
    Error as ArgminError, IterState, Jacobian, Operator, Problem, Solver, TerminationReason,
    TerminationStatus, KV,
};
use nalgebra::{DMatrix, DVector};

/// State the damped solver runs on (argmin's `IterState`, cost = residual sum of squares).
pub type LmState = IterState<DVector<f64>, (), DMatrix<f64>, (), DVector<f64>, f64>;

/// Levenberg–Marquardt on argmin's [`Solver`] trait: each iteration solves
/// `(JᵀJ + λ diag(JᵀJ)) δ = −Jᵀr`, accepts the step when the sum of squares falls
/// (λ ÷ 3) and otherwise raises λ (× 4) and tries again. Converged when the relative fall
/// of the sum of squares and the relative step both drop below `tolerance`.
#[derive(Debug, Clone)]
pub struct LevenbergMarquardt {
    lambda: f64,
    tolerance: f64,
    converged: bool,
}

impl LevenbergMarquardt {
    /// A solver with initial damping 1e-3 and tolerance 1e-10.
    pub fn new() -> Self {
        Self {
            lambda: 1e-3,
            tolerance: 1e-10,
            converged: false,
        }
    }

    /// Set the convergence tolerance (positive, finite).
    pub fn with_tolerance(mut self, tolerance: f64) -> Result<Self, ArgminError> {
        if !(tolerance.is_finite() && tolerance > 0.0) {
            return Err(ArgminError::msg("tolerance must be positive and finite"));
        }
        self.tolerance = tolerance;
        Ok(self)
    }
}

impl Default for LevenbergMarquardt {
    fn default() -> Self {
        Self::new()
    }
}

impl<O> Solver<O, LmState> for LevenbergMarquardt
where
    O: Operator<Param = DVector<f64>, Output = DVector<f64>>
        + Jacobian<Param = DVector<f64>, Jacobian = DMatrix<f64>>,
{
    fn name(&self) -> &str {
        "Levenberg-Marquardt (magproof)"
    }

    fn init(
        &mut self,
        problem: &mut Problem<O>,
        state: LmState,
    ) -> Result<(LmState, Option<KV>), ArgminError> {
        let mut state = state;
        let p = state
            .take_param()
            .ok_or_else(|| ArgminError::msg("Levenberg-Marquardt needs an initial parameter"))?;
        let r = problem.apply(&p)?;
        let cost = r.norm_squared();
        Ok((state.param(p).residuals(r).cost(cost), None))
    }

    fn next_iter(
        &mut self,
        problem: &mut Problem<O>,
        state: LmState,
    ) -> Result<(LmState, Option<KV>), ArgminError> {
        let mut state = state;
        let p = state
            .take_param()
            .ok_or_else(|| ArgminError::msg("parameter not set"))?;
        let r = state
            .take_residuals()
            .ok_or_else(|| ArgminError::msg("residuals not set"))?;
        let cost = r.norm_squared();
        let j = problem.jacobian(&p)?;
        let jtj = j.transpose() * &j;
        let jtr = j.transpose() * &r;
        for _ in 0..40 {
            let mut a = jtj.clone();
            for k in 0..a.nrows() {
                a[(k, k)] += self.lambda * jtj[(k, k)].max(1e-300);
            }
            let Some(step) = a.cholesky().map(|c| c.solve(&(-&jtr))) else {
                self.lambda *= 4.0;
                continue;
            };
            let trial = &p + &step;
            let r_new = match problem.apply(&trial) {
                Ok(r) if r.iter().all(|v| v.is_finite()) => r,
                _ => {
                    self.lambda *= 4.0;
                    continue;
                }
            };
            let new_cost = r_new.norm_squared();
            if new_cost <= cost {
                let fall = (cost - new_cost) / cost.max(f64::MIN_POSITIVE);
                let rel_step = step.norm() / (p.norm() + 1e-12);
                self.converged = fall < self.tolerance && rel_step < self.tolerance.sqrt();
                self.lambda = (self.lambda / 3.0).max(1e-12);
                return Ok((state.param(trial).residuals(r_new).cost(new_cost), None));
            }
            self.lambda *= 4.0;
        }
        // No damping gives a fall: the parameters sit at a minimum to machine precision.
        self.converged = true;
        Ok((state.param(p).residuals(r).cost(cost), None))
    }

    fn terminate(&mut self, _state: &LmState) -> TerminationStatus {
        if self.converged {
            TerminationStatus::Terminated(TerminationReason::SolverConverged)
        } else {
            TerminationStatus::NotTerminated
        }
    }
}

//! A damped least-squares solver (Levenberg–Marquardt) written as an argmin [`Solver`].
//!
//! argmin 0.11 offers Gauss–Newton but no Levenberg–Marquardt, so this is our own, on
//! argmin's `Solver` trait and `IterState`. Method: Levenberg (1944), Marquardt (1963):
//! each step solves `(JᵀJ + λ·diag(JᵀJ)) δ = −Jᵀr`; λ falls tenfold after a step that
//! lowers the cost and rises tenfold after one that does not (Marquardt's diagonal
//! scaling makes the damping independent of parameter units).
//!
//! Problems do not hand over a Jacobian: they hand over the normal equations
//! ([`NormalEquations`]: JᵀJ, Jᵀr and Σr²), which a problem with a million residuals
//! can accumulate in one pass without ever building the N×p Jacobian. Problems that do
//! build a dense Jacobian through argmin's `Operator` + `Jacobian` traits are adapted
//! by [`DenseProblem`].
//!
//! Convergence is judged statistically where possible: the solve stops when the
//! Gauss–Newton step still available would move the parameters by less than 1e-4 of
//! their standard error (Newton decrement `−Jᵀr·δ_GN < 1e-8 · Σr²/(n − p)`), or when a
//! step lowers the cost by less than a relative 1e-12, or the step is negligible.
//!
//! The cost is Σ rᵢ² (not ½Σ rᵢ²). The termination reason is always read by
//! [`solve`]: only [`LmTermination::Converged`] is a clean finish; the caller turns the
//! others into warnings.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use argmin::core::{
    Error as ArgminError, Executor, IterState, Jacobian, Operator, Problem, Solver, State,
    TerminationReason, TerminationStatus, KV,
};
use nalgebra::{DMatrix, DVector};

use super::FitError;

/// Normal equations of a least-squares problem at one parameter vector.
#[derive(Debug, Clone)]
pub struct NormalEquations {
    /// JᵀJ (p×p).
    pub jtj: DMatrix<f64>,
    /// Jᵀr (p).
    pub jtr: DVector<f64>,
    /// Σ rᵢ², in the residual's unit squared.
    pub sum_sq: f64,
    /// Number of residuals that entered the sums (for the noise estimate Σr²/(n − p)).
    pub residual_count: usize,
}

/// A least-squares problem as the solver sees it.
pub trait LeastSquaresProblem {
    /// Σ rᵢ² at `p`.
    fn sum_sq(&self, p: &DVector<f64>) -> Result<f64, ArgminError>;
    /// JᵀJ, Jᵀr and Σ rᵢ² at `p`.
    fn normal_equations(&self, p: &DVector<f64>) -> Result<NormalEquations, ArgminError>;
}

/// Adapter for a problem that implements argmin's `Operator` (parameters → residuals)
/// and `Jacobian` with `DVector<f64>` / `DMatrix<f64>`.
#[derive(Debug, Clone)]
pub struct DenseProblem<P>(pub P);

impl<P> LeastSquaresProblem for DenseProblem<P>
where
    P: Operator<Param = DVector<f64>, Output = DVector<f64>>
        + Jacobian<Param = DVector<f64>, Jacobian = DMatrix<f64>>,
{
    fn sum_sq(&self, p: &DVector<f64>) -> Result<f64, ArgminError> {
        Ok(self.0.apply(p)?.norm_squared())
    }

    fn normal_equations(&self, p: &DVector<f64>) -> Result<NormalEquations, ArgminError> {
        let r = self.0.apply(p)?;
        let j = self.0.jacobian(p)?;
        Ok(NormalEquations {
            jtj: j.tr_mul(&j),
            jtr: j.tr_mul(&r),
            sum_sq: r.norm_squared(),
            residual_count: r.len(),
        })
    }
}

/// The state the solver runs on.
pub type LmState = IterState<DVector<f64>, (), (), (), (), f64>;

/// Levenberg–Marquardt settings and working data.
#[derive(Debug, Clone)]
pub struct LevenbergMarquardt {
    lambda: f64,
    ftol: f64,
    xtol: f64,
    decrement_tol: f64,
    cached: Option<NormalEquations>,
}

impl Default for LevenbergMarquardt {
    fn default() -> Self {
        LevenbergMarquardt {
            lambda: 1e-3,
            ftol: 1e-12,
            xtol: 1e-12,
            decrement_tol: 1e-8,
            cached: None,
        }
    }
}

impl LevenbergMarquardt {
    /// Solver with the default tolerances (relative cost change 1e-12, relative step
    /// 1e-12, Newton decrement 1e-8 of the noise variance) and initial damping 1e-3.
    pub fn new() -> Self {
        Self::default()
    }

    /// Set the relative cost-decrease tolerance (must be positive and finite).
    pub fn with_ftol(mut self, ftol: f64) -> Result<Self, FitError> {
        if !(ftol.is_finite() && ftol > 0.0) {
            return Err(FitError::Solver(format!(
                "ftol must be positive, got {ftol}"
            )));
        }
        self.ftol = ftol;
        Ok(self)
    }
}

const MAX_TRIES: usize = 40;

impl<O: LeastSquaresProblem> Solver<O, LmState> for LevenbergMarquardt {
    fn name(&self) -> &str {
        "Levenberg-Marquardt (magproof)"
    }

    fn init(
        &mut self,
        problem: &mut Problem<O>,
        state: LmState,
    ) -> Result<(LmState, Option<KV>), ArgminError> {
        let p = state
            .get_param()
            .ok_or_else(|| {
                argmin::argmin_error_closure!(NotInitialized, "no initial parameters")()
            })?
            .clone();
        let ne = problem.problem("normal_equations", |o| o.normal_equations(&p))?;
        let cost = ne.sum_sq;
        self.cached = Some(ne);
        Ok((state.cost(cost), None))
    }

    /// One iteration: stop at once when the Gauss–Newton step left is negligible,
    /// else try damped steps until one lowers the cost.
    fn next_iter(
        &mut self,
        problem: &mut Problem<O>,
        mut state: LmState,
    ) -> Result<(LmState, Option<KV>), ArgminError> {
        let p = state
            .take_param()
            .ok_or_else(|| argmin::argmin_error_closure!(NotInitialized, "no parameters")())?;
        let ne = match self.cached.take() {
            Some(ne) => ne,
            None => problem.problem("normal_equations", |o| o.normal_equations(&p))?,
        };
        let cost = ne.sum_sq;
        if self.small_decrement(&ne, p.len()) || cost == 0.0 {
            return Ok((converged(state, p, cost), None));
        }
        Ok(match self.damped_step(problem, &ne, &p)? {
            Step::Lowered {
                p_new,
                cost_new,
                converged: true,
            } => (converged(state, p_new, cost_new), None),
            Step::Lowered {
                p_new, cost_new, ..
            } => (state.param(p_new).cost(cost_new), None),
            Step::AtMinimum => (converged(state, p, cost), None),
            Step::DampingExhausted => {
                self.cached = Some(ne);
                let why = "damping reached its limit without lowering the cost";
                let st = state.param(p).cost(cost);
                (
                    st.terminate_with(TerminationReason::SolverExit(why.into())),
                    None,
                )
            }
        })
    }
}

/// What the damped steps of one iteration came to.
enum Step {
    /// A step lowered the cost to `cost_new` at `p_new`; `converged` when the decrease
    /// or the step was negligible.
    Lowered {
        p_new: DVector<f64>,
        cost_new: f64,
        converged: bool,
    },
    /// No decrease within rounding at a negligible step: the parameters are a minimum.
    AtMinimum,
    /// The damping rose [`MAX_TRIES`] times without a lower cost.
    DampingExhausted,
}

/// The state at `p` with cost `cost`, terminated as converged.
fn converged(state: LmState, p: DVector<f64>, cost: f64) -> LmState {
    state
        .param(p)
        .cost(cost)
        .terminate_with(TerminationReason::SolverConverged)
}

impl LevenbergMarquardt {
    /// Whether the Newton decrement (the cost decrease a full Gauss–Newton step would
    /// bring) is below `decrement_tol` times the noise variance Σr²/(n − p), for `np`
    /// parameters.
    fn small_decrement(&self, ne: &NormalEquations, np: usize) -> bool {
        let dof = ne.residual_count.saturating_sub(np).max(1) as f64;
        let decrement = ne
            .jtj
            .clone()
            .cholesky()
            .map(|ch| -ne.jtr.dot(&ch.solve(&(-&ne.jtr))))
            .map(f64::abs);
        decrement.is_some_and(|d| d <= self.decrement_tol * ne.sum_sq / dof)
    }

    /// Solve `(JᵀJ + λ·diag(JᵀJ)) δ = −Jᵀr` and try `p + δ`, raising λ tenfold until the
    /// cost falls (then λ falls tenfold), the step becomes negligible, or the tries run out.
    fn damped_step<O: LeastSquaresProblem>(
        &mut self,
        problem: &mut Problem<O>,
        ne: &NormalEquations,
        p: &DVector<f64>,
    ) -> Result<Step, ArgminError> {
        let (np, cost) = (p.len(), ne.sum_sq);
        let dmax = ne.jtj.diagonal().max();
        let step_floor = self.xtol * (p.norm() + self.xtol);
        for _ in 0..MAX_TRIES {
            let mut a = ne.jtj.clone();
            for i in 0..np {
                a[(i, i)] += self.lambda * ne.jtj[(i, i)].max(1e-12 * dmax);
            }
            let Some(chol) = a.cholesky() else {
                self.lambda *= 10.0;
                continue;
            };
            let delta = -chol.solve(&ne.jtr);
            let p_new = p + &delta;
            let c_new = problem.problem("sum_sq", |o| o.sum_sq(&p_new))?;
            let small_step = delta.norm() <= step_floor;
            if c_new.is_finite() && c_new < cost {
                self.lambda = (self.lambda / 10.0).max(1e-12);
                return Ok(Step::Lowered {
                    p_new,
                    cost_new: c_new,
                    converged: (cost - c_new) <= self.ftol * cost || small_step,
                });
            }
            if small_step {
                return Ok(Step::AtMinimum);
            }
            self.lambda *= 10.0;
        }
        Ok(Step::DampingExhausted)
    }
}

/// How a solve ended.
#[derive(Debug, Clone, PartialEq)]
pub enum LmTermination {
    /// Converged (cost change, step or gradient below tolerance).
    Converged,
    /// The iteration limit was reached before convergence: the result may be inexact.
    MaxIterations(u64),
    /// The solver stopped for another reason, given as text.
    Stopped(String),
}

impl std::fmt::Display for LmTermination {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            LmTermination::Converged => write!(f, "converged"),
            LmTermination::MaxIterations(n) => {
                write!(f, "maximum number of iterations reached ({n})")
            }
            LmTermination::Stopped(why) => write!(f, "{why}"),
        }
    }
}

/// Outcome of [`solve`].
#[derive(Debug, Clone)]
pub struct LmOutcome<O> {
    /// Final parameters.
    pub param: DVector<f64>,
    /// Σ rᵢ² at `param`.
    pub sum_sq: f64,
    /// Iterations done.
    pub iterations: u64,
    /// Why it stopped.
    pub termination: LmTermination,
    /// The problem, handed back.
    pub problem: O,
}

/// Run Levenberg–Marquardt from `p0` for at most `max_iters` iterations.
pub fn solve<O: LeastSquaresProblem>(
    problem: O,
    p0: DVector<f64>,
    max_iters: u64,
) -> Result<LmOutcome<O>, FitError> {
    let res = Executor::new(problem, LevenbergMarquardt::new())
        .configure(|s| s.param(p0).max_iters(max_iters))
        .run()
        .map_err(|e| FitError::Solver(e.to_string()))?;
    let state = res.state();
    let termination = match state.get_termination_status() {
        TerminationStatus::Terminated(TerminationReason::SolverConverged) => {
            LmTermination::Converged
        }
        TerminationStatus::Terminated(TerminationReason::MaxItersReached) => {
            LmTermination::MaxIterations(state.get_iter())
        }
        TerminationStatus::Terminated(r) => LmTermination::Stopped(r.text().to_string()),
        TerminationStatus::NotTerminated => LmTermination::Stopped("not terminated".into()),
    };
    let iterations = state.get_iter();
    let sum_sq = state.get_best_cost();
    let param = state
        .get_best_param()
        .or(state.get_param())
        .cloned()
        .ok_or_else(|| FitError::Solver("no parameters after the solve".into()))?;
    let problem = res
        .problem
        .problem
        .ok_or_else(|| FitError::Solver("the problem was not handed back".into()))?;
    Ok(LmOutcome {
        param,
        sum_sq,
        iterations,
        termination,
        problem,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Exponential decay y = a·exp(−k t), a textbook nonlinear least-squares problem.
    struct Decay {
        t: Vec<f64>,
        y: Vec<f64>,
    }

    impl Operator for Decay {
        type Param = DVector<f64>;
        type Output = DVector<f64>;
        fn apply(&self, p: &DVector<f64>) -> Result<DVector<f64>, ArgminError> {
            Ok(DVector::from_iterator(
                self.t.len(),
                self.t
                    .iter()
                    .zip(&self.y)
                    .map(|(t, y)| p[0] * (-p[1] * t).exp() - y),
            ))
        }
    }

    impl Jacobian for Decay {
        type Param = DVector<f64>;
        type Jacobian = DMatrix<f64>;
        fn jacobian(&self, p: &DVector<f64>) -> Result<DMatrix<f64>, ArgminError> {
            let mut j = DMatrix::zeros(self.t.len(), 2);
            for (i, t) in self.t.iter().enumerate() {
                let e = (-p[1] * t).exp();
                j[(i, 0)] = e;
                j[(i, 1)] = -p[0] * t * e;
            }
            Ok(j)
        }
    }

    #[test]
    fn fits_exact_exponential_from_far_start() {
        let t: Vec<f64> = (0..20).map(|i| i as f64 * 0.25).collect();
        let y = t.iter().map(|t| 3.0 * (-0.7 * t).exp()).collect();
        let out = solve(
            DenseProblem(Decay { t, y }),
            DVector::from_vec(vec![1.0, 3.0]),
            200,
        )
        .unwrap();
        assert_eq!(out.termination, LmTermination::Converged);
        assert_relative_eq!(out.param[0], 3.0, epsilon = 1e-8);
        assert_relative_eq!(out.param[1], 0.7, epsilon = 1e-8);
    }

    #[test]
    fn iteration_limit_is_reported_not_hidden() {
        let t: Vec<f64> = (0..20).map(|i| i as f64 * 0.25).collect();
        let y = t.iter().map(|t| 3.0 * (-0.7 * t).exp()).collect();
        let out = solve(
            DenseProblem(Decay { t, y }),
            DVector::from_vec(vec![1.0, 3.0]),
            1,
        )
        .unwrap();
        assert_eq!(out.termination, LmTermination::MaxIterations(1));
    }
}

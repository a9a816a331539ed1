//! The integration methods. Each only attempts one step from the present point and states how its local
//! error is estimated; the driver in `mod.rs` owns acceptance, rejection and step sizes.
//!
//! Every implicit stage has the form alpha q(x) + i(x, t) = b(t) + r, where alpha and r come from the
//! method's formula; the derivative it implies, qdot = alpha q(x) - r, is what the next step uses.

use super::newton::NewtonFailure;
use crate::settings::MethodName;

/// The facts about a method that the driver and the reports rely on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MethodInfo {
    pub name: MethodName,
    /// Classical order of accuracy.
    pub order: u32,
    /// |C| in (numerical - exact) = C h^(p+1) y^(p+1) for fixed steps on y' = f(y).
    pub error_constant: f64,
    pub a_stable: bool,
    /// Damps infinitely stiff components completely in one step (|R(-inf)| = 0).
    pub l_stable: bool,
    /// How the local error is estimated.
    pub estimator: &'static str,
}

/// TR-BDF2's split point: the trapezoidal stage covers gamma h (Bank et al., IEEE Trans. Electron
/// Devices 32(10), 1985; Hosea & Shampine, Appl. Numer. Math. 20, 1996).
pub const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;
/// TR-BDF2 as a singly diagonally implicit Runge-Kutta method (Hosea & Shampine 1996): d = gamma / 2,
/// w = sqrt(2) / 4; stage 3 weights (w, w, d).
pub const TRBDF2_D: f64 = GAMMA / 2.0;
pub const TRBDF2_W: f64 = std::f64::consts::SQRT_2 / 4.0;
/// The embedded third-order weights of Hosea & Shampine (1996): ((1 - w)/3, (3w + 1)/3, d/3).
pub const TRBDF2_EMBEDDED: [f64; 3] = [
    (1.0 - TRBDF2_W) / 3.0,
    (3.0 * TRBDF2_W + 1.0) / 3.0,
    TRBDF2_D / 3.0,
];

/// The method table (orders and error constants: Hairer & Wanner, Solving ODEs I/II; TR-BDF2's constant
/// (3 gamma^2 - 4 gamma + 2) / (12 (2 - gamma)) from Bank et al. 1985).
pub const METHOD_TABLE: [MethodInfo; 4] = [
    MethodInfo {
        name: MethodName::BackwardEuler,
        order: 1,
        error_constant: 0.5,
        a_stable: true,
        l_stable: true,
        estimator: "second divided difference of the solution (step doubling after a breakpoint)",
    },
    MethodInfo {
        name: MethodName::Trapezoidal,
        order: 2,
        error_constant: 1.0 / 12.0,
        a_stable: true,
        l_stable: false,
        estimator: "third divided difference of the solution (step doubling after a breakpoint)",
    },
    MethodInfo {
        name: MethodName::Bdf2,
        order: 2,
        error_constant: 2.0 / 9.0,
        a_stable: true,
        l_stable: true,
        estimator: "third divided difference of the solution, variable-step error coefficient",
    },
    MethodInfo {
        name: MethodName::TrBdf2,
        order: 2,
        error_constant: (3.0 * GAMMA * GAMMA - 4.0 * GAMMA + 2.0) / (12.0 * (2.0 - GAMMA)),
        a_stable: true,
        l_stable: true,
        estimator: "embedded third-order companion (Hosea & Shampine 1996), filtered through the stage Jacobian",
    },
];

pub fn info(name: MethodName) -> &'static MethodInfo {
    METHOD_TABLE
        .iter()
        .find(|m| m.name == name)
        .expect("every method is in the table")
}

/// One accepted point of a method's own history.
#[derive(Debug, Clone)]
pub struct Point {
    pub t: f64,
    pub x: Vec<f64>,
    pub q: Vec<f64>,
    pub qdot: Vec<f64>,
}

/// The solution of one implicit stage.
#[derive(Debug, Clone)]
pub struct Solved {
    pub x: Vec<f64>,
    pub q: Vec<f64>,
    pub qdot: Vec<f64>,
}

/// What a method needs from the driver: its history and a way to solve one stage.
pub trait StageSolver {
    fn current(&self) -> &Point;
    fn previous(&self) -> Option<&Point>;
    /// Solves alpha q(x) + i(x, t) = b(t) + r (Newton from an extrapolation of the history; a linear
    /// circuit by one solve of its step matrix).
    fn solve(&mut self, alpha: f64, r: &[f64], t: f64) -> Result<Solved, NewtonFailure>;
    /// Solves J y = v in place with the Jacobian of the last stage solved.
    fn solve_with_last_jacobian(&mut self, v: &mut [f64]);
    /// A vector of the circuit's size to fill (what it holds is unspecified), recycled from earlier
    /// steps so that a step allocates nothing.
    fn buffer(&mut self) -> Vec<f64>;
    /// Gives back a vector no longer needed, for `buffer` to hand out again.
    fn recycle(&mut self, v: Vec<f64>);
    /// Gives back the vectors of a stage's solution.
    fn recycle_point(&mut self, p: Solved) {
        self.recycle(p.x);
        self.recycle(p.q);
        self.recycle(p.qdot);
    }
}

/// How a trial step's local error is to be estimated.
#[derive(Debug, Clone)]
pub enum Estimate {
    /// The method computed the error of each unknown itself.
    Embedded(Vec<f64>),
    /// error = coefficient * x^(order+1), the derivative estimated by the driver from divided differences.
    FromHistory { coefficient: f64 },
}

/// A step attempted but not yet accepted.
#[derive(Debug, Clone)]
pub struct Trial {
    pub point: Solved,
    pub estimate: Estimate,
    /// The formula actually used (BDF2 without a previous point takes a backward-Euler step).
    pub used: MethodName,
    pub order: u32,
}

/// A method attempts one step of size `h` from the solver's present point.
pub trait Method: Sync {
    fn name(&self) -> MethodName;
    fn attempt(&self, s: &mut dyn StageSolver, h: f64) -> Result<Trial, NewtonFailure>;
    /// Linear solves per step of a linear circuit (TR-BDF2: one per stage and one for its error
    /// estimate).
    fn solves_per_step(&self) -> f64 {
        1.0
    }
    /// The largest ratio of successive steps the formula tolerates (None: only the setting limits it).
    fn max_step_ratio(&self) -> Option<f64> {
        None
    }
}

/// `a x + b y`, written into `out` (a buffer of the solver's).
fn combine(mut out: Vec<f64>, a: f64, x: &[f64], b: f64, y: &[f64]) -> Vec<f64> {
    for ((o, p), q) in out.iter_mut().zip(x).zip(y) {
        *o = a * p + b * q;
    }
    out
}

pub struct BackwardEuler;
pub struct Trapezoidal;
pub struct Bdf2;
pub struct TrBdf2;

impl Method for BackwardEuler {
    fn name(&self) -> MethodName {
        MethodName::BackwardEuler
    }
    fn attempt(&self, s: &mut dyn StageSolver, h: f64) -> Result<Trial, NewtonFailure> {
        let t = s.current().t + h;
        let alpha = 1.0 / h;
        let mut r = s.buffer();
        for (r, q) in r.iter_mut().zip(&s.current().q) {
            *r = q / h;
        }
        let point = s.solve(alpha, &r, t)?;
        s.recycle(r);
        Ok(Trial {
            point,
            estimate: Estimate::FromHistory {
                coefficient: h * h / 2.0,
            },
            used: MethodName::BackwardEuler,
            order: 1,
        })
    }
}

impl Method for Trapezoidal {
    fn name(&self) -> MethodName {
        MethodName::Trapezoidal
    }
    fn attempt(&self, s: &mut dyn StageSolver, h: f64) -> Result<Trial, NewtonFailure> {
        let buf = s.buffer();
        let cur = s.current();
        let t = cur.t + h;
        let alpha = 2.0 / h;
        let r = combine(buf, alpha, &cur.q, 1.0, &cur.qdot);
        let point = s.solve(alpha, &r, t)?;
        s.recycle(r);
        Ok(Trial {
            point,
            estimate: Estimate::FromHistory {
                coefficient: h * h * h / 12.0,
            },
            used: MethodName::Trapezoidal,
            order: 2,
        })
    }
}

impl Method for Bdf2 {
    fn name(&self) -> MethodName {
        MethodName::Bdf2
    }
    /// Variable-step BDF2 is zero-stable for step ratios below 1 + sqrt(2) (Grigorieff 1983; Hairer,
    /// Norsett and Wanner, Solving ODEs I, III.5, from memory); 2 keeps a margin.
    fn max_step_ratio(&self) -> Option<f64> {
        Some(2.0)
    }
    fn attempt(&self, s: &mut dyn StageSolver, h: f64) -> Result<Trial, NewtonFailure> {
        let buf = s.buffer();
        let Some(prev) = s.previous() else {
            // BDF2 needs two points; its first step is BDF1, which is backward Euler.
            s.recycle(buf);
            return BackwardEuler.attempt(s, h);
        };
        let cur = s.current();
        let h1 = cur.t - prev.t;
        let w = h / h1;
        // Variable-step BDF2: q'(t+h) = [(1+2w)/(1+w) q_{n+1} - (1+w) q_n + w^2/(1+w) q_{n-1}] / h
        // (Hairer & Wanner, Solving ODEs II, III.5).
        let alpha = (1.0 + 2.0 * w) / ((1.0 + w) * h);
        let r = combine(
            buf,
            (1.0 + w) / h,
            &cur.q,
            -(w * w) / ((1.0 + w) * h),
            &prev.q,
        );
        let t = cur.t + h;
        let point = s.solve(alpha, &r, t)?;
        s.recycle(r);
        // Local error = x''' h^2 (h + h1)^2 / (6 (2h + h1)): the interpolation error of the derivative
        // divided by the leading coefficient alpha.
        let coefficient = h * h * (h + h1) * (h + h1) / (6.0 * (2.0 * h + h1));
        Ok(Trial {
            point,
            estimate: Estimate::FromHistory { coefficient },
            used: MethodName::Bdf2,
            order: 2,
        })
    }
}

impl Method for TrBdf2 {
    fn name(&self) -> MethodName {
        MethodName::TrBdf2
    }
    fn solves_per_step(&self) -> f64 {
        3.0
    }
    fn attempt(&self, s: &mut dyn StageSolver, h: f64) -> Result<Trial, NewtonFailure> {
        let (d, w) = (TRBDF2_D, TRBDF2_W);
        // Stage 1: the trapezoidal rule over gamma h.
        let a1 = 2.0 / (GAMMA * h);
        let buf = s.buffer();
        let cur = s.current();
        let t0 = cur.t;
        let r1 = combine(buf, a1, &cur.q, 1.0, &cur.qdot);
        let mid = s.solve(a1, &r1, t0 + GAMMA * h)?;
        // Stage 2: q_{n+1} = q_n + h (w qdot_n + w qdot_gamma + d qdot_{n+1}), the BDF2 stage.
        let a2 = 1.0 / (d * h);
        let mut r2 = r1;
        let cur = s.current();
        for (((r, q), f0), f1) in r2.iter_mut().zip(&cur.q).zip(&cur.qdot).zip(&mid.qdot) {
            *r = (q + h * w * (f0 + f1)) * a2;
        }
        let end = s.solve(a2, &r2, t0 + h)?;
        // Embedded estimate in charge units, then filtered through the stage Jacobian
        // (alpha2 C + G)^-1 alpha2 to bring it to the unknowns (common practice for stiff problems).
        let [e0, e1, e2] = TRBDF2_EMBEDDED;
        let mut est = r2;
        let cur = s.current();
        for (i, e) in est.iter_mut().enumerate() {
            *e =
                h * ((w - e0) * cur.qdot[i] + (w - e1) * mid.qdot[i] + (d - e2) * end.qdot[i]) * a2;
        }
        s.recycle_point(mid);
        s.solve_with_last_jacobian(&mut est);
        Ok(Trial {
            point: end,
            estimate: Estimate::Embedded(est),
            used: MethodName::TrBdf2,
            order: 2,
        })
    }
}

/// The method object for a name.
pub fn method(name: MethodName) -> &'static dyn Method {
    match name {
        MethodName::BackwardEuler => &BackwardEuler,
        MethodName::Trapezoidal => &Trapezoidal,
        MethodName::Bdf2 => &Bdf2,
        MethodName::TrBdf2 => &TrBdf2,
    }
}

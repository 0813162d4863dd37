//! Flight dynamics of the ball in air: one model for the drag fit and the renderer.
//!
//! Goes in: a [`State`] (x, y, vx, vy; metres and m/s, y up), gravity g (m/s^2), a quadratic drag
//! coefficient D (per metre) and a time step. Comes out: the state after the step, or after any
//! time by equal sub-steps. The equations of motion are a = (0, -g) - D |v| v (quadratic drag
//! along the velocity); they are integrated by the classical fourth-order Runge-Kutta method
//! (RK4, Kutta 1901).
//!
//! Used by the drag fit ([`super::flight`]) and by the renderer's flight simulation; the renderer
//! may use physics, physics never uses the renderer.

/// Ball state (x, y, vx, vy): metres and m/s, x right, y up.
pub type State = [f64; 4];

/// How the speed |v| in the drag term is evaluated. The two forms can differ in the last bit;
/// each caller keeps its own so that its results stay the same bit for bit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpeedNorm {
    /// `vx.hypot(vy)` (the drag fit).
    Hypot,
    /// `(vx * vx + vy * vy).sqrt()` (the renderer).
    SquareRoot,
}

/// Gravity plus quadratic drag: a = (0, -g) - D |v| v.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QuadraticDrag {
    /// Gravity g, m/s^2.
    pub gravity_mps2: f64,
    /// Drag coefficient D, per metre.
    pub drag_per_m: f64,
    /// How |v| is evaluated.
    pub speed: SpeedNorm,
}

impl QuadraticDrag {
    /// Acceleration at velocity `v`, m/s^2.
    pub fn accel(&self, v: [f64; 2]) -> [f64; 2] {
        let (g, d) = (self.gravity_mps2, self.drag_per_m);
        let s = match self.speed {
            SpeedNorm::Hypot => v[0].hypot(v[1]),
            SpeedNorm::SquareRoot => (v[0] * v[0] + v[1] * v[1]).sqrt(),
        };
        [-d * s * v[0], -g - d * s * v[1]]
    }

    /// Time derivative of the state: (vx, vy, ax, ay).
    pub fn derivative(&self, s: State) -> State {
        let a = self.accel([s[2], s[3]]);
        [s[2], s[3], a[0], a[1]]
    }

    /// One RK4 step of `h` seconds (either sign).
    pub fn step(&self, s: State, h: f64) -> State {
        let add = |s: State, k: State, c: f64| {
            [
                s[0] + c * k[0],
                s[1] + c * k[1],
                s[2] + c * k[2],
                s[3] + c * k[3],
            ]
        };
        let k1 = self.derivative(s);
        let k2 = self.derivative(add(s, k1, h / 2.0));
        let k3 = self.derivative(add(s, k2, h / 2.0));
        let k4 = self.derivative(add(s, k3, h));
        let mut out = s;
        for i in 0..4 {
            out[i] += h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
        }
        out
    }

    /// Integrate by `dt` seconds (either sign) in equal RK4 steps of at most `max_step_s`.
    pub fn advance(&self, mut s: State, dt: f64, max_step_s: f64) -> State {
        let n = (dt.abs() / max_step_s).ceil().max(1.0) as usize;
        let h = dt / n as f64;
        for _ in 0..n {
            s = self.step(s, h);
        }
        s
    }
}

//! Motion of the ball from release to the last flash: rolling without slipping down the incline,
//! free flight (exact parabola in vacuum, RK4 with quadratic drag from the shared model in
//! [`crate::physics::dynamics`]), bounces on the floor with a normal restitution that may depend
//! on impact speed and a tangential ratio, then rolling along the floor once the rebounds die
//! out.
//!
//! Goes in: a [`Scene`]. Comes out: a [`Motion`] that gives the ball's centre at any time, with the
//! bounce and launch events. Rolling without slipping on an incline of angle theta with a rolling
//! resistance c: a = g (sin theta - c cos theta) / (1 + k) (standard rigid-body mechanics).
//!
//! Spin (about the axis toward the camera, counter-clockwise positive as seen in the photo): on
//! the incline omega r = (1 - slip) v (rolling without slipping at slip 0); constant in flight
//! (no aerodynamic torque); at a bounce the angular momentum about the contact point is conserved
//! (the normal and friction impulses both act through it), so with I = k m r^2 the spin after is
//! omega_out = omega_in + (vx_out - vx_in) / (k r) for the horizontal velocity change the floor's
//! tangential ratio sets (rigid-body impact mechanics: R. Garwin, "Kinematics of an ultraelastic
//! rough ball", Am. J. Phys. 37, 88 (1969), from memory); rolling along the floor, omega r = -vx.

use super::scene::Scene;
use crate::physics::dynamics::{QuadraticDrag, SpeedNorm};
use serde::{Deserialize, Serialize};

/// What the ball is doing at a moment.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Phase {
    /// Rolling down the incline.
    Incline,
    /// In free flight.
    Flight,
    /// Rolling along the floor after the rebounds died out.
    Floor,
}

/// A point of the motion: the ball's centre in world coordinates (x right, y up, metres).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MotionPoint {
    /// Centre x, metres.
    pub x_m: f64,
    /// Centre y, metres.
    pub y_m: f64,
    /// Velocity x, m/s.
    pub vx_mps: f64,
    /// Velocity y, m/s.
    pub vy_mps: f64,
    /// What the ball is doing.
    pub phase: Phase,
    /// Flight arc number: 0 before the first bounce, k after the k-th.
    pub arc: usize,
    /// Turn of the ball about the axis toward the camera since t = 0, radians, counter-clockwise
    /// positive as seen in the photo (unwrapped).
    pub spin_rad: f64,
}

/// One bounce on the floor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BounceEvent {
    /// Time of contact, seconds.
    pub t_s: f64,
    /// Centre x at contact, metres.
    pub x_m: f64,
    /// Velocity just before contact (x, y), m/s.
    pub impact_velocity_mps: [f64; 2],
    /// Velocity just after contact (x, y), m/s.
    pub rebound_velocity_mps: [f64; 2],
    /// Normal restitution used, -vy_out / vy_in.
    pub restitution: f64,
    /// Spin just before contact, turns per second, counter-clockwise positive as seen.
    #[serde(default)]
    pub spin_before_hz: f64,
    /// Spin just after contact, turns per second.
    #[serde(default)]
    pub spin_after_hz: f64,
}

/// The ball leaving the incline (or the free start).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LaunchEvent {
    /// Time, seconds.
    pub t_s: f64,
    /// Centre x, metres.
    pub x_m: f64,
    /// Centre y, metres.
    pub y_m: f64,
    /// Velocity (x, y), m/s.
    pub velocity_mps: [f64; 2],
    /// Speed, m/s.
    pub speed_mps: f64,
    /// Angle above horizontal, degrees (negative: downward).
    pub angle_deg: f64,
}

#[derive(Debug, Clone)]
enum Segment {
    /// Rolling down the incline from rest at t = 0: centre = c0 + dir * a t^2 / 2; the ball
    /// turns by -(1 - slip) s / r for a distance s rolled (clockwise, descending to the right).
    Incline {
        t1: f64,
        c0: [f64; 2],
        dir: [f64; 2],
        accel: f64,
        turn_per_m: f64,
        spin0_rad: f64,
    },
    /// Free flight from (t0, p0, v0); `samples` holds (t, x, y, vx, vy) when drag is on.
    Flight {
        t0: f64,
        t1: f64,
        p0: [f64; 2],
        v0: [f64; 2],
        arc: usize,
        samples: Vec<[f64; 5]>,
        spin0_rad: f64,
        omega_radps: f64,
    },
    /// Rolling along the floor at constant speed.
    Floor {
        t0: f64,
        p0: [f64; 2],
        vx: f64,
        arc: usize,
        spin0_rad: f64,
    },
}

/// The complete motion of the ball.
#[derive(Debug, Clone)]
pub struct Motion {
    segments: Vec<Segment>,
    gravity_mps2: f64,
    radius_m: f64,
    /// Every bounce in time order.
    pub bounces: Vec<BounceEvent>,
    /// The launch (end of the incline, or the free start at t = 0).
    pub launch: LaunchEvent,
    /// Rolling acceleration on the incline, m/s^2 (None without an incline).
    pub incline_accel_mps2: Option<f64>,
}

/// Time step of the drag integrator, seconds.
const DRAG_STEP_S: f64 = 1e-4;
/// Rebounds slower than this (m/s, vertical) end the bouncing: the ball rolls along the floor.
const REST_SPEED_MPS: f64 = 0.03;

/// Cubic Hermite interpolation of position and velocity between two samples (t, x, y, vx, vy).
fn hermite(a: &[f64; 5], b: &[f64; 5], t: f64) -> [f64; 4] {
    let h = b[0] - a[0];
    let s = (t - a[0]) / h;
    let (s2, s3) = (s * s, s * s * s);
    let h00 = 2.0 * s3 - 3.0 * s2 + 1.0;
    let h10 = s3 - 2.0 * s2 + s;
    let h01 = -2.0 * s3 + 3.0 * s2;
    let h11 = s3 - s2;
    let d00 = (6.0 * s2 - 6.0 * s) / h;
    let d10 = 3.0 * s2 - 4.0 * s + 1.0;
    let d01 = (-6.0 * s2 + 6.0 * s) / h;
    let d11 = 3.0 * s2 - 2.0 * s;
    let mut out = [0.0; 4];
    for k in 0..2 {
        let (pa, pb, va, vb) = (a[1 + k], b[1 + k], a[3 + k], b[3 + k]);
        out[k] = h00 * pa + h10 * h * va + h01 * pb + h11 * h * vb;
        out[2 + k] = d00 * pa + d10 * va + d01 * pb + d11 * vb;
    }
    out
}

/// Flight with drag from (`t`, `p`, `v`) until the ball's bottom touches the floor (centre at
/// y = `r`, moving down) or the time passes `limit`: fixed RK4 steps of [`DRAG_STEP_S`], the
/// contact time by bisection on the cubic Hermite interpolant of the last step. Comes out: the
/// contact time, position and velocity, and every sample (t, x, y, vx, vy).
fn fly_with_drag(
    model: &QuadraticDrag,
    t: f64,
    p: [f64; 2],
    v: [f64; 2],
    r: f64,
    limit: f64,
) -> (f64, [f64; 2], [f64; 2], Vec<[f64; 5]>) {
    let mut samples = vec![[t, p[0], p[1], v[0], v[1]]];
    let mut s = [p[0], p[1], v[0], v[1]];
    let mut ts = t;
    loop {
        let next = model.step(s, DRAG_STEP_S);
        let tn = ts + DRAG_STEP_S;
        samples.push([tn, next[0], next[1], next[2], next[3]]);
        if next[1] <= r && next[3] < 0.0 {
            break;
        }
        s = next;
        ts = tn;
        if ts > limit {
            break;
        }
    }
    let n = samples.len();
    let (a, b) = (samples[n - 2], samples[n - 1]);
    // Bisection for the contact time on the interpolant.
    let (mut lo, mut hi) = (a[0], b[0]);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if hermite(&a, &b, mid)[1] > r {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let st = hermite(&a, &b, hi);
    (hi, [st[0], r], [st[2], st[3]], samples)
}

/// The ball's turn at the launch: angle since t = 0 (radians) and spin (radians per second),
/// counter-clockwise positive as seen.
type Turn = (f64, f64);

/// The launch: the end of the incline for a ball rolling from rest without slipping (its
/// incline segment pushed onto `segments`), or the free start. Comes out: the launch, the
/// rolling acceleration on the incline (None without one) and the ball's turn at the launch.
fn launch_event(
    scene: &Scene,
    g: f64,
    r: f64,
    k: f64,
    segments: &mut Vec<Segment>,
) -> (LaunchEvent, Option<f64>, Turn) {
    let spin0 = scene.ball.orientation_deg.to_radians();
    match (&scene.incline, &scene.start) {
        (Some(inc), _) => {
            let th = inc.angle_deg.to_radians();
            let accel = g * (th.sin() - inc.rolling_resistance * th.cos()) / (1.0 + k);
            let dir = [th.cos(), -th.sin()];
            let normal = [th.sin(), th.cos()];
            let bottom = [inc.bottom_x_m, inc.bottom_height_m];
            // The contact point starts at the top (length_m up the slope) and the ball leaves
            // when the contact point reaches the lower end.
            let end = [bottom[0] + r * normal[0], bottom[1] + r * normal[1]];
            let c0 = [
                end[0] - inc.length_m * dir[0],
                end[1] - inc.length_m * dir[1],
            ];
            let t1 = (2.0 * inc.length_m / accel).sqrt();
            let speed = accel * t1;
            let turn_per_m = -(1.0 - inc.slip) / r;
            segments.push(Segment::Incline {
                t1,
                c0,
                dir,
                accel,
                turn_per_m,
                spin0_rad: spin0,
            });
            let v = [speed * dir[0], speed * dir[1]];
            (
                LaunchEvent {
                    t_s: t1,
                    x_m: end[0],
                    y_m: end[1],
                    velocity_mps: v,
                    speed_mps: speed,
                    angle_deg: v[1].atan2(v[0]).to_degrees(),
                },
                Some(accel),
                (spin0 + turn_per_m * inc.length_m, turn_per_m * speed),
            )
        }
        (None, Some(s)) => {
            let v = [s.vx_mps, s.vy_mps];
            let speed = (v[0] * v[0] + v[1] * v[1]).sqrt();
            (
                LaunchEvent {
                    t_s: 0.0,
                    x_m: s.x_m,
                    y_m: s.y_m,
                    velocity_mps: v,
                    speed_mps: speed,
                    angle_deg: if speed > 0.0 {
                        v[1].atan2(v[0]).to_degrees()
                    } else {
                        0.0
                    },
                },
                None,
                (spin0, std::f64::consts::TAU * s.spin_hz),
            )
        }
        (None, None) => unreachable!("validated scenes have an incline or a start"),
    }
}

impl Motion {
    /// Simulate the scene's motion up to `t_end_s`.
    pub fn simulate(scene: &Scene, t_end_s: f64) -> Motion {
        let g = scene.flight.gravity_mps2;
        let drag = scene.flight.drag_per_m;
        let r = scene.ball.radius_m();
        let k = scene.ball.inertia_factor();
        let mut segments = Vec::new();
        let mut bounces = Vec::new();

        let (launch, incline_accel, (mut spin, mut omega)) =
            launch_event(scene, g, r, k, &mut segments);

        let mut t = launch.t_s;
        let mut p = [launch.x_m, launch.y_m];
        let mut v = launch.velocity_mps;
        let mut arc = 0usize;
        loop {
            if t >= t_end_s {
                segments.push(Segment::Flight {
                    t0: t,
                    t1: f64::INFINITY,
                    p0: p,
                    v0: v,
                    arc,
                    samples: Vec::new(),
                    spin0_rad: spin,
                    omega_radps: omega,
                });
                break;
            }
            // Flight until the ball's bottom touches the floor (centre at y = r).
            let (t_hit, p_hit, v_hit, samples) = if drag == 0.0 {
                let h = (p[1] - r).max(0.0);
                let dt = (v[1] + (v[1] * v[1] + 2.0 * g * h).sqrt()) / g;
                let ph = [p[0] + v[0] * dt, r];
                let vh = [v[0], v[1] - g * dt];
                (t + dt, ph, vh, Vec::new())
            } else {
                let model = QuadraticDrag {
                    gravity_mps2: g,
                    drag_per_m: drag,
                    speed: SpeedNorm::SquareRoot,
                };
                fly_with_drag(&model, t, p, v, r, t_end_s + 10.0)
            };
            segments.push(Segment::Flight {
                t0: t,
                t1: t_hit,
                p0: p,
                v0: v,
                arc,
                samples,
                spin0_rad: spin,
                omega_radps: omega,
            });
            if t_hit >= t_end_s {
                break;
            }
            let impact = v_hit[1].abs();
            let e = scene.floor.restitution_at(impact);
            let v_out = [v_hit[0] * scene.floor.tangential_ratio, e * impact];
            spin += omega * (t_hit - t);
            let omega_out = omega + (v_out[0] - v_hit[0]) / (k * r);
            bounces.push(BounceEvent {
                t_s: t_hit,
                x_m: p_hit[0],
                impact_velocity_mps: v_hit,
                rebound_velocity_mps: v_out,
                restitution: e,
                spin_before_hz: omega / std::f64::consts::TAU,
                spin_after_hz: omega_out / std::f64::consts::TAU,
            });
            omega = omega_out;
            arc += 1;
            t = t_hit;
            p = p_hit;
            v = v_out;
            if v_out[1] < REST_SPEED_MPS || bounces.len() > 1000 {
                segments.push(Segment::Floor {
                    t0: t,
                    p0: p,
                    vx: v_out[0],
                    arc,
                    spin0_rad: spin,
                });
                break;
            }
        }
        Motion {
            segments,
            gravity_mps2: g,
            radius_m: r,
            bounces,
            launch,
            incline_accel_mps2: incline_accel,
        }
    }

    /// The ball's state at time `t_s` (before release it rests at its start).
    pub fn at(&self, t_s: f64) -> MotionPoint {
        let t_s = t_s.max(0.0);
        for seg in &self.segments {
            match seg {
                Segment::Incline {
                    t1,
                    c0,
                    dir,
                    accel,
                    turn_per_m,
                    spin0_rad,
                } => {
                    if t_s <= *t1 {
                        let s = 0.5 * accel * t_s * t_s;
                        let v = accel * t_s;
                        return MotionPoint {
                            x_m: c0[0] + s * dir[0],
                            y_m: c0[1] + s * dir[1],
                            vx_mps: v * dir[0],
                            vy_mps: v * dir[1],
                            phase: Phase::Incline,
                            arc: 0,
                            spin_rad: spin0_rad + turn_per_m * s,
                        };
                    }
                }
                Segment::Flight {
                    t0,
                    t1,
                    p0,
                    v0,
                    arc,
                    samples,
                    spin0_rad,
                    omega_radps,
                } => {
                    if t_s <= *t1 {
                        let (x, y, vx, vy) = if samples.is_empty() {
                            let dt = t_s - t0;
                            let g = self.gravity_mps2;
                            (
                                p0[0] + v0[0] * dt,
                                p0[1] + v0[1] * dt - 0.5 * g * dt * dt,
                                v0[0],
                                v0[1] - g * dt,
                            )
                        } else {
                            let i = samples
                                .partition_point(|s| s[0] <= t_s)
                                .clamp(1, samples.len() - 1);
                            let st = hermite(&samples[i - 1], &samples[i], t_s);
                            (st[0], st[1], st[2], st[3])
                        };
                        return MotionPoint {
                            x_m: x,
                            y_m: y,
                            vx_mps: vx,
                            vy_mps: vy,
                            phase: Phase::Flight,
                            arc: *arc,
                            spin_rad: spin0_rad + omega_radps * (t_s - t0),
                        };
                    }
                }
                Segment::Floor {
                    t0,
                    p0,
                    vx,
                    arc,
                    spin0_rad,
                } => {
                    return MotionPoint {
                        x_m: p0[0] + vx * (t_s - t0),
                        y_m: p0[1],
                        vx_mps: *vx,
                        vy_mps: 0.0,
                        phase: Phase::Floor,
                        arc: *arc,
                        spin_rad: spin0_rad - vx * (t_s - t0) / self.radius_m,
                    };
                }
            }
        }
        unreachable!("the last segment is open-ended")
    }

    /// Gravity used, m/s^2.
    pub fn gravity_mps2(&self) -> f64 {
        self.gravity_mps2
    }
}

/// Speed at the end of an incline of height `height_m` for a ball rolling without slipping from
/// rest: v = sqrt(2 g h / (1 + k)) (energy conservation; standard mechanics handbook formula).
pub fn rolling_end_speed_mps(height_m: f64, inertia_factor: f64, gravity_mps2: f64) -> f64 {
    (2.0 * gravity_mps2 * height_m / (1.0 + inertia_factor)).sqrt()
}

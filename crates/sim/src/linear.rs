//! Trim, linearisation and the linear-quadratic regulator.
//!
//! - **Trim** by Newton's method on (α, δe, δt) for steady flight at a given airspeed and
//!   flight-path angle, with a numerical Jacobian.
//! - **Linearisation** by central differences of the truth model's derivative.
//! - **Riccati**: the continuous algebraic Riccati equation `AᵀP + PA − PBR⁻¹BᵀP + Q = 0` by
//!   the matrix sign function of the Hamiltonian (Newton iteration with determinant scaling,
//!   after Roberts and Byers), refined by Newton–Kleinman steps, each a Lyapunov equation
//!   solved through its Kronecker form (the systems here have at most ten states).

use crate::airframe::{Airframe, Controls, State, Wind};
use crate::atmosphere::at_altitude;
use nalgebra::{DMatrix, DVector};

/// A steady flight condition.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Trim {
    /// The trimmed state (actuators at their trim positions).
    pub state: State,
    /// The trim controls.
    pub controls: Controls,
    /// Angle of attack, rad.
    pub alpha: f64,
    /// Largest |u̇|, |ẇ|, |q̇| left at the trim.
    pub residual: f64,
}

/// Why a computation failed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LinearError(pub String);

impl std::fmt::Display for LinearError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for LinearError {}

fn trim_state(v: f64, h: f64, gamma: f64, z: [f64; 3]) -> (State, Controls) {
    let (alpha, de, dt) = (z[0], z[1], z[2]);
    let s = State {
        u: v * libm::cos(alpha),
        w: v * libm::sin(alpha),
        q: 0.0,
        theta: alpha + gamma,
        h,
        x: 0.0,
        elevator: de,
        throttle: dt,
    };
    (
        s,
        Controls {
            elevator: de,
            throttle: dt,
        },
    )
}

/// Trims the airframe at airspeed `v` (m/s), altitude `h` (m), flight-path angle `gamma`
/// (rad), in still air. Residuals below 1e-12 (m/s², rad/s²) or an error.
pub fn trim(af: &Airframe, v: f64, h: f64, gamma: f64) -> Result<Trim, LinearError> {
    let rho = at_altitude(h).density;
    let residual = |z: [f64; 3]| -> [f64; 3] {
        let (s, c) = trim_state(v, h, gamma, z);
        let d = af.derivative(&s, &c, &Wind::default(), rho);
        [d.u, d.w, d.q]
    };
    let mut z = [0.05, 0.0, 0.4];
    for _ in 0..50 {
        let r = residual(z);
        let norm = r.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        if norm < 1e-12 {
            let (state, controls) = trim_state(v, h, gamma, z);
            if !(0.0..=1.0).contains(&z[2]) || z[1].abs() > af.elevator_limit {
                return Err(LinearError(format!(
                    "no trim inside the actuator limits at {v} m/s (elevator {:.3} rad, throttle {:.3})",
                    z[1], z[2]
                )));
            }
            return Ok(Trim {
                state,
                controls,
                alpha: z[0],
                residual: norm,
            });
        }
        let mut j = DMatrix::<f64>::zeros(3, 3);
        for k in 0..3 {
            let step = 1e-6 * z[k].abs().max(1.0);
            let (mut zp, mut zm) = (z, z);
            zp[k] += step;
            zm[k] -= step;
            let (rp, rm) = (residual(zp), residual(zm));
            for i in 0..3 {
                j[(i, k)] = (rp[i] - rm[i]) / (2.0 * step);
            }
        }
        let rhs = DVector::from_row_slice(&r);
        let dz = j
            .lu()
            .solve(&rhs)
            .ok_or_else(|| LinearError("singular trim Jacobian".into()))?;
        for k in 0..3 {
            z[k] -= dz[k];
        }
    }
    Err(LinearError(format!("trim did not converge at {v} m/s")))
}

/// The rigid-body states of the linear model: u, w, q, θ, h.
pub const LINEAR_STATES: usize = 5;

/// `ẋ ≈ A·δx + B·δu` about a trim, for the states (u, w, q, θ, h) and the inputs (elevator,
/// throttle) taken as actuator positions. Central differences.
pub fn linearise(af: &Airframe, t: &Trim) -> (DMatrix<f64>, DMatrix<f64>) {
    let f = |x: &[f64; 5], de: f64, dt: f64| -> [f64; 5] {
        let mut s = t.state;
        s.u = x[0];
        s.w = x[1];
        s.q = x[2];
        s.theta = x[3];
        s.h = x[4];
        s.elevator = de;
        s.throttle = dt;
        let c = Controls {
            elevator: de,
            throttle: dt,
        };
        let rho = at_altitude(s.h).density;
        let d = af.derivative(&s, &c, &Wind::default(), rho);
        [d.u, d.w, d.q, d.theta, d.h]
    };
    let x0 = [t.state.u, t.state.w, t.state.q, t.state.theta, t.state.h];
    let (de0, dt0) = (t.controls.elevator, t.controls.throttle);
    let mut a = DMatrix::zeros(5, 5);
    for k in 0..5 {
        let step = 1e-6 * x0[k].abs().max(1.0);
        let (mut xp, mut xm) = (x0, x0);
        xp[k] += step;
        xm[k] -= step;
        let (fp, fm) = (f(&xp, de0, dt0), f(&xm, de0, dt0));
        for i in 0..5 {
            a[(i, k)] = (fp[i] - fm[i]) / (2.0 * step);
        }
    }
    let mut b = DMatrix::zeros(5, 2);
    for (k, (dp, dq)) in [(1e-6, 0.0), (0.0, 1e-6)].iter().enumerate() {
        let fp = f(&x0, de0 + dp, dt0 + dq);
        let fm = f(&x0, de0 - dp, dt0 - dq);
        for i in 0..5 {
            b[(i, k)] = (fp[i] - fm[i]) / (2.0 * 1e-6);
        }
    }
    (a, b)
}

/// Solves `AᵀX + XA = −C` (a continuous Lyapunov equation) through its Kronecker form.
pub fn lyapunov(a: &DMatrix<f64>, c: &DMatrix<f64>) -> Result<DMatrix<f64>, LinearError> {
    let n = a.nrows();
    let at = a.transpose();
    let eye = DMatrix::<f64>::identity(n, n);
    // vec(AᵀX + XA) = (I ⊗ Aᵀ + Aᵀ ⊗ I)·vec(X) for column-major vec
    let m = eye.kronecker(&at) + at.kronecker(&eye);
    let rhs = DVector::from_iterator(n * n, c.iter().map(|v| -v));
    let x = m
        .lu()
        .solve(&rhs)
        .ok_or_else(|| LinearError("singular Lyapunov equation".into()))?;
    let x = DMatrix::from_column_slice(n, n, x.as_slice());
    Ok((&x + x.transpose()) * 0.5)
}

/// The stabilising solution `P` of `AᵀP + PA − PBR⁻¹BᵀP + Q = 0`.
pub fn care(
    a: &DMatrix<f64>,
    b: &DMatrix<f64>,
    q: &DMatrix<f64>,
    r: &DMatrix<f64>,
) -> Result<DMatrix<f64>, LinearError> {
    let n = a.nrows();
    let r_inv = r
        .clone()
        .try_inverse()
        .ok_or_else(|| LinearError("R is singular".into()))?;
    let g = b * &r_inv * b.transpose();
    let mut h = DMatrix::<f64>::zeros(2 * n, 2 * n);
    h.view_mut((0, 0), (n, n)).copy_from(a);
    h.view_mut((0, n), (n, n)).copy_from(&(-&g));
    h.view_mut((n, 0), (n, n)).copy_from(&(-q));
    h.view_mut((n, n), (n, n)).copy_from(&(-a.transpose()));
    // sign(H) by Newton's iteration with determinant scaling
    let mut z = h;
    for _ in 0..100 {
        let inv = z.clone().try_inverse().ok_or_else(|| {
            LinearError("the Hamiltonian has eigenvalues on the imaginary axis".into())
        })?;
        let det = z.determinant().abs();
        let c = if det > 0.0 && det.is_finite() {
            det.powf(-1.0 / (2.0 * n as f64))
        } else {
            1.0
        };
        let next = (&z * c + inv / c) * 0.5;
        let change = (&next - &z).norm() / next.norm();
        z = next;
        if change < 1e-14 {
            break;
        }
    }
    // the stable subspace [I; P] satisfies (sign(H) + I)·[I; P] = 0
    let w11 = z.view((0, 0), (n, n)).clone_owned() + DMatrix::identity(n, n);
    let w12 = z.view((0, n), (n, n)).clone_owned();
    let w21 = z.view((n, 0), (n, n)).clone_owned();
    let w22 = z.view((n, n), (n, n)).clone_owned() + DMatrix::identity(n, n);
    let mut lhs = DMatrix::zeros(2 * n, n);
    lhs.view_mut((0, 0), (n, n)).copy_from(&w12);
    lhs.view_mut((n, 0), (n, n)).copy_from(&w22);
    let mut rhs = DMatrix::zeros(2 * n, n);
    rhs.view_mut((0, 0), (n, n)).copy_from(&(-&w11));
    rhs.view_mut((n, 0), (n, n)).copy_from(&(-&w21));
    let svd = lhs.svd(true, true);
    let mut p = svd
        .solve(&rhs, 1e-14)
        .map_err(|e| LinearError(format!("no stable invariant subspace: {e}")))?;
    p = (&p + p.transpose()) * 0.5;
    // Newton–Kleinman refinement: P ← the solution of (A − BK)ᵀP + P(A − BK) = −(Q + KᵀRK)
    for _ in 0..4 {
        let k = &r_inv * b.transpose() * &p;
        let ac = a - b * &k;
        let c = q + k.transpose() * r * &k;
        let next = lyapunov(&ac, &c)?;
        let change = (&next - &p).norm() / next.norm().max(1e-300);
        p = next;
        if change < 1e-15 {
            break;
        }
    }
    Ok(p)
}

/// The LQR gain `K = R⁻¹BᵀP` (control `u = −K·x`).
pub fn lqr(
    a: &DMatrix<f64>,
    b: &DMatrix<f64>,
    q: &DMatrix<f64>,
    r: &DMatrix<f64>,
) -> Result<DMatrix<f64>, LinearError> {
    let p = care(a, b, q, r)?;
    let r_inv = r.clone().try_inverse().expect("checked by care");
    Ok(r_inv * b.transpose() * p)
}

/// The eigenvalues of a real square matrix, as (real, imaginary) pairs.
pub fn eigenvalues(a: &DMatrix<f64>) -> Vec<(f64, f64)> {
    a.complex_eigenvalues()
        .iter()
        .map(|c| (c.re, c.im))
        .collect()
}

/// The phugoid of a linear model: the oscillatory mode of lowest frequency among the
/// (u, w, q, θ) states. Returns (period s, damping ratio).
pub fn phugoid(a: &DMatrix<f64>) -> Option<(f64, f64)> {
    let a4 = a.view((0, 0), (4, 4)).clone_owned();
    eigenvalues(&a4)
        .into_iter()
        .filter(|(_, im)| *im > 1e-9)
        .min_by(|x, y| x.1.total_cmp(&y.1))
        .map(|(re, im)| {
            let wn = (re * re + im * im).sqrt();
            (2.0 * std::f64::consts::PI / im, -re / wn)
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_double_integrator_gain_is_the_textbook_one() {
        // ẍ = u, Q = I, R = 1: P = [[√3, 1], [1, √3]], K = [1, √3] (textbook result, e.g.
        // Anderson & Moore, from memory)
        let a = DMatrix::from_row_slice(2, 2, &[0.0, 1.0, 0.0, 0.0]);
        let b = DMatrix::from_row_slice(2, 1, &[0.0, 1.0]);
        let k = lqr(&a, &b, &DMatrix::identity(2, 2), &DMatrix::identity(1, 1)).unwrap();
        assert!((k[(0, 0)] - 1.0).abs() < 1e-12, "{k}");
        assert!((k[(0, 1)] - 3f64.sqrt()).abs() < 1e-12, "{k}");
    }

    #[test]
    fn scalar_riccati_equations_have_their_closed_form() {
        // ẋ = a·x + b·u, cost q·x² + r·u²: P = r(a + √(a² + b²q/r))/b² (checkvalues §2)
        for (a, b, q, r) in [(1.0, 1.0, 1.0, 1.0), (-2.0, 0.5, 3.0, 0.1)] {
            let p = care(
                &DMatrix::from_element(1, 1, a),
                &DMatrix::from_element(1, 1, b),
                &DMatrix::from_element(1, 1, q),
                &DMatrix::from_element(1, 1, r),
            )
            .unwrap();
            let want = r * (a + (a * a + b * b * q / r).sqrt()) / (b * b);
            assert!(
                (p[(0, 0)] - want).abs() / want < 1e-12,
                "{} vs {want}",
                p[(0, 0)]
            );
        }
    }

    #[test]
    fn the_demo_airframe_trims_with_tiny_residuals() {
        let af = Airframe::default();
        for v in [16.0, 22.0, 28.0] {
            let t = trim(&af, v, 120.0, 0.0).unwrap();
            assert!(t.residual < 1e-9, "{v}: {}", t.residual);
            assert!(t.controls.throttle > 0.0 && t.controls.throttle < 1.0);
        }
    }
}

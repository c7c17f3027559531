//! Single-mode fit of a 1X response: natural speed and damping ratio by variable projection.
//!
//! Model: the steady-state response of one mode to a rotating unbalance,
//! `v(N) = ε e^{−jβ} · r²/(1 − r² + 2jζr) + b`, `r = N/Nn` (S. S. Rao, *Mechanical Vibrations*, 5th ed.
//! 2011, §3.7, rotating unbalance; the constant `b` absorbs residual runout and the nearly constant
//! tails of other modes inside the window). The model is linear in the complex amplitudes `ε e^{−jβ}`
//! and `b`, and nonlinear only in `(Nn, ζ)`; so for each trial `(Nn, ζ)` the amplitudes are solved by
//! linear least squares and only the two nonlinear parameters are iterated (variable projection,
//! G. H. Golub & V. Pereyra, SIAM J. Numer. Anal. 10(2), 1973 — from memory). The outer iteration is
//! Levenberg–Marquardt on `(ln Nn, ln ζ)`, which keeps both positive, with a finite-difference
//! Jacobian of the projected residual; it starts from the best point of a small grid around the guess.

use super::ModeFit;
use crate::{Complex64, ResponsePoint};

/// Half-width of the default fit window, in units of `ζ·Nc` (about three half-power half-widths,
/// down to roughly a third of the peak on an isolated mode).
pub(crate) const DEFAULT_SPAN: f64 = 3.0;

/// The fit window is never narrower than ±2 % of the guessed speed, so a too-small damping guess
/// still leaves enough points.
const MIN_HALF_WIDTH: f64 = 0.02;

/// Fewer points than this cannot pin down two complex amplitudes and two nonlinear parameters with
/// any redundancy.
const MIN_POINTS: usize = 8;

const MAX_ITERATIONS: usize = 200;

/// The response of a fitted mode at `speed_rpm`: `modal_vector·r²/(1 − r² + 2jζr) + background`.
///
/// Lets a caller draw the fitted Bode and polar curves over the measured points, or subtract the mode
/// to look for others.
pub fn model_vector(speed_rpm: f64, fit: &ModeFit) -> Complex64 {
    fit.modal_vector * shape(speed_rpm / fit.natural_rpm, fit.damping_ratio) + fit.background
}

/// The unbalance-response shape `r²/(1 − r² + 2jζr)`.
pub(crate) fn shape(r: f64, zeta: f64) -> Complex64 {
    let r2 = r * r;
    Complex64::new(r2, 0.0) / Complex64::new(1.0 - r2, 2.0 * zeta * r)
}

/// Fits one mode to the points around `guess_rpm`, starting from damping ratio `guess_zeta`.
///
/// Only points within `guess_rpm·(1 ± 3·ζ)` (at least ±2 %) are used: farther away other modes and the
/// slow-roll region dominate, and they are not part of the model. The guess damping is clamped to
/// 0.005..=0.5. The points may come in any order (run-up or coast-down give the same fit).
/// Returns `None` when fewer than 8 points fall in the window, when the iteration does not settle on
/// a finite answer, or when the natural speed it finds lies outside the window or ζ ≥ 1 (no resonance
/// in these points).
pub fn fit_mode(points: &[ResponsePoint], guess_rpm: f64, guess_zeta: f64) -> Option<ModeFit> {
    if !(guess_rpm.is_finite() && guess_rpm > 0.0) {
        return None;
    }
    let zeta = if guess_zeta.is_finite() {
        guess_zeta.clamp(0.005, 0.5)
    } else {
        0.05
    };
    let half = (DEFAULT_SPAN * zeta).max(MIN_HALF_WIDTH) * guess_rpm;
    let mut data: Vec<(f64, Complex64)> = points
        .iter()
        .map(|p| (p.speed_rpm, p.vector))
        .filter(|(s, v)| s.is_finite() && *s > 0.0 && v.re.is_finite() && v.im.is_finite())
        .collect();
    data.sort_by(|a, b| {
        a.0.total_cmp(&b.0)
            .then(a.1.re.total_cmp(&b.1.re))
            .then(a.1.im.total_cmp(&b.1.im))
    });
    let (speed, vector): (Vec<f64>, Vec<Complex64>) = data.into_iter().unzip();
    fit_window(
        &speed,
        &vector,
        guess_rpm - half,
        guess_rpm + half,
        guess_rpm,
        zeta,
    )
}

/// Fits the points of the sorted series whose speed lies in `lo..=hi`.
pub(crate) fn fit_window(
    speed: &[f64],
    vector: &[Complex64],
    lo: f64,
    hi: f64,
    guess_rpm: f64,
    guess_zeta: f64,
) -> Option<ModeFit> {
    let (s, v): (Vec<f64>, Vec<Complex64>) = speed
        .iter()
        .zip(vector)
        .filter(|(&x, _)| x >= lo && x <= hi)
        .map(|(&x, &y)| (x, y))
        .unzip();
    if s.len() < MIN_POINTS {
        return None;
    }
    let problem = Problem {
        speed: &s,
        vector: &v,
        reference: guess_rpm,
    };
    let start = problem.grid_start(guess_zeta)?;
    let p = problem.levenberg_marquardt(start)?;
    let natural_rpm = guess_rpm * p[0].exp();
    let damping_ratio = p[1].exp();
    let (modal_vector, background, cost) = problem.project(p, None)?;
    let peak = s.iter().fold(0.0_f64, |m, &x| {
        m.max((modal_vector * shape(x / natural_rpm, damping_ratio) + background).norm())
    });
    let rms_residual = (cost / s.len() as f64).sqrt() / peak;
    let inside = natural_rpm >= s[0] && natural_rpm <= s[s.len() - 1];
    let ok = inside
        && damping_ratio < 1.0
        && rms_residual.is_finite()
        && modal_vector.re.is_finite()
        && modal_vector.im.is_finite();
    ok.then_some(ModeFit {
        natural_rpm,
        damping_ratio,
        modal_vector,
        background,
        rms_residual,
        points: s.len(),
    })
}

/// The data of one fit; parameters are `p = [ln(Nn/reference), ln ζ]`.
struct Problem<'a> {
    speed: &'a [f64],
    vector: &'a [Complex64],
    reference: f64,
}

impl Problem<'_> {
    /// Solves the linear amplitudes for `p` and returns them with the residual sum of squares;
    /// fills `residual` (re, im interleaved) when given.
    fn project(
        &self,
        p: [f64; 2],
        residual: Option<&mut Vec<f64>>,
    ) -> Option<(Complex64, Complex64, f64)> {
        let nn = self.reference * p[0].exp();
        let zeta = p[1].exp();
        let n = self.speed.len() as f64;
        let (mut s_gg, mut s_g, mut s_gv, mut s_v) = (
            0.0,
            Complex64::default(),
            Complex64::default(),
            Complex64::default(),
        );
        for (&x, &v) in self.speed.iter().zip(self.vector) {
            let g = shape(x / nn, zeta);
            s_gg += g.norm_sqr();
            s_g += g;
            s_gv += g.conj() * v;
            s_v += v;
        }
        // Normal equations of min Σ|v − a g − b|²:  a Σ|g|² + b Σḡ = Σḡv,  a Σg + b n = Σv.
        let det = s_gg * n - s_g.norm_sqr();
        if det.is_nan() || det <= 1e-12 * s_gg * n {
            return None;
        }
        let a = (s_gv * n - s_g.conj() * s_v) / det;
        let b = (s_v * s_gg - s_g * s_gv) / det;
        let mut cost = 0.0;
        let mut out = residual;
        if let Some(r) = out.as_deref_mut() {
            r.clear();
        }
        for (&x, &v) in self.speed.iter().zip(self.vector) {
            let e = v - a * shape(x / nn, zeta) - b;
            cost += e.norm_sqr();
            if let Some(r) = out.as_deref_mut() {
                r.push(e.re);
                r.push(e.im);
            }
        }
        cost.is_finite().then_some((a, b, cost))
    }

    fn cost(&self, p: [f64; 2]) -> Option<f64> {
        self.project(p, None).map(|(_, _, c)| c)
    }

    /// The best point of a small grid around the guess, so the iteration starts inside the right
    /// valley even when the guess is off by a fraction of the bandwidth.
    fn grid_start(&self, zeta: f64) -> Option<[f64; 2]> {
        let mut best: Option<([f64; 2], f64)> = None;
        for k in -8..=8 {
            let nn = 1.0 + zeta * f64::from(k) / 4.0;
            if nn <= 0.0 {
                continue;
            }
            for z in [0.5, 0.71, 1.0, 1.41, 2.0] {
                let p = [nn.ln(), (zeta * z).ln()];
                if let Some(c) = self.cost(p) {
                    match best {
                        Some((_, bc)) if c >= bc => {}
                        _ => best = Some((p, c)),
                    }
                }
            }
        }
        best.map(|(p, _)| p)
    }

    fn levenberg_marquardt(&self, start: [f64; 2]) -> Option<[f64; 2]> {
        const STEPS: [f64; 2] = [1e-7, 1e-6];
        let scale: f64 = self.vector.iter().map(|v| v.norm_sqr()).sum();
        let mut p = start;
        let mut cost = self.cost(p)?;
        let mut lambda = 1e-3;
        let (mut r0, mut plus, mut minus) = (Vec::new(), Vec::new(), Vec::new());
        let mut jac = [Vec::new(), Vec::new()];
        for _ in 0..MAX_ITERATIONS {
            if cost <= 1e-28 * scale {
                break;
            }
            self.project(p, Some(&mut r0))?;
            for (k, col) in jac.iter_mut().enumerate() {
                let mut pp = p;
                let mut pm = p;
                pp[k] += STEPS[k];
                pm[k] -= STEPS[k];
                self.project(pp, Some(&mut plus))?;
                self.project(pm, Some(&mut minus))?;
                col.clear();
                col.extend(
                    plus.iter()
                        .zip(&minus)
                        .map(|(a, b)| (a - b) / (2.0 * STEPS[k])),
                );
            }
            let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
            let a11 = dot(&jac[0], &jac[0]);
            let a12 = dot(&jac[0], &jac[1]);
            let a22 = dot(&jac[1], &jac[1]);
            let g1 = dot(&jac[0], &r0);
            let g2 = dot(&jac[1], &r0);
            let mut accepted = None;
            for _ in 0..16 {
                let m11 = a11 * (1.0 + lambda) + 1e-300;
                let m22 = a22 * (1.0 + lambda) + 1e-300;
                let det = m11 * m22 - a12 * a12;
                if det.is_nan() || det <= 0.0 {
                    lambda *= 4.0;
                    continue;
                }
                let d1 = -(m22 * g1 - a12 * g2) / det;
                let d2 = -(m11 * g2 - a12 * g1) / det;
                let trial = [p[0] + d1, (p[1] + d2).clamp(1e-4_f64.ln(), 2.0_f64.ln())];
                match self.cost(trial) {
                    Some(c) if c < cost => {
                        accepted = Some((trial, c, d1.abs().max(d2.abs())));
                        lambda = (lambda * 0.3).max(1e-12);
                        break;
                    }
                    _ => lambda *= 4.0,
                }
            }
            let Some((trial, c, step)) = accepted else {
                break;
            };
            let gain = (cost - c) / cost;
            p = trial;
            cost = c;
            if step < 1e-12 || gain < 1e-15 {
                break;
            }
        }
        (p[0].is_finite() && p[1].is_finite()).then_some(p)
    }
}

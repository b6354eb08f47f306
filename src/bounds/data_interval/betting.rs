//! The betting (hedged capital) confidence interval for a bounded mean, without a grid.
//!
//! Exists because the betting interval adapts to the observed variance and is valid for every
//! sample size; this file reproduces confseq 0.0.11's `betting_ci(x, alpha)` with its defaults
//! (θ = 1/2, `convex_comb=False`, `m_trunc=False`, `trunc_scale=1`, `running_intersection=True`,
//! bets `lambda_predmix_eb(x, alpha/2, fixed_n=n)`), reference: Waudby-Smith & Ramdas,
//! "Estimating means of bounded random variables by betting", JRSS-B 2024, arXiv 2010.09686.
//!
//! On the scaled values `z ∈ [0, 1]`, with predictable bets `λ_i ∈ [0, 1]` that do not depend
//! on the candidate mean `m`, the capital processes are
//! `K⁺_t(m) = Π_{i≤t}(1 + λ_i(z_i − m))` (decreasing in `m`) and
//! `K⁻_t(m) = Π_{i≤t}(1 − λ_i(z_i − m))` (increasing). A candidate `m` is rejected when
//! `max_t K⁺_t(m) ≥ 2/α` or `max_t K⁻_t(m) ≥ 2/α` (Ville's inequality, α/2 each side), so the
//! interval is `[L, U]` with `L` the root of `max_t ln K⁺_t(m) = ln(2/α)` and `U` that of the
//! `K⁻` equation. Each root is found by a bracketed Newton/secant search (both O(R) per step);
//! the reported end is always a point *verified* rejected with a floating-point margin, so the
//! interval is never narrower than the exact one.

use super::{map_back, predmix_lambdas, scale, trivial, U};

/// Two-sided confidence interval, at total failure probability `alpha`, for the common mean of
/// independent values `values` (in the recorded order) known to lie in [lo, hi] (lo < hi), by
/// betting (confseq 0.0.11 `betting_ci` defaults). Values slightly outside [lo, hi] are
/// clamped first. The result lies in [lo, hi] and is rounded outward. Empty `values`,
/// `lo >= hi` or `alpha` outside (0, 1) give `[lo, hi]`.
pub fn betting_interval(values: &[f64], lo: f64, hi: f64, alpha: f64) -> [f64; 2] {
    if trivial(values, lo, hi, alpha) {
        return [lo, hi];
    }
    let z = scale(values, lo, hi);
    let [l, u] = betting_unit(&z, alpha);
    map_back(l, u, lo, hi)
}

/// The betting interval for values already in [0, 1], in [0, 1], rounded outward (each end a
/// verified rejected point, or 0 / 1).
pub(crate) fn betting_unit(z: &[f64], alpha: f64) -> [f64; 2] {
    let lam = predmix_lambdas(z, 1.0, alpha / 2.0);
    let c = (2.0 / alpha).ln();
    let l = boundary(z, &lam, c, Side::Lower, false);
    let u = boundary(z, &lam, c, Side::Upper, false);
    if l <= u {
        return [l, u];
    }
    // The running intersection is empty: every mean is rejected at some time (an event of
    // probability ≤ α). Any output is then allowed; the time-n set alone is never empty
    // (K⁺_n K⁻_n ≤ 1 < 2/α at every m) and is itself a valid interval, so report it: the
    // miscoverage event stays inside {∃t: the true mean is rejected at t}.
    [
        boundary(z, &lam, c, Side::Lower, true),
        boundary(z, &lam, c, Side::Upper, true),
    ]
}

/// Which end is searched.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Side {
    /// `L`, from `K⁺` (rejected region `[0, L]`).
    Lower,
    /// `U`, from `K⁻` (rejected region `[U, 1]`).
    Upper,
}

/// One evaluation at `m`: `g = max_t (ln K_t(m) − margin_t(m)) − c` (≥ 0 means `m` is verified
/// rejected) and the derivative `dg/dm` of the maximising `t` (for Newton).
struct Eval {
    g: f64,
    dg: f64,
}

/// Evaluates the capital process of `side` at `m` in log space, one pass, fixed order.
///
/// Precision: each term is `ℓ_i = ln_1p(y_i)`, `y_i = ±λ_i(z_i − m)` (ln_1p keeps the many
/// small terms accurate; a factor of exactly 0, `y_i = −1`, gives `−∞` and every later `K_t`
/// is 0). Floating-point error of the computed `s_t = Σ_{i≤t} ℓ_i` (recursive summation, first
/// order in u = 2⁻⁵³): the argument `y_i` has absolute error ≤ `λ_i(3u + |z_i − m|·2u) ≤ 5uλ_i`
/// (`z_i` is taken as exact data; its own scaling error is covered in `map_back`), which moves
/// `ℓ_i` by ≤ `5uλ_i/(1 + y_i)`; ln_1p adds ≤ 2u|ℓ_i| (libm, < 1 ulp, doubled); the sum adds
/// ≤ (t − 1)u Σ|ℓ_i|. So `|ŝ_t − s_t| ≤ u((t + 1)A_t + 5B_t)` with `A_t = Σ|ℓ_i|`,
/// `B_t = Σ λ_i/(1 + y_i)`; the margin used is `1.25 u((t + 2)A_t + 6B_t) + 1e-300`, which
/// also covers the second-order terms for t ≤ 10⁹ and the rounding of the margin itself.
/// `B_t` is the magnitude of `ds_t/dm`, so the margin costs one add and one abs per term.
fn evaluate(z: &[f64], lam: &[f64], c: f64, side: Side, m: f64, last_only: bool) -> Eval {
    let sign = match side {
        Side::Lower => 1.0,
        Side::Upper => -1.0,
    };
    let mut s = 0.0f64;
    let mut a = 0.0f64;
    let mut b = 0.0f64;
    let mut best = f64::NEG_INFINITY;
    let mut best_d = 0.0;
    let n = z.len();
    for (i, (&zi, &li)) in z.iter().zip(lam).enumerate() {
        let y = sign * (li * (zi - m));
        let one_plus = 1.0 + y;
        if one_plus <= 0.0 {
            // A factor of 0 (or, from rounding, below): K_t = 0 from here on.
            break;
        }
        let l = y.ln_1p();
        s += l;
        a += l.abs();
        b += li / one_plus;
        if !last_only || i + 1 == n {
            let t = (i + 1) as f64;
            let margin = 1.25 * U * ((t + 2.0) * a + 6.0 * b) + 1e-300;
            let v = s - margin;
            if v > best {
                best = v;
                // d ln K⁺/dm = −Σ λ/(1+y); d ln K⁻/dm = +Σ λ/(1+y).
                best_d = -sign * b;
            }
        }
    }
    Eval {
        g: best - c,
        dg: best_d,
    }
}

/// Maximum number of capital-process evaluations per end (each O(R)).
const MAX_EVALS: usize = 60;

/// The end of the interval on `side`: the largest verified rejected point below the root
/// (Lower) or the smallest above it (Upper), or 0 / 1 when the range end itself is not rejected.
///
/// Search: a bracket `[r, q]` (in the direction of `side`), `r` verified rejected (`g ≥ 0`),
/// `q` not. Each round tries a Newton step from `q` (for one concave `ln K_t`, and it is
/// concave in `m`, a sum of logs of affine functions, Newton from the accepted side stays on
/// the accepted side and converges quadratically), then a probe just beyond the root on the
/// rejected side (twice the next Newton correction past `q`; the secant if that falls
/// outside), so that `r` closes in as fast as `q`. Steps outside the bracket become bisections, and
/// a round that does not halve the bracket adds a bisection, so the search always terminates.
fn boundary(z: &[f64], lam: &[f64], c: f64, side: Side, last_only: bool) -> f64 {
    let (edge, far) = match side {
        Side::Lower => (0.0, 1.0),
        Side::Upper => (1.0, 0.0),
    };
    let e0 = evaluate(z, lam, c, side, edge, last_only);
    if e0.g.is_nan() || e0.g < 0.0 {
        return edge;
    }
    // First accepted point: Newton from the rejected range end overshoots onto the accepted
    // side for a concave decreasing ln K (its tangent lies above it), usually close to the
    // root; the far end (where every factor is ≤ 1, so it is accepted for α < 1) otherwise.
    let (mut r, mut gr) = (edge, e0.g);
    let mut evals = 1;
    let first = edge - e0.g / e0.dg;
    let mut e1 = None;
    if inside(first, edge, far) {
        let e = evaluate(z, lam, c, side, first, last_only);
        evals += 1;
        if e.g >= 0.0 {
            r = first;
            gr = e.g;
        } else {
            e1 = Some((first, e));
        }
    }
    let (mut q, e1) = match e1 {
        Some(v) => v,
        None => {
            evals += 1;
            (far, evaluate(z, lam, c, side, far, last_only))
        }
    };
    if e1.g.is_nan() || e1.g >= 0.0 {
        // Unreachable for α < 1, kept for safety.
        return far;
    }
    let (mut gq, mut dq) = (e1.g, e1.dg);
    let tol = |r: f64, q: f64| 1e-12 * r.abs().max(q.abs()) + 1e-15;
    while evals < MAX_EVALS && (q - r).abs() > tol(r, q) {
        let width = (q - r).abs();
        for step in 0..3 {
            if evals >= MAX_EVALS || (q - r).abs() <= tol(r, q) {
                break;
            }
            let mid = 0.5 * (r + q);
            let x = match step {
                // Newton from the accepted end.
                0 => q - gq / dq,
                // Probe on the rejected side of the root: twice the next Newton correction
                // beyond it, plus a quarter tolerance; else the secant; else the midpoint.
                1 => {
                    let probe = q - 2.0 * gq / dq + 0.25 * tol(r, q) * (r - q).signum();
                    if inside(probe, r, q) {
                        probe
                    } else if gq.is_finite() && gr.is_finite() {
                        r - gr * (q - r) / (gq - gr)
                    } else {
                        mid
                    }
                }
                // Safeguard: a round that did not halve the bracket adds a bisection.
                _ if (q - r).abs() > 0.5 * width => mid,
                _ => break,
            };
            let x = if inside(x, r, q) { x } else { mid };
            let e = evaluate(z, lam, c, side, x, last_only);
            evals += 1;
            if e.g >= 0.0 {
                r = x;
                gr = e.g;
            } else {
                q = x;
                gq = e.g;
                dq = e.dg;
            }
        }
    }
    r
}

/// Whether `x` lies strictly between `r` and `q` (either order).
fn inside(x: f64, r: f64, q: f64) -> bool {
    x.is_finite() && (x - r) * (x - q) < 0.0
}

#[cfg(test)]
mod tests {
    use super::super::fixtures;
    use super::*;

    /// Betting ends against confseq 0.0.11 (`tests/reference/data_interval/betting.json`):
    /// (b) the exact ends (SciPy 1.17.1 brentq on confseq's own `betting_mart` capital
    /// processes, running max over t) to 1e-9 relative and never narrower; (a) inside confseq's
    /// grid `betting_ci(x, alpha, breaks=1000)` (which rounds outward by one grid step) and
    /// within one grid step of it.
    #[test]
    fn matches_confseq_betting_ci() {
        let cases = fixtures::cases();
        assert!(cases.len() >= 50);
        for (i, c) in cases.iter().enumerate() {
            let [l, u] = betting_interval(&c.x, 0.0, 1.0, c.alpha);
            fixtures::assert_outward_close(&format!("case {i} ({})", c.kind), [l, u], c.exact);
            let step = 1.0 / c.breaks + 1e-12;
            let [gl, gu] = c.grid;
            assert!(
                gl <= l + 1e-12 && l - gl <= step,
                "case {i}: L {l} grid {gl}"
            );
            assert!(
                gu >= u - 1e-12 && gu - u <= step,
                "case {i}: U {u} grid {gu}"
            );
        }
    }

    /// The ends are verified points: just inside them the capital stays below 2/α somewhere
    /// close, and the reported end itself is rejected.
    #[test]
    fn ends_are_verified_rejections() {
        let z: Vec<f64> = (0..200).map(|i| ((i * 37) % 101) as f64 / 100.0).collect();
        let alpha = 0.05;
        let lam = predmix_lambdas(&z, 1.0, alpha / 2.0);
        let c = (2.0 / alpha).ln();
        let [l, u] = betting_unit(&z, alpha);
        assert!(evaluate(&z, &lam, c, Side::Lower, l, false).g >= 0.0);
        assert!(evaluate(&z, &lam, c, Side::Upper, u, false).g >= 0.0);
        assert!(evaluate(&z, &lam, c, Side::Lower, l + 1e-9, false).g < 0.0);
        assert!(evaluate(&z, &lam, c, Side::Upper, u - 1e-9, false).g < 0.0);
    }

    /// Timing figures for the report (not asserted): `cargo test --release --lib
    /// bounds::data_interval -- --ignored --nocapture`.
    #[test]
    #[ignore]
    fn speed() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(7);
        for &n in &[50usize, 1000, 10_000] {
            let x: Vec<f64> = (0..n).map(|_| rng.random::<f64>() * 0.3 + 0.2).collect();
            let reps = (200_000 / n).max(5);
            let t0 = std::time::Instant::now();
            let mut acc = 0.0;
            for _ in 0..reps {
                acc += betting_interval(&x, -1.0, 1.0, 0.01)[0];
            }
            let tb = t0.elapsed().as_secs_f64() / reps as f64;
            let t0 = std::time::Instant::now();
            for _ in 0..reps {
                acc += super::super::empirical_bernstein_interval(&x, -1.0, 1.0, 0.01)[0];
            }
            let te = t0.elapsed().as_secs_f64() / reps as f64;
            println!(
                "R = {n}: betting {:.1} µs, empirical Bernstein {:.2} µs ({acc})",
                tb * 1e6,
                te * 1e6
            );
        }
    }
}

//! The cost of a sampling instant for the channel fit: how well the tap window the
//! fit will use holds the sampled response (#15).
//!
//! Takes the training symbols and the configured [`TapSpan`]; gives, for the
//! training-rate samples `z` taken at a candidate instant, the description length
//! `M·ln(RSS/M) + K·ln(M)` of the best model of the span (Rissanen 1978, the form
//! [`super::fit_channel`] uses), all models fitted on the common observation window of
//! the largest one. For a fixed span that is `M·ln(RSS/M)` plus a constant, so the
//! instant of least cost is the one of least least-squares residual over the window:
//! the instant at which the modelled window captures most of the channel's energy.
//! For an automatic span it is the joint choice of instant and tap counts by MDL.
//!
//! The regressor `X` is made of training symbols only, so its Gram matrix `XᴴX` does
//! not depend on the instant: its Cholesky factor is computed once per model
//! ([`WindowCost::new`]), and each candidate instant costs one `Xᴴz` of the largest
//! model (`M·K` products) and one triangular solve per model:
//! `RSS = ‖z‖² − ‖L⁻¹·Xᴴz‖²` with `XᴴX = L·Lᴴ`. Plain linear taps only (no DC, no
//! conjugate taps): a DC or an image adds about the same residual at every instant.
//! `RSS` is floored at `1e-13·‖z‖²` (below the rounding of f32 samples) so that a
//! noise-free capture does not rank instants by rounding noise.
use super::{ChannelError, TapSpan};
use crate::{Cf32, Cf64};

/// One candidate model: `pre`, `post`, and the Cholesky factor of its Gram matrix.
#[derive(Debug, Clone)]
struct Model {
    pre: usize,
    post: usize,
    /// Lower-triangular `L` (row-major, `k×k`), `XᴴX = L·Lᴴ`.
    chol: Vec<Cf64>,
}

/// The cost of a sampling instant (see the module doc); built once per training and span.
#[derive(Debug, Clone)]
pub struct WindowCost {
    training: Vec<Cf64>,
    max_pre: usize,
    max_post: usize,
    models: Vec<Model>,
}

/// The best model at one instant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WindowScore {
    /// Description length `M·ln(RSS/M) + K·ln(M)` (lower is better).
    pub cost: f64,
    /// Residual sum of squares of the winning model on the common window.
    pub rss: f64,
    /// Pre-cursor taps of the winning model.
    pub pre: usize,
    /// Post-cursor taps of the winning model.
    pub post: usize,
}

impl WindowCost {
    /// Prepare the models of `span` for `training`; models whose Gram matrix is not
    /// positive definite or whose condition bound (as in [`super::fit_taps`]) exceeds
    /// `max_condition` are left out.
    ///
    /// # Errors
    /// [`ChannelError::BadConfig`] for a span with `min > max`;
    /// [`ChannelError::TooShort`] when no model leaves an observation more than its
    /// unknowns; [`ChannelError::IllConditioned`] when no model is well conditioned.
    pub fn new(
        training: &[Cf32],
        span: TapSpan,
        max_condition: f64,
    ) -> Result<WindowCost, ChannelError> {
        let (min_pre, max_pre, min_post, max_post) = match span {
            TapSpan::Fixed { pre, post } => (pre, pre, post, post),
            TapSpan::Auto {
                min_pre,
                max_pre,
                min_post,
                max_post,
            } => (min_pre, max_pre, min_post, max_post),
        };
        if min_pre > max_pre || min_post > max_post {
            return Err(ChannelError::BadConfig {
                key: "span",
                expected: "min ≤ max for the pre- and post-cursor counts",
                found: format!("pre {min_pre}..={max_pre}, post {min_post}..={max_post}"),
            });
        }
        let x: Vec<Cf64> = training
            .iter()
            .map(|v| Cf64::new(f64::from(v.re), f64::from(v.im)))
            .collect();
        let n = x.len();
        let (t0, t1) = (max_post, n.saturating_sub(max_pre));
        let m = t1.saturating_sub(t0);
        let kmax = max_pre + max_post + 1;
        if m < min_pre + min_post + 2 {
            return Err(ChannelError::TooShort {
                observations: m,
                unknowns: min_pre + min_post + 1,
            });
        }
        // Gram of the largest model: column c ↔ tap c − max_pre, row t ↔ x[t + max_pre − c].
        let mut g = vec![Cf64::new(0.0, 0.0); kmax * kmax];
        for a in 0..kmax {
            for b in 0..kmax {
                g[a * kmax + b] = (t0..t1)
                    .map(|t| x[t + max_pre - a].conj() * x[t + max_pre - b])
                    .sum();
            }
        }
        let mut models = Vec::new();
        let mut worst = 0.0f64;
        for pre in min_pre..=max_pre {
            for post in min_post..=max_post {
                let k = pre + post + 1;
                if m < k + 1 {
                    continue;
                }
                let a0 = max_pre - pre;
                match cholesky(&g, kmax, a0, k, max_condition) {
                    Ok(chol) => models.push(Model { pre, post, chol }),
                    Err(c) => worst = worst.max(c),
                }
            }
        }
        if models.is_empty() {
            return Err(ChannelError::IllConditioned {
                unknowns: min_pre + min_post + 1,
                condition: worst,
                cap: max_condition,
            });
        }
        Ok(WindowCost {
            training: x,
            max_pre,
            max_post,
            models,
        })
    }

    /// Cost differences below this are not evidence for one alignment of the window
    /// over another: `2·ln M`, the description length of the two taps a one-symbol
    /// move of the window trades (one position in at one end, one out at the other).
    /// A move it forbids gains at most `M·ln(1 + E/σ²) < 2·ln M` of cost, i.e. the
    /// energy `E` it would bring into the window is below `(M^{2/M} − 1)·σ²`
    /// (15 % of the noise at `M = 60`: at most 0.6 dB of output SNR).
    pub fn tolerance(&self) -> f64 {
        2.0 * (self.observations().max(1) as f64).ln()
    }

    /// Observations of the common window (`M`).
    pub fn observations(&self) -> usize {
        self.training
            .len()
            .saturating_sub(self.max_pre)
            .saturating_sub(self.max_post)
    }

    /// The best model for training-rate samples `z` (`z[k]` taken at the instant of
    /// training symbol `k`; `z.len()` must equal the training length, else the cost is
    /// `+∞`). Non-finite samples give `+∞`.
    pub fn score(&self, z: &[Cf32]) -> WindowScore {
        let worst = WindowScore {
            cost: f64::INFINITY,
            rss: f64::INFINITY,
            pre: self.models[0].pre,
            post: self.models[0].post,
        };
        let n = self.training.len();
        if z.len() != n {
            return worst;
        }
        let (t0, t1) = (self.max_post, n - self.max_pre);
        let m = (t1 - t0) as f64;
        let kmax = self.max_pre + self.max_post + 1;
        let zw: Vec<Cf64> = z[t0..t1]
            .iter()
            .map(|v| Cf64::new(f64::from(v.re), f64::from(v.im)))
            .collect();
        let energy: f64 = zw.iter().map(|v| v.norm_sqr()).sum();
        if !energy.is_finite() {
            return worst;
        }
        let floor = (1e-13 * energy).max(f64::MIN_POSITIVE);
        let rhs: Vec<Cf64> = (0..kmax)
            .map(|c| {
                zw.iter()
                    .enumerate()
                    .map(|(r, v)| self.training[t0 + r + self.max_pre - c].conj() * *v)
                    .sum()
            })
            .collect();
        let mut best = worst;
        let mut u = vec![Cf64::new(0.0, 0.0); kmax];
        for md in &self.models {
            let k = md.pre + md.post + 1;
            let a0 = self.max_pre - md.pre;
            // L·u = (Xᴴz) restricted to the model's columns; RSS = ‖z‖² − ‖u‖².
            let mut captured = 0.0;
            for i in 0..k {
                let row = &md.chol[i * k..i * k + i];
                let v = rhs[a0 + i] - row.iter().zip(&u[..i]).map(|(l, x)| l * x).sum::<Cf64>();
                u[i] = v / md.chol[i * k + i].re;
                captured += u[i].norm_sqr();
            }
            let rss = (energy - captured).max(floor);
            let cost = m * (rss / m).ln() + k as f64 * m.ln();
            let better = cost < best.cost - 1e-9
                || ((cost - best.cost).abs() <= 1e-9 && k < best.pre + best.post + 1);
            if better {
                best = WindowScore {
                    cost,
                    rss,
                    pre: md.pre,
                    post: md.post,
                };
            }
        }
        best
    }
}

/// Cholesky factor of the `k×k` block of `g` (`n×n`, row-major) starting at
/// `(a0, a0)`; `Err(condition bound)` when a pivot is not positive or the bound
/// `√(max diag / min pivot²)` exceeds `cap`.
fn cholesky(g: &[Cf64], n: usize, a0: usize, k: usize, cap: f64) -> Result<Vec<Cf64>, f64> {
    let at = |i: usize, j: usize| g[(a0 + i) * n + a0 + j];
    let mut l = vec![Cf64::new(0.0, 0.0); k * k];
    let max_diag = (0..k).map(|j| at(j, j).re).fold(0.0f64, f64::max);
    let mut min_pivot = f64::INFINITY;
    for j in 0..k {
        let mut d = at(j, j).re;
        for p in 0..j {
            d -= l[j * k + p].norm_sqr();
        }
        if d.is_nan() || d <= 0.0 {
            return Err(f64::INFINITY);
        }
        min_pivot = min_pivot.min(d);
        let ljj = d.sqrt();
        l[j * k + j] = Cf64::new(ljj, 0.0);
        for i in j + 1..k {
            let mut v = at(i, j);
            for p in 0..j {
                v -= l[i * k + p] * l[j * k + p].conj();
            }
            l[i * k + j] = v / ljj;
        }
    }
    let bound = (max_diag / min_pivot).sqrt();
    if bound.is_nan() || bound > cap {
        return Err(bound);
    }
    Ok(l)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::channel::{fit_channel, ChannelFitConfig, SpanChoice};

    use crate::testutil::lcg_qpsk;

    fn received(x: &[Cf32], h: &[Cf64], pre: usize, noise: f64, seed: u64) -> Vec<Cf32> {
        let mut s = seed;
        let mut u = || {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((s >> 11) as f64 / (1u64 << 53) as f64) - 0.5
        };
        (0..x.len())
            .map(|k| {
                let mut v = Cf64::new(0.0, 0.0);
                for (c, hc) in h.iter().enumerate() {
                    let j = k as i64 + pre as i64 - c as i64;
                    if j >= 0 && (j as usize) < x.len() {
                        let xj = x[j as usize];
                        v += *hc * Cf64::new(f64::from(xj.re), f64::from(xj.im));
                    }
                }
                v += Cf64::new(u(), u()) * noise;
                Cf32::new(v.re as f32, v.im as f32)
            })
            .collect()
    }

    #[test]
    fn the_cost_is_the_mdl_of_the_qr_fit_on_the_common_window() {
        // Slow reference: `fit_channel` (Householder QR, nalgebra) of the same model on
        // the same window — its MDL score for the automatic span is computed on the
        // common window of the largest model, exactly as here; for a fixed span its
        // RSS = noise_var·(M − K).
        let x = lcg_qpsk(64, 5);
        let h = [
            Cf64::new(0.1, 0.05),
            Cf64::new(1.0, 0.0),
            Cf64::new(0.5, -0.2),
            Cf64::new(0.2, 0.0),
        ];
        let z = received(&x, &h, 1, 0.05, 9);
        let span = TapSpan::Auto {
            min_pre: 0,
            max_pre: 2,
            min_post: 0,
            max_post: 4,
        };
        let w = WindowCost::new(&x, span, 1e3).unwrap();
        let s = w.score(&z);
        let cfg = ChannelFitConfig {
            span,
            ..ChannelFitConfig::default()
        };
        let e = fit_channel(&z, &x, 0, &cfg).unwrap();
        let SpanChoice::Mdl { score } = e.span_choice else {
            panic!("not MDL")
        };
        assert_eq!((s.pre, s.post), (e.pre, e.post));
        assert!((s.cost - score).abs() < 1e-6 * score.abs(), "{s:?} {score}");
        for (pre, post) in [(1, 3), (0, 2), (2, 4)] {
            let fixed = TapSpan::Fixed { pre, post };
            let w = WindowCost::new(&x, fixed, 1e3).unwrap();
            let e = fit_channel(
                &z,
                &x,
                0,
                &ChannelFitConfig {
                    span: fixed,
                    ..ChannelFitConfig::default()
                },
            )
            .unwrap();
            let rss = e.noise_var * (e.observations - e.unknowns) as f64;
            let s = w.score(&z);
            assert!(
                (s.rss - rss).abs() < 1e-9 * rss,
                "{pre}/{post}: {} {rss}",
                s.rss
            );
        }
    }

    #[test]
    fn a_wrong_length_or_non_finite_input_costs_infinity() {
        let x = lcg_qpsk(32, 1);
        let w = WindowCost::new(&x, TapSpan::Fixed { pre: 1, post: 3 }, 1e3).unwrap();
        assert!(w.score(&x[..31]).cost.is_infinite());
        let mut z = x.clone();
        z[10] = Cf32::new(f32::NAN, 0.0);
        assert!(w.score(&z).cost.is_infinite());
        assert!(w.score(&x).cost.is_finite());
    }
}

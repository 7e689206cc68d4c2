//! 2-D linear projections of Gaussians and their probability ellipses.
//!
//! A projection is a 2 × d matrix P with orthonormal rows; a Gaussian N(μ, Σ) maps to
//! N(P μ, P Σ Pᵀ). The ellipse at probability α is μ₂ + r L₂ [cos θ, sin θ]ᵀ with
//! L₂ L₂ᵀ = P Σ Pᵀ and r² = χ²₂⁻¹(α) = −2 ln(1 − α). Definitions of the PCA, dimension and
//! contrast axes and check values: `docs/maths.md` §10.

use nalgebra::{DMatrix, DVector};

use super::gaussian::{CovView, GaussianView, chi2_quantile};

/// A 2-D Gaussian: mean and symmetric 2 × 2 covariance `[[a, b], [b, c]]`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gaussian2 {
    /// Projected mean.
    pub mean: [f64; 2],
    /// Projected covariance, row-major.
    pub cov: [[f64; 2]; 2],
}

/// A 2 × d projection with orthonormal rows, plus how much of the shown spread each axis
/// explains.
#[derive(Debug, Clone, PartialEq)]
pub struct Projection {
    /// The two axes (each of length d, unit norm).
    pub axes: [Vec<f64>; 2],
    /// Share of the total variance of the shown distributions (spread of the means plus
    /// their average covariance) along each axis, in [0, 1].
    pub explained: [f64; 2],
    /// A short description ("PCA", "dims 3 / 7", "contrast").
    pub name: String,
}

/// Project a Gaussian with P (2 × d).
pub fn project(g: &GaussianView, axes: &[Vec<f64>; 2]) -> Gaussian2 {
    let d = g.dim();
    let mean = [0, 1].map(|i| {
        axes[i]
            .iter()
            .zip(g.mean)
            .map(|(&a, &m)| a * m as f64)
            .sum()
    });
    let cov = match g.cov {
        CovView::Diag(v) => {
            let mut c = [[0.0; 2]; 2];
            for k in 0..d {
                let s = v[k] as f64;
                c[0][0] += axes[0][k] * axes[0][k] * s;
                c[0][1] += axes[0][k] * axes[1][k] * s;
                c[1][1] += axes[1][k] * axes[1][k] * s;
            }
            c[1][0] = c[0][1];
            c
        }
        CovView::Full(l) => {
            // (P L)(P L)ᵀ
            let mut pl = [vec![0.0; d], vec![0.0; d]];
            for (i, row) in pl.iter_mut().enumerate() {
                for (j, out) in row.iter_mut().enumerate() {
                    *out = (j..d).map(|k| axes[i][k] * l[k * d + j]).sum();
                }
            }
            let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
            let b = dot(&pl[0], &pl[1]);
            [[dot(&pl[0], &pl[0]), b], [b, dot(&pl[1], &pl[1])]]
        }
    };
    Gaussian2 { mean, cov }
}

impl Gaussian2 {
    /// Outline of the ellipse holding probability `alpha`, as `points` points (closed: the
    /// last equals the first).
    pub fn ellipse(&self, alpha: f64, points: usize) -> Vec<[f64; 2]> {
        let r = chi2_quantile(2, alpha).sqrt();
        let [[a, b], [_, c]] = self.cov;
        // 2 × 2 Cholesky
        let l11 = a.max(1e-300).sqrt();
        let l21 = b / l11;
        let l22 = (c - l21 * l21).max(0.0).sqrt();
        let n = points.max(3);
        (0..n)
            .map(|i| {
                let t = std::f64::consts::TAU * i as f64 / (n - 1) as f64;
                let (s, co) = t.sin_cos();
                [
                    self.mean[0] + r * l11 * co,
                    self.mean[1] + r * (l21 * co + l22 * s),
                ]
            })
            .collect()
    }

    /// Squared Mahalanobis distance of a 2-D point.
    pub fn mahalanobis2(&self, x: [f64; 2]) -> f64 {
        let [[a, b], [_, c]] = self.cov;
        let det = a * c - b * b;
        let (dx, dy) = (x[0] - self.mean[0], x[1] - self.mean[1]);
        (c * dx * dx - 2.0 * b * dx * dy + a * dy * dy) / det
    }
}

/// Probability that the ellipse of a 2-D Mahalanobis radius r holds: 1 − e^(−r²/2).
pub fn mass_within_radius_2d(r: f64) -> f64 {
    1.0 - (-0.5 * r * r).exp()
}

/// Probabilities whose 2-D ellipses have Mahalanobis radius 1, 2 and 3 ("1σ/2σ/3σ").
pub fn sigma_levels() -> [f64; 3] {
    [1.0, 2.0, 3.0].map(mass_within_radius_2d)
}

fn total_scatter(gs: &[GaussianView]) -> DMatrix<f64> {
    let d = gs[0].dim();
    let n = gs.len() as f64;
    let mut mean = DVector::<f64>::zeros(d);
    for g in gs {
        for k in 0..d {
            mean[k] += g.mean[k] as f64 / n;
        }
    }
    let mut s = DMatrix::<f64>::zeros(d, d);
    for g in gs {
        let diff = DVector::from_iterator(d, (0..d).map(|k| g.mean[k] as f64 - mean[k]));
        s += &diff * diff.transpose() / n;
        s += g.cov_matrix() / n;
    }
    s
}

fn explained(scatter: &DMatrix<f64>, axes: &[Vec<f64>; 2]) -> [f64; 2] {
    let total = scatter.trace().max(1e-300);
    axes.clone().map(|a| {
        let v = DVector::from_vec(a);
        ((v.transpose() * scatter * &v)[(0, 0)] / total).clamp(0.0, 1.0)
    })
}

fn top_eigvecs(m: &DMatrix<f64>, count: usize) -> Vec<Vec<f64>> {
    let eig = m.clone().symmetric_eigen();
    let mut idx: Vec<usize> = (0..eig.eigenvalues.len()).collect();
    idx.sort_by(|&a, &b| {
        eig.eigenvalues[b]
            .total_cmp(&eig.eigenvalues[a])
            .then(a.cmp(&b))
    });
    idx.into_iter()
        .take(count)
        .map(|i| {
            let mut v: Vec<f64> = eig.eigenvectors.column(i).iter().copied().collect();
            // fix the sign so the largest component is positive (stable across runs)
            let big = v
                .iter()
                .copied()
                .fold(0.0f64, |acc, x| if x.abs() > acc.abs() { x } else { acc });
            if big < 0.0 {
                v.iter_mut().for_each(|x| *x = -*x);
            }
            v
        })
        .collect()
}

fn unit(d: usize, k: usize) -> Vec<f64> {
    let mut v = vec![0.0; d];
    v[k] = 1.0;
    v
}

/// PCA of the shown distributions (scatter of the means plus the average covariance).
/// With one distribution only its covariance shapes the axes.
pub fn pca(gs: &[GaussianView]) -> Option<Projection> {
    let d = gs.first()?.dim();
    if d == 1 {
        return None;
    }
    let s = total_scatter(gs);
    let v = top_eigvecs(&s, 2);
    let axes = [v[0].clone(), v[1].clone()];
    Some(Projection {
        explained: explained(&s, &axes),
        axes,
        name: "PCA".into(),
    })
}

/// Two coordinate axes.
pub fn dimensions(gs: &[GaussianView], a: usize, b: usize) -> Option<Projection> {
    let d = gs.first()?.dim();
    if a >= d || b >= d || a == b {
        return None;
    }
    let axes = [unit(d, a), unit(d, b)];
    Some(Projection {
        explained: explained(&total_scatter(gs), &axes),
        axes,
        name: format!("dims {a} / {b}"),
    })
}

/// A contrast axis through the means of `from` and `to`, plus the orthogonal axis that
/// explains most of the remaining spread of `gs`.
pub fn contrast(gs: &[GaussianView], from: &GaussianView, to: &GaussianView) -> Option<Projection> {
    let d = from.dim();
    if d < 2 {
        return None;
    }
    let mut a: Vec<f64> = (0..d)
        .map(|k| to.mean[k] as f64 - from.mean[k] as f64)
        .collect();
    let norm = a.iter().map(|x| x * x).sum::<f64>().sqrt();
    if norm < 1e-12 {
        return None;
    }
    a.iter_mut().for_each(|x| *x /= norm);
    let s = total_scatter(gs);
    // deflate the scatter along a: (I − aaᵀ) S (I − aaᵀ)
    let av = DVector::from_vec(a.clone());
    let proj = DMatrix::<f64>::identity(d, d) - &av * av.transpose();
    let deflated = &proj * &s * &proj;
    let mut b = top_eigvecs(&deflated, 1).remove(0);
    // re-orthogonalise against a for numerical safety
    let dot: f64 = b.iter().zip(&a).map(|(x, y)| x * y).sum();
    b.iter_mut().zip(&a).for_each(|(x, y)| *x -= dot * y);
    let bn = b.iter().map(|x| x * x).sum::<f64>().sqrt();
    if bn < 1e-12 {
        // every spread is along a: take any orthogonal axis
        let k = if a[0].abs() < 0.9 { 0 } else { 1 };
        b = unit(d, k);
        let dot = a[k];
        b.iter_mut().zip(&a).for_each(|(x, y)| *x -= dot * y);
        let bn = b.iter().map(|x| x * x).sum::<f64>().sqrt();
        b.iter_mut().for_each(|x| *x /= bn);
    } else {
        b.iter_mut().for_each(|x| *x /= bn);
    }
    let axes = [a, b];
    Some(Projection {
        explained: explained(&s, &axes),
        axes,
        name: "contrast".into(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::gaussian::OwnedGaussian;

    fn close(a: f64, b: f64, tol: f64) {
        assert!((a - b).abs() <= tol, "{a} vs {b}");
    }

    #[test]
    fn chi_square_two_dof_mass_table() {
        // Closed form of the chi-square distribution with 2 degrees of freedom,
        // P(χ²₂ ≤ r²) = 1 − e^(−r²/2) (closed form derived in docs/maths.md §8, values
        // recomputed there with SciPy): 0.3935 at r = 1, 0.8647 at r = 2, 0.9889 at r = 3.
        let [a, b, c] = sigma_levels();
        close(a, 0.3935, 5e-5);
        close(b, 0.8647, 5e-5);
        close(c, 0.9889, 5e-5);
        // and the ellipse radius recovers r
        for r in [1.0f64, 2.0, 3.0] {
            close(chi2_quantile(2, mass_within_radius_2d(r)).sqrt(), r, 1e-9);
        }
    }

    #[test]
    fn projection_of_full_matches_p_sigma_pt() {
        let cov = [2.0, 0.3, 0.1, 0.3, 1.0, -0.2, 0.1, -0.2, 0.5];
        let g = OwnedGaussian::full(&[1.0, 2.0, 3.0], &cov).unwrap();
        let s = std::f64::consts::FRAC_1_SQRT_2;
        let axes = [vec![s, s, 0.0], vec![0.0, 0.0, 1.0]];
        let p = project(&g.view(), &axes);
        close(p.mean[0], 3.0 * s, 1e-6);
        close(p.mean[1], 3.0, 1e-6);
        // N(μ, Σ) maps to N(Pμ, PΣPᵀ) (Johnson & Wichern 2007, Result 4.3). P Σ Pᵀ by hand:
        // [0][0] = ½(2 + 2·0.3 + 1) = 1.8; [0][1] = s(0.1 − 0.2); [1][1] = 0.5
        // (recomputed with NumPy in docs/maths.md §10)
        close(p.cov[0][0], 1.8, 1e-9);
        close(p.cov[0][1], s * (0.1 - 0.2), 1e-9);
        close(p.cov[1][1], 0.5, 1e-9);
        // diagonal path agrees with the full path on diagonal input
        let gd = OwnedGaussian::diagonal(&[1.0, 2.0, 3.0], &[2.0, 1.0, 0.5]).unwrap();
        let gf = OwnedGaussian::full(&[1.0, 2.0, 3.0], &[2.0, 0., 0., 0., 1.0, 0., 0., 0., 0.5])
            .unwrap();
        let (a, b) = (project(&gd.view(), &axes), project(&gf.view(), &axes));
        for i in 0..2 {
            for j in 0..2 {
                close(a.cov[i][j], b.cov[i][j], 1e-9);
            }
        }
    }

    #[test]
    fn ellipse_points_sit_on_the_level_set() {
        let g = Gaussian2 {
            mean: [1.0, -1.0],
            cov: [[2.0, 0.6], [0.6, 1.0]],
        };
        let r2 = chi2_quantile(2, 0.95);
        close(r2, 5.991, 5e-4); // NIST/SEMATECH e-Handbook §1.3.6.7.4, 2 d.o.f., 0.95
        for p in g.ellipse(0.95, 64) {
            close(g.mahalanobis2(p), r2, 1e-9);
        }
    }

    #[test]
    fn pca_finds_the_spread_direction() {
        let a = OwnedGaussian::diagonal(&[0.0, 0.0, 0.0], &[0.01, 0.01, 0.01]).unwrap();
        let b = OwnedGaussian::diagonal(&[0.0, 10.0, 0.0], &[0.01, 0.01, 0.01]).unwrap();
        let views = [a.view(), b.view()];
        let p = pca(&views).unwrap();
        close(p.axes[0][1].abs(), 1.0, 1e-9);
        assert!(p.explained[0] > 0.99);
        let c = contrast(&views, &views[0], &views[1]).unwrap();
        close(c.axes[0][1], 1.0, 1e-12);
        let dot: f64 = c.axes[0].iter().zip(&c.axes[1]).map(|(x, y)| x * y).sum();
        close(dot, 0.0, 1e-12);
        let d = dimensions(&views, 1, 2).unwrap();
        assert!(d.explained[0] > 0.99);
    }
}

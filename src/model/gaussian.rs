//! Phrase Gaussians N(μ, Σ) and the distributional quantities between them.
//!
//! Storage is structure-of-arrays: means (and, for diagonal covariance, variances) are
//! contiguous `f32` rows of an `n × d` table; full covariances are kept as lower Cholesky
//! factors in `f64`. Every formula is evaluated in `f64` and in log space; `docs/maths.md`
//! defines each one (sections 2–9) with its published source and check values. A covariance
//! that is not positive definite is an error naming the row, never a NaN.

use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// ln(2π).
pub const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// Index of a phrase in the phrase table (row of every embedding array).
///
/// Only used in memory; files always store the stable string id.
pub type PhraseId = u32;

/// Whether each phrase has a diagonal or a full covariance matrix.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CovarianceKind {
    /// Σ = diag(σ²₁ … σ²_d).
    Diagonal,
    /// A dense symmetric positive-definite d × d matrix.
    Full,
}

impl CovarianceKind {
    /// The name used in files and reports (`diagonal` or `full`).
    pub fn as_str(self) -> &'static str {
        match self {
            CovarianceKind::Diagonal => "diagonal",
            CovarianceKind::Full => "full",
        }
    }
}

/// What went wrong while building or evaluating Gaussians. Rows are 0-based.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GaussError {
    /// A mean, variance or covariance entry is NaN or infinite.
    #[error("row {row}: {what}[{col}] is {value}, not a finite number")]
    NonFinite {
        /// Row (phrase index).
        row: usize,
        /// Column (dimension) or flattened matrix index.
        col: usize,
        /// Which array ("mean", "variance", "covariance").
        what: &'static str,
        /// The offending value.
        value: f64,
    },
    /// A variance is zero or negative.
    #[error("row {row}: variance[{col}] is {value}; variances must be > 0")]
    NonPositiveVariance {
        /// Row (phrase index).
        row: usize,
        /// Dimension.
        col: usize,
        /// The offending value.
        value: f64,
    },
    /// A full covariance matrix is not symmetric positive definite.
    #[error("row {row}: covariance is not symmetric positive definite ({detail})")]
    NotPositiveDefinite {
        /// Row (phrase index).
        row: usize,
        /// What failed (asymmetry, failed Cholesky pivot, ...).
        detail: String,
    },
    /// Array shapes disagree.
    #[error("shape mismatch: {0}")]
    Shape(String),
}

/// A borrowed view of one Gaussian from a [`Gaussians`] table (or an owned one).
#[derive(Debug, Clone, Copy)]
pub struct GaussianView<'a> {
    /// The mean μ (length d).
    pub mean: &'a [f32],
    /// The covariance.
    pub cov: CovView<'a>,
    /// ln det Σ, precomputed in f64.
    pub log_det: f64,
}

/// The covariance part of a [`GaussianView`].
#[derive(Debug, Clone, Copy)]
pub enum CovView<'a> {
    /// Diagonal variances σ²ₖ (length d).
    Diag(&'a [f32]),
    /// Lower Cholesky factor L of Σ = L Lᵀ, row-major d × d.
    Full(&'a [f64]),
}

impl GaussianView<'_> {
    /// Dimension d.
    pub fn dim(&self) -> usize {
        self.mean.len()
    }

    /// Differential entropy ½ d (1 + ln 2π) + ½ ln det Σ.
    pub fn entropy(&self) -> f64 {
        entropy_from_log_det(self.dim(), self.log_det)
    }

    /// Variance of dimension k (Σₖₖ).
    pub fn variance(&self, k: usize) -> f64 {
        match self.cov {
            CovView::Diag(v) => v[k] as f64,
            CovView::Full(l) => {
                let d = self.dim();
                (0..=k).map(|j| l[k * d + j] * l[k * d + j]).sum()
            }
        }
    }

    /// Σ as a dense matrix.
    pub fn cov_matrix(&self) -> DMatrix<f64> {
        let d = self.dim();
        match self.cov {
            CovView::Diag(v) => {
                DMatrix::from_diagonal(&DVector::from_iterator(d, v.iter().map(|&x| x as f64)))
            }
            CovView::Full(_) => {
                let l = self.chol_matrix();
                &l * l.transpose()
            }
        }
    }

    /// The lower Cholesky factor L (diagonal: diag(σ)).
    pub fn chol_matrix(&self) -> DMatrix<f64> {
        let d = self.dim();
        match self.cov {
            CovView::Diag(v) => DMatrix::from_diagonal(&DVector::from_iterator(
                d,
                v.iter().map(|&x| (x as f64).sqrt()),
            )),
            CovView::Full(l) => DMatrix::from_row_slice(d, d, l),
        }
    }

    fn mean_vec(&self) -> DVector<f64> {
        DVector::from_iterator(self.dim(), self.mean.iter().map(|&x| x as f64))
    }
}

/// Entropy of a d-dimensional Gaussian from its ln det Σ.
pub fn entropy_from_log_det(d: usize, log_det: f64) -> f64 {
    0.5 * d as f64 * (1.0 + LN_2PI) + 0.5 * log_det
}

/// A table of n Gaussians in d dimensions, shared read-only by every view.
#[derive(Debug, Clone, PartialEq)]
pub struct Gaussians {
    n: usize,
    d: usize,
    kind: CovarianceKind,
    means: Vec<f32>,
    /// Diagonal of Σ for every row (both kinds): used for features and projections.
    variances: Vec<f32>,
    /// Lower Cholesky factors, n × d × d, only for full covariance.
    chol: Vec<f64>,
    log_det: Vec<f64>,
}

/// Default variance floor (variances below it are raised to it).
pub const DEFAULT_VARIANCE_FLOOR: f64 = 1e-6;

impl Gaussians {
    /// Diagonal Gaussians from row-major `n × d` means and variances.
    ///
    /// Variances must be finite and > 0; values below `floor` are raised to `floor`.
    pub fn from_diagonal(
        n: usize,
        d: usize,
        means: Vec<f64>,
        variances: Vec<f64>,
        floor: f64,
    ) -> Result<Self, GaussError> {
        check_len("means", &means, n * d)?;
        check_len("variances", &variances, n * d)?;
        check_finite(&means, d, "mean")?;
        check_finite(&variances, d, "variance")?;
        let mut log_det = Vec::with_capacity(n);
        let mut var32 = Vec::with_capacity(n * d);
        for row in 0..n {
            let mut ld = 0.0;
            for col in 0..d {
                let v = variances[row * d + col];
                if v <= 0.0 {
                    return Err(GaussError::NonPositiveVariance { row, col, value: v });
                }
                let v = v.max(floor);
                let v32 = v as f32;
                // the stored f32 is what every later formula sees; log det must agree with it
                ld += (v32 as f64).ln();
                var32.push(v32);
            }
            log_det.push(ld);
        }
        Ok(Gaussians {
            n,
            d,
            kind: CovarianceKind::Diagonal,
            means: means.iter().map(|&x| x as f32).collect(),
            variances: var32,
            chol: Vec::new(),
            log_det,
        })
    }

    /// Diagonal Gaussians from `f32` rows, stored without a copy (the common case of float32
    /// `.npy` files). Same checks and floor as [`Gaussians::from_diagonal`].
    pub fn from_diagonal_f32(
        n: usize,
        d: usize,
        means: Vec<f32>,
        mut variances: Vec<f32>,
        floor: f64,
    ) -> Result<Self, GaussError> {
        for (what, v) in [("means", &means), ("variances", &variances)] {
            if v.len() != n * d {
                return Err(GaussError::Shape(format!(
                    "{what} has {} values, expected {}",
                    v.len(),
                    n * d
                )));
            }
        }
        for (what, v) in [("mean", &means), ("variance", &variances)] {
            if let Some((idx, &value)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
                return Err(GaussError::NonFinite {
                    row: idx / d.max(1),
                    col: idx % d.max(1),
                    what,
                    value: value as f64,
                });
            }
        }
        let floor32 = floor as f32;
        // the first non-positive variance (row order) is the error; then each row is floored
        // and summed on the worker threads (rows are independent: same values as one loop)
        if let Some(idx) = variances.par_iter().position_first(|&v| v <= 0.0) {
            return Err(GaussError::NonPositiveVariance {
                row: idx / d,
                col: idx % d,
                value: variances[idx] as f64,
            });
        }
        let log_det: Vec<f64> = if d == 0 {
            vec![0.0; n]
        } else {
            variances
                .par_chunks_mut(d)
                .map(|row| {
                    let mut ld = 0.0;
                    for v in row.iter_mut() {
                        if (*v as f64) < floor {
                            *v = floor32;
                        }
                        ld += (*v as f64).ln();
                    }
                    ld
                })
                .collect()
        };
        Ok(Gaussians {
            n,
            d,
            kind: CovarianceKind::Diagonal,
            means,
            variances,
            chol: Vec::new(),
            log_det,
        })
    }

    /// Full-covariance Gaussians from row-major means (`n × d`) and covariances (`n × d × d`).
    ///
    /// Each matrix must be symmetric (to a relative 1e-6) and positive definite. Diagonal
    /// entries below `floor` are raised to `floor` before factorising.
    pub fn from_full(
        n: usize,
        d: usize,
        means: Vec<f64>,
        mut covariances: Vec<f64>,
        floor: f64,
    ) -> Result<Self, GaussError> {
        check_len("means", &means, n * d)?;
        check_len("covariances", &covariances, n * d * d)?;
        check_finite(&means, d, "mean")?;
        check_finite(&covariances, d * d, "covariance")?;
        // each block is replaced by its Cholesky factor in place, so loading holds one
        // n × d × d buffer rather than the covariances and the factors side by side
        let mut variances = Vec::with_capacity(n * d);
        let mut log_det = Vec::with_capacity(n);
        for row in 0..n {
            let block = &covariances[row * d * d..(row + 1) * d * d];
            let mut m = DMatrix::from_row_slice(d, d, block);
            for i in 0..d {
                for j in 0..i {
                    let (a, b) = (m[(i, j)], m[(j, i)]);
                    let scale = a.abs().max(b.abs()).max(1e-300);
                    if (a - b).abs() > 1e-6 * scale {
                        return Err(GaussError::NotPositiveDefinite {
                            row,
                            detail: format!("entry ({i},{j}) = {a} but ({j},{i}) = {b}"),
                        });
                    }
                    let s = 0.5 * (a + b);
                    m[(i, j)] = s;
                    m[(j, i)] = s;
                }
                if m[(i, i)] <= 0.0 {
                    return Err(GaussError::NotPositiveDefinite {
                        row,
                        detail: format!("diagonal entry {i} is {}", m[(i, i)]),
                    });
                }
                if m[(i, i)] < floor {
                    m[(i, i)] = floor;
                }
            }
            let l = cholesky(&m).map_err(|pivot| GaussError::NotPositiveDefinite {
                row,
                detail: format!("Cholesky pivot {pivot} is not positive"),
            })?;
            let mut ld = 0.0;
            let out = &mut covariances[row * d * d..(row + 1) * d * d];
            for i in 0..d {
                ld += 2.0 * l[(i, i)].ln();
                variances.push(m[(i, i)] as f32);
                for j in 0..d {
                    out[i * d + j] = l[(i, j)];
                }
            }
            log_det.push(ld);
        }
        Ok(Gaussians {
            n,
            d,
            kind: CovarianceKind::Full,
            means: means.iter().map(|&x| x as f32).collect(),
            variances,
            chol: covariances,
            log_det,
        })
    }

    /// Number of Gaussians.
    pub fn len(&self) -> usize {
        self.n
    }

    /// True when the table holds no Gaussian.
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    /// Dimension d.
    pub fn dim(&self) -> usize {
        self.d
    }

    /// Covariance kind.
    pub fn kind(&self) -> CovarianceKind {
        self.kind
    }

    /// Mean of row i.
    pub fn mean(&self, i: usize) -> &[f32] {
        &self.means[i * self.d..(i + 1) * self.d]
    }

    /// Diagonal of Σ for row i.
    pub fn variances(&self, i: usize) -> &[f32] {
        &self.variances[i * self.d..(i + 1) * self.d]
    }

    /// All means, row-major n × d.
    pub fn means_flat(&self) -> &[f32] {
        &self.means
    }

    /// ln det Σ of row i (the phrase's generality).
    pub fn log_det(&self, i: usize) -> f64 {
        self.log_det[i]
    }

    /// ln det Σ of every row.
    pub fn log_dets(&self) -> &[f64] {
        &self.log_det
    }

    /// Differential entropy of row i.
    pub fn entropy(&self, i: usize) -> f64 {
        entropy_from_log_det(self.d, self.log_det[i])
    }

    /// A view of row i.
    pub fn get(&self, i: usize) -> GaussianView<'_> {
        let d = self.d;
        let cov = match self.kind {
            CovarianceKind::Diagonal => CovView::Diag(&self.variances[i * d..(i + 1) * d]),
            CovarianceKind::Full => CovView::Full(&self.chol[i * d * d..(i + 1) * d * d]),
        };
        GaussianView {
            mean: self.mean(i),
            cov,
            log_det: self.log_det[i],
        }
    }

    /// Bytes held by the embedding arrays (for memory reports).
    pub fn heap_bytes(&self) -> usize {
        self.means.len() * 4
            + self.variances.len() * 4
            + self.chol.len() * 8
            + self.log_det.len() * 8
    }
}

fn check_len(what: &str, v: &[f64], want: usize) -> Result<(), GaussError> {
    if v.len() != want {
        return Err(GaussError::Shape(format!(
            "{what} has {} values, expected {want}",
            v.len()
        )));
    }
    Ok(())
}

fn check_finite(v: &[f64], row_len: usize, what: &'static str) -> Result<(), GaussError> {
    if let Some((idx, &value)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        let row_len = row_len.max(1);
        return Err(GaussError::NonFinite {
            row: idx / row_len,
            col: idx % row_len,
            what,
            value,
        });
    }
    Ok(())
}

/// Cholesky factor of a symmetric matrix; `Err(pivot)` names the first non-positive pivot.
fn cholesky(m: &DMatrix<f64>) -> Result<DMatrix<f64>, usize> {
    let d = m.nrows();
    let mut l = DMatrix::<f64>::zeros(d, d);
    for j in 0..d {
        let mut s = m[(j, j)];
        for k in 0..j {
            s -= l[(j, k)] * l[(j, k)];
        }
        if s <= 0.0 || !s.is_finite() {
            return Err(j);
        }
        let ljj = s.sqrt();
        l[(j, j)] = ljj;
        for i in (j + 1)..d {
            let mut s = m[(i, j)];
            for k in 0..j {
                s -= l[(i, k)] * l[(j, k)];
            }
            l[(i, j)] = s / ljj;
        }
    }
    Ok(l)
}

fn log_det_chol(l: &DMatrix<f64>) -> f64 {
    (0..l.nrows()).map(|i| 2.0 * l[(i, i)].ln()).sum()
}

/// Squared Mahalanobis distance of `x` under `q`: (x − μq)ᵀ Σq⁻¹ (x − μq).
pub fn mahalanobis2(x: &[f64], q: &GaussianView) -> f64 {
    match q.cov {
        CovView::Diag(v) => x
            .iter()
            .zip(q.mean)
            .zip(v)
            .map(|((&xi, &m), &s)| {
                let d = xi - m as f64;
                d * d / s as f64
            })
            .sum(),
        CovView::Full(_) => {
            let l = q.chol_matrix();
            let diff = DVector::from_iterator(
                x.len(),
                x.iter().zip(q.mean).map(|(&xi, &m)| xi - m as f64),
            );
            solve_lower(&l, &diff).norm_squared()
        }
    }
}

fn solve_lower(l: &DMatrix<f64>, b: &DVector<f64>) -> DVector<f64> {
    l.solve_lower_triangular(b)
        .expect("Cholesky factors have a positive diagonal")
}

fn both_diag<'a>(p: &GaussianView<'a>, q: &GaussianView<'a>) -> Option<(&'a [f32], &'a [f32])> {
    match (p.cov, q.cov) {
        (CovView::Diag(a), CovView::Diag(b)) => Some((a, b)),
        _ => None,
    }
}

/// Kullback–Leibler divergence KL(p ‖ q) in nats.
pub fn kl(p: &GaussianView, q: &GaussianView) -> f64 {
    let d = p.dim() as f64;
    if let Some((vp, vq)) = both_diag(p, q) {
        let mut s = 0.0;
        for k in 0..p.dim() {
            let (sp, sq) = (vp[k] as f64, vq[k] as f64);
            let delta = q.mean[k] as f64 - p.mean[k] as f64;
            s += sp / sq + delta * delta / sq;
        }
        return 0.5 * (s - d + q.log_det - p.log_det);
    }
    let lp = p.chol_matrix();
    let lq = q.chol_matrix();
    let a = lq
        .solve_lower_triangular(&lp)
        .expect("Cholesky factors have a positive diagonal");
    let trace = a.norm_squared();
    let delta = q.mean_vec() - p.mean_vec();
    let maha = solve_lower(&lq, &delta).norm_squared();
    0.5 * (trace + maha - d + q.log_det - p.log_det)
}

/// Symmetric KL divergence KL(p ‖ q) + KL(q ‖ p).
pub fn sym_kl(p: &GaussianView, q: &GaussianView) -> f64 {
    kl(p, q) + kl(q, p)
}

/// Bhattacharyya distance D_B(p, q) ≥ 0.
pub fn bhattacharyya_distance(p: &GaussianView, q: &GaussianView) -> f64 {
    if let Some((vp, vq)) = both_diag(p, q) {
        let mut s = 0.0;
        for k in 0..p.dim() {
            let (sp, sq) = (vp[k] as f64, vq[k] as f64);
            let bar = 0.5 * (sp + sq);
            let delta = p.mean[k] as f64 - q.mean[k] as f64;
            s += delta * delta / (8.0 * bar) + 0.5 * bar.ln();
        }
        return (s - 0.25 * p.log_det - 0.25 * q.log_det).max(0.0);
    }
    let bar = (p.cov_matrix() + q.cov_matrix()) * 0.5;
    let l = cholesky(&bar).expect("the mean of two SPD matrices is SPD");
    let delta = p.mean_vec() - q.mean_vec();
    let maha = solve_lower(&l, &delta).norm_squared();
    (maha / 8.0 + 0.5 * (log_det_chol(&l) - 0.5 * p.log_det - 0.5 * q.log_det)).max(0.0)
}

/// Bhattacharyya coefficient BC = exp(−D_B) ∈ (0, 1].
pub fn bhattacharyya_coefficient(p: &GaussianView, q: &GaussianView) -> f64 {
    (-bhattacharyya_distance(p, q)).exp()
}

/// Hellinger distance H = √(1 − BC) ∈ [0, 1).
pub fn hellinger(p: &GaussianView, q: &GaussianView) -> f64 {
    (1.0 - bhattacharyya_coefficient(p, q)).max(0.0).sqrt()
}

/// Log expected-likelihood (probability product) kernel ln ∫ p(x) q(x) dx.
pub fn log_expected_likelihood(p: &GaussianView, q: &GaussianView) -> f64 {
    let d = p.dim() as f64;
    if let Some((vp, vq)) = both_diag(p, q) {
        let mut s = 0.0;
        for k in 0..p.dim() {
            let sum = vp[k] as f64 + vq[k] as f64;
            let delta = p.mean[k] as f64 - q.mean[k] as f64;
            s += sum.ln() + delta * delta / sum;
        }
        return -0.5 * (d * LN_2PI + s);
    }
    let sum = p.cov_matrix() + q.cov_matrix();
    let l = cholesky(&sum).expect("the sum of two SPD matrices is SPD");
    let delta = p.mean_vec() - q.mean_vec();
    let maha = solve_lower(&l, &delta).norm_squared();
    -0.5 * (d * LN_2PI + log_det_chol(&l) + maha)
}

/// 2-Wasserstein distance W₂(p, q) (not squared).
pub fn wasserstein2(p: &GaussianView, q: &GaussianView) -> f64 {
    let delta2: f64 = p
        .mean
        .iter()
        .zip(q.mean)
        .map(|(&a, &b)| (a as f64 - b as f64).powi(2))
        .sum();
    if let Some((vp, vq)) = both_diag(p, q) {
        let s: f64 = vp
            .iter()
            .zip(vq)
            .map(|(&a, &b)| ((a as f64).sqrt() - (b as f64).sqrt()).powi(2))
            .sum();
        return (delta2 + s).sqrt();
    }
    let sp = p.cov_matrix();
    let sq = q.cov_matrix();
    let root_q = sym_sqrt(&sq);
    let m = &root_q * &sp * &root_q;
    let m = (&m + m.transpose()) * 0.5;
    let tr_root: f64 = m
        .symmetric_eigenvalues()
        .iter()
        .map(|&e| e.max(0.0).sqrt())
        .sum();
    (delta2 + sp.trace() + sq.trace() - 2.0 * tr_root)
        .max(0.0)
        .sqrt()
}

/// Principal square root of a symmetric positive semi-definite matrix.
fn sym_sqrt(m: &DMatrix<f64>) -> DMatrix<f64> {
    let eig = m.clone().symmetric_eigen();
    let root = eig.eigenvalues.map(|e| e.max(0.0).sqrt());
    &eig.eigenvectors * DMatrix::from_diagonal(&root) * eig.eigenvectors.transpose()
}

/// The similarity measures a builder or a ranking may use between two phrases.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Similarity {
    /// Log expected-likelihood kernel (higher = more similar).
    #[default]
    Elk,
    /// Bhattacharyya coefficient.
    Bhattacharyya,
    /// Negative symmetric KL divergence.
    Kl,
}

impl Similarity {
    /// Similarity of p and q under this measure (higher is more similar).
    pub fn score(self, p: &GaussianView, q: &GaussianView) -> f64 {
        match self {
            Similarity::Elk => log_expected_likelihood(p, q),
            Similarity::Bhattacharyya => bhattacharyya_coefficient(p, q),
            Similarity::Kl => -sym_kl(p, q),
        }
    }

    /// The name used on the command line and in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            Similarity::Elk => "elk",
            Similarity::Bhattacharyya => "bhattacharyya",
            Similarity::Kl => "kl",
        }
    }
}

/// Quantile χ²_dof⁻¹(prob) of the chi-square distribution.
///
/// Closed form for 2 degrees of freedom (−2 ln(1 − prob)); otherwise statrs.
pub fn chi2_quantile(dof: usize, prob: f64) -> f64 {
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    assert!(dof >= 1, "chi-square needs at least one degree of freedom");
    let prob = prob.clamp(0.0, 1.0 - 1e-15);
    if dof == 2 {
        return -2.0 * (1.0 - prob).ln();
    }
    ChiSquared::new(dof as f64)
        .expect("dof >= 1")
        .inverse_cdf(prob)
}

/// A sampled probability with its standard error.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Sampled {
    /// The estimated share c ∈ [0, 1].
    pub value: f64,
    /// Standard error √(c (1 − c) / N).
    pub std_error: f64,
    /// Number of samples N.
    pub samples: usize,
}

impl Sampled {
    fn from_count(hits: usize, samples: usize) -> Self {
        let c = hits as f64 / samples.max(1) as f64;
        Sampled {
            value: c,
            std_error: (c * (1.0 - c) / samples.max(1) as f64).sqrt(),
            samples,
        }
    }
}

/// Draw `samples` points from `p` with a fixed seed, calling `f` with each point.
pub fn sample_points(p: &GaussianView, samples: usize, seed: u64, mut f: impl FnMut(&[f64])) {
    let d = p.dim();
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut z = vec![0.0f64; d];
    let mut x = vec![0.0f64; d];
    for _ in 0..samples {
        for zi in z.iter_mut() {
            *zi = StandardNormal.sample(&mut rng);
        }
        match p.cov {
            CovView::Diag(v) => {
                for k in 0..d {
                    x[k] = p.mean[k] as f64 + (v[k] as f64).sqrt() * z[k];
                }
            }
            CovView::Full(l) => {
                for i in 0..d {
                    let mut s = p.mean[i] as f64;
                    for j in 0..=i {
                        s += l[i * d + j] * z[j];
                    }
                    x[i] = s;
                }
            }
        }
        f(&x);
    }
}

/// Containment of p in q at level α: P_{x∼p}[Mahalanobis²_q(x) ≤ χ²_d⁻¹(α)], sampled.
pub fn containment(
    p: &GaussianView,
    q: &GaussianView,
    alpha: f64,
    samples: usize,
    seed: u64,
) -> Sampled {
    let r2 = chi2_quantile(q.dim(), alpha);
    let mut hits = 0usize;
    sample_points(p, samples, seed, |x| {
        if mahalanobis2(x, q) <= r2 {
            hits += 1;
        }
    });
    Sampled::from_count(hits, samples)
}

/// Coverage of p by a set of Gaussians: the share of p's mass inside at least one of the
/// `covers`' α-regions, sampled.
pub fn coverage(
    p: &GaussianView,
    covers: &[GaussianView],
    alpha: f64,
    samples: usize,
    seed: u64,
) -> Sampled {
    let r2 = chi2_quantile(p.dim(), alpha);
    let mut hits = 0usize;
    sample_points(p, samples, seed, |x| {
        if covers.iter().any(|q| mahalanobis2(x, q) <= r2) {
            hits += 1;
        }
    });
    Sampled::from_count(hits, samples)
}

/// An owned Gaussian, for results and tests (e.g. a user profile or a projection).
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedGaussian {
    /// Mean.
    pub mean: Vec<f32>,
    /// Diagonal variances (for `Full`, the diagonal of Σ).
    pub variances: Vec<f32>,
    /// Lower Cholesky factor row-major, empty for diagonal.
    pub chol: Vec<f64>,
    /// ln det Σ.
    pub log_det: f64,
}

impl OwnedGaussian {
    /// A diagonal Gaussian (variances must be > 0).
    pub fn diagonal(mean: &[f64], variances: &[f64]) -> Result<Self, GaussError> {
        let g = Gaussians::from_diagonal(1, mean.len(), mean.to_vec(), variances.to_vec(), 0.0)?;
        Ok(OwnedGaussian {
            mean: g.means,
            variances: g.variances,
            chol: Vec::new(),
            log_det: g.log_det[0],
        })
    }

    /// A full-covariance Gaussian from a row-major covariance matrix.
    pub fn full(mean: &[f64], cov: &[f64]) -> Result<Self, GaussError> {
        let g = Gaussians::from_full(1, mean.len(), mean.to_vec(), cov.to_vec(), 0.0)?;
        Ok(OwnedGaussian {
            mean: g.means,
            variances: g.variances,
            chol: g.chol,
            log_det: g.log_det[0],
        })
    }

    /// A view for the formula functions.
    pub fn view(&self) -> GaussianView<'_> {
        GaussianView {
            mean: &self.mean,
            cov: if self.chol.is_empty() {
                CovView::Diag(&self.variances)
            } else {
                CovView::Full(&self.chol)
            },
            log_det: self.log_det,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn diag(mean: &[f64], var: &[f64]) -> OwnedGaussian {
        OwnedGaussian::diagonal(mean, var).unwrap()
    }

    fn full_of(g: &OwnedGaussian) -> OwnedGaussian {
        let d = g.mean.len();
        let mut cov = vec![0.0; d * d];
        for k in 0..d {
            cov[k * d + k] = g.variances[k] as f64;
        }
        let mean: Vec<f64> = g.mean.iter().map(|&x| x as f64).collect();
        OwnedGaussian::full(&mean, &cov).unwrap()
    }

    fn close(a: f64, b: f64, tol: f64) {
        assert!((a - b).abs() <= tol, "{a} vs {b} (tol {tol})");
    }

    #[test]
    fn univariate_kl_matches_closed_form() {
        // KL(N(0,1) ‖ N(1,2)) = ln √2 + (1 + 1)/(2·2) − ½ = 0.346574, from the univariate
        // closed form ln(σq/σp) + (σp² + Δ²)/(2σq²) − ½ of the Gaussian KL divergence
        // (Kullback & Leibler 1951 for the definition, Kullback 1959 ch. 9 for the normal
        // case; recomputed by quadrature in docs/maths.md §4).
        let p = diag(&[0.0], &[1.0]);
        let q = diag(&[1.0], &[2.0]);
        close(kl(&p.view(), &q.view()), 0.346_574, 1e-6);
        // and the reverse direction by the same closed form: ln(1/√2) + (2 + 1)/2 − ½
        close(
            kl(&q.view(), &p.view()),
            (0.5f64).sqrt().ln() + 1.5 - 0.5,
            1e-9,
        );
    }

    #[test]
    fn multivariate_kl_worked_example() {
        // Worked example by hand from the Gaussian closed form (Kullback 1959 ch. 9; closed
        // form derived in docs/maths.md §4, where both values are recomputed):
        // p = N([0,0], diag(1,4)), q = N([1,-1], diag(2,1)):
        // tr = 1/2 + 4 = 4.5; maha = 1/2 + 1 = 1.5; ln det q − ln det p = ln 2 − ln 4 = −ln 2
        // KL = ½ (4.5 + 1.5 − 2 − ln 2) = 1.653426
        let p = diag(&[0.0, 0.0], &[1.0, 4.0]);
        let q = diag(&[1.0, -1.0], &[2.0, 1.0]);
        close(kl(&p.view(), &q.view()), 0.5 * (4.0 - 2f64.ln()), 1e-9);
        // full covariance with off-diagonal terms: p = N(0, [[2,1],[1,2]]), q = N(0, I):
        // KL = ½ (tr Σp − 2 − ln det Σp) = ½ (4 − 2 − ln 3) = 0.450694
        let pf = OwnedGaussian::full(&[0.0, 0.0], &[2.0, 1.0, 1.0, 2.0]).unwrap();
        let qf = OwnedGaussian::full(&[0.0, 0.0], &[1.0, 0.0, 0.0, 1.0]).unwrap();
        close(kl(&pf.view(), &qf.view()), 0.5 * (2.0 - 3f64.ln()), 1e-12);
    }

    #[test]
    fn entropy_of_standard_normal() {
        // (d/2) ln(2πe), 1.418939 nats per dimension (Cover & Thomas 2006, Theorem 8.4.1;
        // docs/maths.md §2).
        for d in [1usize, 3, 10] {
            let g = diag(&vec![0.0; d], &vec![1.0; d]);
            close(g.view().entropy(), d as f64 * 1.418_938_533, 1e-8);
        }
    }

    #[test]
    fn self_divergences_vanish() {
        // KL(p ‖ p) = 0 (Kullback & Leibler 1951), BC(p, p) = ∫ p = 1 (Bhattacharyya 1943),
        // hence D_B = H = 0; W₂(p, p) = 0 from the closed form (docs/maths.md §4, §5, §7).
        let p = diag(&[0.3, -1.0, 2.0], &[0.5, 2.0, 1.5]);
        close(kl(&p.view(), &p.view()), 0.0, 1e-12);
        close(bhattacharyya_distance(&p.view(), &p.view()), 0.0, 1e-12);
        close(bhattacharyya_coefficient(&p.view(), &p.view()), 1.0, 1e-12);
        close(hellinger(&p.view(), &p.view()), 0.0, 1e-6);
        close(wasserstein2(&p.view(), &p.view()), 0.0, 1e-12);
    }

    #[test]
    fn equal_covariance_identities() {
        // Textbook identities (Fukunaga 1990, Introduction to Statistical Pattern
        // Recognition, §3.5): with Σp = Σq, D_B = Mahalanobis²(Δ)/8 and KL = Mahalanobis²/2.
        let var = [0.5, 2.0, 1.5];
        let p = diag(&[0.0, 1.0, 2.0], &var);
        let q = diag(&[1.0, -1.0, 0.5], &var);
        let mu_p: Vec<f64> = p.mean.iter().map(|&x| x as f64).collect();
        let m2 = mahalanobis2(&mu_p, &q.view());
        close(bhattacharyya_distance(&p.view(), &q.view()), m2 / 8.0, 1e-9);
        close(kl(&p.view(), &q.view()), m2 / 2.0, 1e-9);
        let (pf, qf) = (full_of(&p), full_of(&q));
        close(
            bhattacharyya_distance(&pf.view(), &qf.view()),
            m2 / 8.0,
            1e-9,
        );
    }

    #[test]
    fn full_agrees_with_diagonal_on_diagonal_input() {
        let p = diag(&[0.2, -0.4, 1.0, 0.0], &[0.7, 1.3, 0.2, 2.5]);
        let q = diag(&[1.0, 0.5, -0.5, 0.3], &[1.1, 0.4, 0.9, 1.0]);
        let (pf, qf) = (full_of(&p), full_of(&q));
        let pairs = [
            (kl(&p.view(), &q.view()), kl(&pf.view(), &qf.view())),
            (kl(&q.view(), &p.view()), kl(&qf.view(), &pf.view())),
            (
                bhattacharyya_distance(&p.view(), &q.view()),
                bhattacharyya_distance(&pf.view(), &qf.view()),
            ),
            (
                log_expected_likelihood(&p.view(), &q.view()),
                log_expected_likelihood(&pf.view(), &qf.view()),
            ),
            (
                wasserstein2(&p.view(), &q.view()),
                wasserstein2(&pf.view(), &qf.view()),
            ),
            (p.view().entropy(), pf.view().entropy()),
        ];
        for (a, b) in pairs {
            close(a, b, 1e-9 * a.abs().max(1.0));
        }
        // mixed diagonal/full pairs go through the dense path and agree too
        close(kl(&p.view(), &qf.view()), kl(&p.view(), &q.view()), 1e-9);
    }

    #[test]
    fn elk_is_density_of_difference() {
        // ∫ N(x; μp, Σp) N(x; μq, Σq) dx = N(μp; μq, Σp + Σq) (Petersen & Pedersen,
        // The Matrix Cookbook, 2012, §8.1.8 product of Gaussian densities). 1-D check:
        let p = diag(&[0.0], &[1.0]);
        let q = diag(&[1.0], &[3.0]);
        // N(0; 1, 4) = exp(−1/8)/√(8π)
        let want = (-1.0f64 / 8.0).exp() / (8.0 * std::f64::consts::PI).sqrt();
        close(
            log_expected_likelihood(&p.view(), &q.view()),
            want.ln(),
            1e-12,
        );
    }

    #[test]
    fn wasserstein_full_against_closed_form_commuting_case() {
        // For commuting covariances W₂² = ‖Δ‖² + ‖Σp^½ − Σq^½‖²_F (Givens & Shortt 1984).
        // Σp = R diag(4, 1) Rᵀ, Σq = R diag(1, 9) Rᵀ with R a 45° rotation:
        // W₂² = |Δ|² + (2−1)² + (1−3)² = 2 + 5
        let c = std::f64::consts::FRAC_1_SQRT_2;
        let rot = |a: f64, b: f64| {
            // R diag(a, b) Rᵀ with R = [[c, −c], [c, c]]
            [
                c * c * (a + b),
                c * c * (a - b),
                c * c * (a - b),
                c * c * (a + b),
            ]
        };
        let p = OwnedGaussian::full(&[0.0, 0.0], &rot(4.0, 1.0)).unwrap();
        let q = OwnedGaussian::full(&[1.0, 1.0], &rot(1.0, 9.0)).unwrap();
        close(wasserstein2(&p.view(), &q.view()), 7f64.sqrt(), 1e-9);
    }

    #[test]
    fn chi_square_quantiles_match_nist_table() {
        // NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.6.7.4, upper critical
        // values of the chi-square distribution.
        close(chi2_quantile(2, 0.95), 5.991, 5e-4);
        close(chi2_quantile(2, 0.99), 9.210, 5e-4);
        close(chi2_quantile(1, 0.95), 3.841, 5e-4);
        close(chi2_quantile(10, 0.95), 18.307, 5e-3);
        close(chi2_quantile(30, 0.99), 50.892, 5e-3);
    }

    #[test]
    fn containment_of_self_is_alpha() {
        // child = parent: containment equals α exactly in expectation, since M² of a point
        // drawn from p under p itself is χ²_d (Johnson & Wichern 2007, Result 4.7;
        // docs/maths.md §3); check within three standard errors.
        let p = diag(&[0.0, 1.0, -1.0, 0.5], &[1.0, 0.5, 2.0, 1.0]);
        let s = containment(&p.view(), &p.view(), 0.95, 20_000, 7);
        assert!((s.value - 0.95).abs() <= 3.0 * s.std_error, "{s:?}");
    }

    #[test]
    fn containment_one_dimensional_normal_table() {
        // p = N(0, 1), q = N(0, 4): q's 95 % region is |x| ≤ 2·1.95996 = 3.92, which holds
        // P(|Z| ≤ 3.92) = 0.999911 of p; with q = N(1, 1) the region is |x − 1| ≤ 1.96:
        // Φ(2.96) − Φ(−0.96) = 0.998462 − 0.168528 = 0.829934 (NIST/SEMATECH e-Handbook
        // §1.3.6.7.1, standard normal table; with the unrounded z = 1.959964 the value is
        // 0.829925, docs/maths.md §8 — the difference is far inside the tolerance).
        let p = diag(&[0.0], &[1.0]);
        let wide = diag(&[0.0], &[4.0]);
        let shifted = diag(&[1.0], &[1.0]);
        for (q, want) in [(wide, 0.999_911), (shifted, 0.829_934)] {
            let s = containment(&p.view(), &q.view(), 0.95, 40_000, 11);
            let tol = 3.0 * s.std_error.max((want * (1.0 - want) / 40_000.0f64).sqrt());
            assert!((s.value - want).abs() <= tol, "{} vs {want}", s.value);
        }
    }

    #[test]
    fn full_covariance_containment_agrees_with_diagonal_and_samples() {
        let p = diag(&[0.0, 0.0], &[1.0, 1.0]);
        let q = diag(&[0.5, 0.0], &[2.0, 1.0]);
        let (pf, qf) = (full_of(&p), full_of(&q));
        let a = containment(&p.view(), &q.view(), 0.95, 10_000, 3);
        let b = containment(&pf.view(), &qf.view(), 0.95, 10_000, 3);
        assert!((a.value - b.value).abs() <= 3.0 * a.std_error.max(1e-3));
        // and KL agrees with a Monte-Carlo estimate of its definition E_p[ln p(x) − ln q(x)]
        // (Kullback & Leibler 1951)
        let log_pdf = |x: &[f64], g: &OwnedGaussian| {
            -0.5 * (2.0 * LN_2PI + g.log_det + mahalanobis2(x, &g.view()))
        };
        let n = 40_000;
        let mut vals = Vec::with_capacity(n);
        sample_points(&pf.view(), n, 5, |x| {
            vals.push(log_pdf(x, &pf) - log_pdf(x, &qf))
        });
        let mean = vals.iter().sum::<f64>() / n as f64;
        let var = vals.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n as f64;
        let se = (var / n as f64).sqrt();
        let exact = kl(&pf.view(), &qf.view());
        assert!((mean - exact).abs() <= 3.0 * se, "{mean} vs {exact} ± {se}");
    }

    #[test]
    fn bad_covariances_are_errors() {
        assert!(matches!(
            Gaussians::from_diagonal(1, 2, vec![0.0, 0.0], vec![1.0, 0.0], 1e-6),
            Err(GaussError::NonPositiveVariance { row: 0, col: 1, .. })
        ));
        assert!(matches!(
            Gaussians::from_diagonal(1, 1, vec![f64::NAN], vec![1.0], 1e-6),
            Err(GaussError::NonFinite { row: 0, .. })
        ));
        // eigenvalues 3 and −1
        assert!(matches!(
            Gaussians::from_full(1, 2, vec![0.0, 0.0], vec![1.0, 2.0, 2.0, 1.0], 1e-6),
            Err(GaussError::NotPositiveDefinite { row: 0, .. })
        ));
        assert!(matches!(
            Gaussians::from_full(1, 2, vec![0.0, 0.0], vec![1.0, 0.5, 0.1, 1.0], 1e-6),
            Err(GaussError::NotPositiveDefinite { .. })
        ));
    }

    #[test]
    fn f32_constructor_matches_the_f64_one() {
        let m = vec![0.5, -1.0, 2.0, 0.25];
        let v = vec![0.3, 1e-9, 2.0, 4.0];
        let a = Gaussians::from_diagonal(2, 2, m.clone(), v.clone(), 1e-4).unwrap();
        let b = Gaussians::from_diagonal_f32(
            2,
            2,
            m.iter().map(|&x| x as f32).collect(),
            v.iter().map(|&x| x as f32).collect(),
            1e-4,
        )
        .unwrap();
        assert_eq!(a, b);
        assert!(matches!(
            Gaussians::from_diagonal_f32(1, 2, vec![0.0, 0.0], vec![1.0, -2.0], 1e-6),
            Err(GaussError::NonPositiveVariance { row: 0, col: 1, .. })
        ));
        assert!(matches!(
            Gaussians::from_diagonal_f32(1, 1, vec![f32::INFINITY], vec![1.0], 1e-6),
            Err(GaussError::NonFinite { row: 0, .. })
        ));
    }

    #[test]
    fn variance_floor_raises_small_variances() {
        let g = Gaussians::from_diagonal(1, 2, vec![0.0, 0.0], vec![1e-9, 1.0], 1e-4).unwrap();
        close(g.variances(0)[0] as f64, 1e-4, 1e-10);
        close(g.log_det(0), (1e-4f32 as f64).ln(), 1e-9);
    }
}

/// Tests added for mutation testing (issue 17): each pins a group of mutants to an
/// independent value; see the file's header.
#[cfg(test)]
#[path = "gaussian_tests.rs"]
mod mutant_tests;

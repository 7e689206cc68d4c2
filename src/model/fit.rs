//! Gaussians fitted from occurrence vectors: one mean and one covariance per phrase from the
//! point embeddings of the things the phrase is attached to.
//!
//! Diagonal variance: the unbiased sample variance `s²` (n − 1 degrees of freedom), moderated
//! towards the pooled variance `s₀²` of all phrases, dimension by dimension:
//! `σ̂² = (ν₀·s₀² + (n − 1)·s²) / (ν₀ + n − 1)` — the empirical-Bayes moderated variance of
//! Smyth (2004), "Linear models and empirical Bayes methods for assessing differential
//! expression in microarray experiments", Stat. Appl. Genet. Mol. Biol. 3(1), with the prior
//! degrees of freedom `ν₀` given (not estimated). Phrases with few occurrences lean on the
//! pooled variance; phrases with many keep their own.
//!
//! Full covariance (d ≤ 64): the Ledoit–Wolf shrinkage towards a scaled identity, Ledoit &
//! Wolf (2004), "A well-conditioned estimator for large-dimensional covariance matrices",
//! J. Multivariate Analysis 88(2), in the finite-sample form scikit-learn's `LedoitWolf`
//! computes (maximum-likelihood covariance, shrinkage clipped to [0, 1]).

use std::collections::HashMap;

/// Largest dimension for the full-covariance fit.
pub const MAX_FULL_DIM: usize = 64;

/// Fit options.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitOptions {
    /// Phrases with fewer occurrences are left out (at least 2).
    pub min_count: usize,
    /// Prior degrees of freedom ν₀ of the variance moderation (0 = no shrinkage).
    pub prior_df: f64,
    /// Full covariance with Ledoit–Wolf shrinkage instead of moderated diagonal variances.
    pub full: bool,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            min_count: 2,
            prior_df: 4.0,
            full: false,
        }
    }
}

/// Why a fit cannot be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    /// Shapes do not agree.
    #[error("{0}")]
    Shape(String),
    /// A value is not finite.
    #[error("occurrence row {row} (phrase \"{id}\"): value {col} is {value}, not a finite number")]
    NonFinite {
        /// Row.
        row: usize,
        /// Phrase id.
        id: String,
        /// Column.
        col: usize,
        /// The value.
        value: f64,
    },
    /// Nothing left to fit.
    #[error("no phrase has at least {0} occurrences")]
    Empty(usize),
    /// Bad option.
    #[error("{0}")]
    Option(String),
}

/// The fitted Gaussians.
#[derive(Debug, Clone, PartialEq)]
pub struct Fit {
    /// Dimension.
    pub dim: usize,
    /// Phrase ids, in order of first occurrence.
    pub ids: Vec<String>,
    /// Occurrences per phrase.
    pub counts: Vec<usize>,
    /// Means, `n × d` row-major.
    pub means: Vec<f64>,
    /// Unbiased sample variances before moderation, `n × d`.
    pub sample_variances: Vec<f64>,
    /// Pooled variance per dimension (the moderation target).
    pub pooled: Vec<f64>,
    /// Moderated variances (diagonal), `n × d`; the Ledoit–Wolf diagonal when `full`.
    pub variances: Vec<f64>,
    /// Ledoit–Wolf covariances `n × d × d` when `full`.
    pub covariances: Option<Vec<f64>>,
    /// Ledoit–Wolf shrinkage per phrase when `full`.
    pub shrinkage: Option<Vec<f64>>,
    /// Phrases left out for too few occurrences: (id, count), in order of first occurrence.
    pub left_out: Vec<(String, usize)>,
}

/// Fit one Gaussian per phrase from `data` (`ids.len() × d`, row-major; row k belongs to
/// phrase `ids[k]`): the rows fed in order through a [`FitAccumulator`].
pub fn fit(ids: &[String], data: &[f64], d: usize, opt: &FitOptions) -> Result<Fit, FitError> {
    if d == 0 || data.len() != ids.len() * d {
        return Err(FitError::Shape(format!(
            "{} values for {} ids of dimension {d}",
            data.len(),
            ids.len()
        )));
    }
    let mut acc = FitAccumulator::new(d, opt)?;
    for (id, x) in ids.iter().zip(data.chunks_exact(d)) {
        let p = acc.phrase(id);
        acc.push(p, x)?;
    }
    acc.finish()
}

/// Check the options for dimension `d`.
fn check_options(d: usize, opt: &FitOptions) -> Result<(), FitError> {
    if d == 0 {
        return Err(FitError::Shape("dimension 0".into()));
    }
    if opt.min_count < 2 {
        return Err(FitError::Option("min-count must be at least 2".into()));
    }
    if !(opt.prior_df.is_finite() && opt.prior_df >= 0.0) {
        return Err(FitError::Option(
            "prior-df must be a finite number ≥ 0".into(),
        ));
    }
    if opt.full && d > MAX_FULL_DIM {
        return Err(FitError::Option(format!(
            "full covariance is fitted for dimension ≤ {MAX_FULL_DIM}, not {d}"
        )));
    }
    Ok(())
}

/// One pass over occurrence rows in any number of chunks, with memory proportional to the
/// number of phrases (not of rows): per phrase the count, the running mean and the running
/// sum of squared deviations per dimension (Welford 1962, "Note on a method for calculating
/// corrected sums of squares and products", Technometrics 4(3); the update Chan, Golub &
/// LeVeque 1979 analyse), and for the full covariance the sums `Σy`, `Σyyᵀ`, `Σ‖y‖²y`,
/// `Σ‖y‖⁴` of the rows shifted by the phrase's first row `y = x − x₁` (the shifted-data
/// algorithm of Chan, Golub & LeVeque 1983, "Algorithms for computing the sample variance:
/// analysis and recommendations", Amer. Statist. 37(3), which keeps the cancellation small),
/// from which the centred co-moments and `Σ‖x − x̄‖⁴` Ledoit–Wolf needs follow exactly.
#[derive(Debug, Clone)]
pub struct FitAccumulator {
    d: usize,
    opt: FitOptions,
    index: HashMap<Box<str>, usize>,
    names: Vec<Box<str>>,
    count: Vec<usize>,
    mean: Vec<f64>,
    m2: Vec<f64>,
    /// Full covariance only: first row, `Σy`, `Σyyᵀ` (upper triangle used), `Σ‖y‖²y`, `Σ‖y‖⁴`.
    shift: Vec<f64>,
    s1: Vec<f64>,
    s2: Vec<f64>,
    t: Vec<f64>,
    u: Vec<f64>,
    /// Full covariance only: up to [`PENDING_ROWS`] shifted rows per phrase not yet added to
    /// the sums, so that a phrase's `d × d` sum is visited once per batch of its rows rather
    /// than once per row (the rows are added in their order: the same sums, fewer cache misses).
    pending: Vec<f64>,
    n_pending: Vec<usize>,
    rows: usize,
}

/// Shifted rows buffered per phrase before they are added to its full-covariance sums.
const PENDING_ROWS: usize = 16;

impl FitAccumulator {
    /// An empty accumulator for rows of dimension `d` (the options are checked here).
    pub fn new(d: usize, opt: &FitOptions) -> Result<Self, FitError> {
        check_options(d, opt)?;
        Ok(FitAccumulator {
            d,
            opt: *opt,
            index: HashMap::new(),
            names: Vec::new(),
            count: Vec::new(),
            mean: Vec::new(),
            m2: Vec::new(),
            shift: Vec::new(),
            s1: Vec::new(),
            s2: Vec::new(),
            t: Vec::new(),
            u: Vec::new(),
            pending: Vec::new(),
            n_pending: Vec::new(),
            rows: 0,
        })
    }

    /// The dimension.
    pub fn dim(&self) -> usize {
        self.d
    }

    /// Rows pushed so far.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The index of phrase `id` (a new phrase gets the next index: order of first sight).
    pub fn phrase(&mut self, id: &str) -> usize {
        if let Some(&p) = self.index.get(id) {
            return p;
        }
        let p = self.names.len();
        let d = self.d;
        self.index.insert(id.into(), p);
        self.names.push(id.into());
        self.count.push(0);
        self.mean.resize(self.mean.len() + d, 0.0);
        self.m2.resize(self.m2.len() + d, 0.0);
        if self.opt.full {
            self.shift.resize(self.shift.len() + d, 0.0);
            self.s1.resize(self.s1.len() + d, 0.0);
            self.s2.resize(self.s2.len() + d * d, 0.0);
            self.t.resize(self.t.len() + d, 0.0);
            self.u.push(0.0);
            self.pending
                .resize(self.pending.len() + PENDING_ROWS * d, 0.0);
            self.n_pending.push(0);
        }
        p
    }

    /// Add one occurrence row `x` (length `d`) of phrase `p` (from [`Self::phrase`]).
    pub fn push(&mut self, p: usize, x: &[f64]) -> Result<(), FitError> {
        let d = self.d;
        if x.len() != d {
            return Err(FitError::Shape(format!(
                "occurrence row {} has {} values, expected {d}",
                self.rows,
                x.len()
            )));
        }
        if let Some(j) = x.iter().position(|v| !v.is_finite()) {
            return Err(FitError::NonFinite {
                row: self.rows,
                id: self.names[p].to_string(),
                col: j,
                value: x[j],
            });
        }
        self.count[p] += 1;
        let n = self.count[p] as f64;
        let mean = &mut self.mean[p * d..(p + 1) * d];
        let m2 = &mut self.m2[p * d..(p + 1) * d];
        for ((m, s), &v) in mean.iter_mut().zip(m2.iter_mut()).zip(x) {
            let delta = v - *m;
            *m += delta / n;
            *s += delta * (v - *m);
        }
        if self.opt.full {
            let shift = &mut self.shift[p * d..(p + 1) * d];
            if self.count[p] == 1 {
                shift.copy_from_slice(x);
            }
            let k = self.n_pending[p];
            let slot = &mut self.pending[(p * PENDING_ROWS + k) * d..][..d];
            for ((y, &xj), &kj) in slot.iter_mut().zip(x).zip(shift.iter()) {
                *y = xj - kj;
            }
            self.n_pending[p] = k + 1;
            if k + 1 == PENDING_ROWS {
                self.flush(p);
            }
        }
        self.rows += 1;
        Ok(())
    }

    /// Add phrase `p`'s pending shifted rows to its sums, in row order.
    fn flush(&mut self, p: usize) {
        let d = self.d;
        let k = std::mem::take(&mut self.n_pending[p]);
        let rows = &self.pending[p * PENDING_ROWS * d..][..k * d];
        let s1 = &mut self.s1[p * d..(p + 1) * d];
        let t = &mut self.t[p * d..(p + 1) * d];
        for y in rows.chunks_exact(d) {
            let sq: f64 = y.iter().map(|v| v * v).sum();
            for j in 0..d {
                s1[j] += y[j];
                t[j] += sq * y[j];
            }
            self.u[p] += sq * sq;
        }
        let s2 = &mut self.s2[p * d * d..(p + 1) * d * d];
        for a in 0..d {
            let row = &mut s2[a * d + a..(a + 1) * d];
            for y in rows.chunks_exact(d) {
                let ya = y[a];
                for (r, &yb) in row.iter_mut().zip(&y[a..]) {
                    *r += ya * yb;
                }
            }
        }
    }

    /// The fitted Gaussians.
    pub fn finish(mut self) -> Result<Fit, FitError> {
        if self.opt.full {
            for p in 0..self.names.len() {
                self.flush(p);
            }
        }
        let d = self.d;
        let opt = self.opt;
        let count = &self.count;
        let kept: Vec<usize> = (0..self.names.len())
            .filter(|&p| count[p] >= opt.min_count)
            .collect();
        let left_out = (0..self.names.len())
            .filter(|&p| count[p] < opt.min_count)
            .map(|p| (self.names[p].to_string(), count[p]))
            .collect();
        if kept.is_empty() {
            return Err(FitError::Empty(opt.min_count));
        }
        // pooled variance over the kept phrases
        let mut pooled = vec![0.0; d];
        let df_total: f64 = kept.iter().map(|&p| (count[p] - 1) as f64).sum();
        for &p in &kept {
            for (v, m) in pooled.iter_mut().zip(&self.m2[p * d..(p + 1) * d]) {
                *v += m;
            }
        }
        pooled.iter_mut().for_each(|v| *v /= df_total);
        let n_out = kept.len();
        let mut out = Fit {
            dim: d,
            ids: kept.iter().map(|&p| self.names[p].to_string()).collect(),
            counts: kept.iter().map(|&p| count[p]).collect(),
            means: Vec::with_capacity(n_out * d),
            sample_variances: Vec::with_capacity(n_out * d),
            pooled: pooled.clone(),
            variances: Vec::with_capacity(n_out * d),
            covariances: None,
            shrinkage: None,
            left_out,
        };
        for &p in &kept {
            let df = (count[p] - 1) as f64;
            for (j, pool) in pooled.iter().enumerate() {
                let s2 = self.m2[p * d + j] / df;
                out.means.push(self.mean[p * d + j]);
                out.sample_variances.push(s2);
                out.variances
                    .push((opt.prior_df * pool + df * s2) / (opt.prior_df + df));
            }
        }
        if opt.full {
            let mut covs = Vec::with_capacity(n_out * d * d);
            let mut shr = Vec::with_capacity(n_out);
            out.variances.clear();
            for &p in &kept {
                let n = count[p] as f64;
                let (s, q) = self.centred(p);
                let (cov, k) = ledoit_wolf(&s, q, n, d);
                for a in 0..d {
                    out.variances.push(cov[a * d + a]);
                }
                covs.extend(cov);
                shr.push(k);
            }
            out.covariances = Some(covs);
            out.shrinkage = Some(shr);
        }
        Ok(out)
    }

    /// Phrase `p`'s centred co-moment matrix `S = Σ(x − x̄)(x − x̄)ᵀ` and `q = Σ‖x − x̄‖⁴`
    /// from the shifted sums: with `μ = Σy / n` (so `x̄ = x₁ + μ`) and `k = ‖μ‖²`,
    /// `S = Σyyᵀ − nμμᵀ` and, expanding `‖y − μ‖⁴`,
    /// `q = Σ‖y‖⁴ − 4μᵀΣ‖y‖²y + 4μᵀ(Σyyᵀ)μ + 2k·tr Σyyᵀ − 3nk²` (algebra, no source).
    fn centred(&self, p: usize) -> (Vec<f64>, f64) {
        let d = self.d;
        let n = self.count[p] as f64;
        let mu: Vec<f64> = self.s1[p * d..(p + 1) * d].iter().map(|v| v / n).collect();
        let raw = &self.s2[p * d * d..(p + 1) * d * d];
        let mut full = vec![0.0; d * d];
        for a in 0..d {
            for b in a..d {
                full[a * d + b] = raw[a * d + b];
                full[b * d + a] = raw[a * d + b];
            }
        }
        let k: f64 = mu.iter().map(|v| v * v).sum();
        let tr: f64 = (0..d).map(|a| full[a * d + a]).sum();
        let mut quad = 0.0;
        for a in 0..d {
            let row: f64 = (0..d).map(|b| full[a * d + b] * mu[b]).sum();
            quad += mu[a] * row;
        }
        let mt: f64 = mu
            .iter()
            .zip(&self.t[p * d..(p + 1) * d])
            .map(|(m, t)| m * t)
            .sum();
        let q = self.u[p] - 4.0 * mt + 4.0 * quad + 2.0 * k * tr - 3.0 * n * k * k;
        let s = (0..d * d)
            .map(|i| full[i] - n * mu[i / d] * mu[i % d])
            .collect();
        (s, q)
    }
}

/// Ledoit–Wolf from the centred co-moment matrix `s` (d × d), `q = Σ‖x − m‖⁴` and the count
/// `n`: (covariance, shrinkage). Ledoit & Wolf (2004), Lemma 3.2–3.4, with the maximum-
/// likelihood sample covariance `s / n` as scikit-learn computes it.
fn ledoit_wolf(s: &[f64], q: f64, n: f64, d: usize) -> (Vec<f64>, f64) {
    let df = d as f64;
    let emp: Vec<f64> = s.iter().map(|v| v / n).collect();
    let trace: f64 = (0..d).map(|a| emp[a * d + a]).sum();
    let mu = trace / df;
    let delta_raw: f64 = s.iter().map(|v| v * v).sum::<f64>() / (n * n);
    let beta = (q / n - delta_raw) / (df * n);
    let delta = (delta_raw - 2.0 * mu * trace + df * mu * mu) / df;
    let beta = beta.min(delta);
    let k = if beta == 0.0 { 0.0 } else { beta / delta };
    let mut cov: Vec<f64> = emp.iter().map(|v| (1.0 - k) * v).collect();
    for a in 0..d {
        cov[a * d + a] += k * mu;
    }
    (cov, k)
}

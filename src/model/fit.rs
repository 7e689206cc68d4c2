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
/// phrase `ids[k]`). Two passes over the rows: means and variances (Welford's update), then,
/// for `full`, the centred co-moments.
pub fn fit(ids: &[String], data: &[f64], d: usize, opt: &FitOptions) -> Result<Fit, FitError> {
    if d == 0 || data.len() != ids.len() * d {
        return Err(FitError::Shape(format!(
            "{} values for {} ids of dimension {d}",
            data.len(),
            ids.len()
        )));
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
    // pass 1: Welford per phrase
    let mut index: HashMap<&str, usize> = HashMap::new();
    let mut order: Vec<&str> = Vec::new();
    let mut count: Vec<usize> = Vec::new();
    let mut mean: Vec<f64> = Vec::new();
    let mut m2: Vec<f64> = Vec::new();
    let mut row_of = Vec::with_capacity(ids.len());
    for (k, id) in ids.iter().enumerate() {
        let p = *index.entry(id.as_str()).or_insert_with(|| {
            order.push(id.as_str());
            count.push(0);
            mean.extend(std::iter::repeat_n(0.0, d));
            m2.extend(std::iter::repeat_n(0.0, d));
            order.len() - 1
        });
        row_of.push(p);
        count[p] += 1;
        let n = count[p] as f64;
        let x = &data[k * d..(k + 1) * d];
        for (j, &v) in x.iter().enumerate() {
            if !v.is_finite() {
                return Err(FitError::NonFinite {
                    row: k,
                    id: id.clone(),
                    col: j,
                    value: v,
                });
            }
            let m = &mut mean[p * d + j];
            let delta = v - *m;
            *m += delta / n;
            m2[p * d + j] += delta * (v - *m);
        }
    }
    let kept: Vec<usize> = (0..order.len())
        .filter(|&p| count[p] >= opt.min_count)
        .collect();
    let left_out = (0..order.len())
        .filter(|&p| count[p] < opt.min_count)
        .map(|p| (order[p].to_string(), count[p]))
        .collect();
    if kept.is_empty() {
        return Err(FitError::Empty(opt.min_count));
    }
    // pooled variance over the kept phrases
    let mut pooled = vec![0.0; d];
    let df_total: f64 = kept.iter().map(|&p| (count[p] - 1) as f64).sum();
    for &p in &kept {
        for j in 0..d {
            pooled[j] += m2[p * d + j];
        }
    }
    pooled.iter_mut().for_each(|v| *v /= df_total);
    let n_out = kept.len();
    let mut out = Fit {
        dim: d,
        ids: kept.iter().map(|&p| order[p].to_string()).collect(),
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
        for j in 0..d {
            let s2 = m2[p * d + j] / df;
            out.means.push(mean[p * d + j]);
            out.sample_variances.push(s2);
            out.variances
                .push((opt.prior_df * pooled[j] + df * s2) / (opt.prior_df + df));
        }
    }
    if opt.full {
        // pass 2: centred co-moments S = Σ (x − m)(x − m)ᵀ and Σ ‖x − m‖⁴ per kept phrase
        let slot: HashMap<usize, usize> = kept.iter().enumerate().map(|(s, &p)| (p, s)).collect();
        let mut s = vec![0.0; n_out * d * d];
        let mut q = vec![0.0; n_out];
        let mut c = vec![0.0; d];
        for (k, &p) in row_of.iter().enumerate() {
            let Some(&i) = slot.get(&p) else { continue };
            let x = &data[k * d..(k + 1) * d];
            for j in 0..d {
                c[j] = x[j] - mean[p * d + j];
            }
            let sq: f64 = c.iter().map(|v| v * v).sum();
            q[i] += sq * sq;
            let m = &mut s[i * d * d..(i + 1) * d * d];
            for a in 0..d {
                for b in 0..d {
                    m[a * d + b] += c[a] * c[b];
                }
            }
        }
        let mut covs = Vec::with_capacity(n_out * d * d);
        let mut shr = Vec::with_capacity(n_out);
        out.variances.clear();
        for i in 0..n_out {
            let n = out.counts[i] as f64;
            let m = &s[i * d * d..(i + 1) * d * d];
            let (cov, k) = ledoit_wolf(m, q[i], n, d);
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

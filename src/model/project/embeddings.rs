//! The embeddings: `.npy` or JSON files turned into the project's [`Gaussians`], every
//! value checked and every error naming the file and the phrase.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::LoadError;
use super::manifest::{EmbeddingsRef, Limits, MANIFEST_NAME, Manifest, Scale};
use super::npy::{NpyValues, read_npy2, read_npy3};
use super::read::{read_json_limited, resolve_inside};
use crate::model::gaussian::{CovarianceKind, GaussError, Gaussians, PhraseId};
use crate::model::phrase::PhraseTable;

/// The JSON embeddings file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EmbeddingsJson {
    /// `diagonal` or `full`.
    pub covariance: CovarianceKind,
    /// n rows of d means.
    pub means: Vec<Vec<f64>>,
    /// n rows of d variances (diagonal).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub variances: Option<Vec<Vec<f64>>>,
    /// n matrices d × d (full).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub covariances: Option<Vec<Vec<Vec<f64>>>>,
}

fn apply_scale_f32(values: &mut [f32], scale: Scale) {
    match scale {
        Scale::Variance => {}
        Scale::Std => values.iter_mut().for_each(|v| *v *= *v),
        Scale::LogVariance => values.iter_mut().for_each(|v| *v = v.exp()),
    }
}

fn apply_scale(values: &mut [f64], scale: Scale) {
    match scale {
        Scale::Variance => {}
        Scale::Std => values.iter_mut().for_each(|v| *v *= *v),
        Scale::LogVariance => values.iter_mut().for_each(|v| *v = v.exp()),
    }
}

/// Turn a [`GaussError`] into a load error naming the file and the phrase.
fn gauss_err(file: &str, phrases: &PhraseTable, e: GaussError) -> LoadError {
    let (row, msg) = match &e {
        GaussError::NonFinite { row, .. }
        | GaussError::NonPositiveVariance { row, .. }
        | GaussError::NotPositiveDefinite { row, .. } => {
            let full = e.to_string();
            let prefix = format!("row {row}: ");
            (
                Some(*row),
                full.strip_prefix(&prefix).unwrap_or(&full).to_string(),
            )
        }
        GaussError::Shape(_) => (None, e.to_string()),
    };
    match row {
        Some(r) if r < phrases.len() => LoadError::invalid(
            file,
            format!("phrase \"{}\" (row {r})", phrases.id(r as PhraseId)),
            msg,
        ),
        _ => LoadError::invalid(file, "shape", msg),
    }
}

pub(super) fn load_embeddings(
    dir: &Path,
    manifest: &Manifest,
    phrases: &PhraseTable,
    floor: f64,
    limits: &Limits,
) -> Result<Gaussians, LoadError> {
    let mfile = dir.join(MANIFEST_NAME).display().to_string();
    let n = phrases.len();
    let check_rows = |file: &str, rows: usize| {
        if rows != n {
            Err(LoadError::invalid(
                file,
                "rows",
                format!("has {rows} rows but phrases.json lists {n} phrases"),
            ))
        } else {
            Ok(())
        }
    };
    let full_scale_check = |file: &str| {
        if manifest.scale != Scale::Variance {
            Err(LoadError::invalid(
                file,
                "scale",
                "full covariance matrices must be given as variances (scale \"variance\")",
            ))
        } else {
            Ok(())
        }
    };
    match &manifest.embeddings {
        EmbeddingsRef::Npy {
            means,
            variances,
            covariances,
        } => {
            let mpath = resolve_inside(dir, means, "embeddings.means")?;
            let mf = mpath.display().to_string();
            let (rows, d, mraw) = read_npy2(&mpath, limits)?;
            check_rows(&mf, rows)?;
            if d == 0 {
                return Err(LoadError::invalid(&mf, "shape", "dimension is 0"));
            }
            check_dim(&mf, d, limits)?;
            match (variances, covariances) {
                (Some(v), None) => {
                    let vpath = resolve_inside(dir, v, "embeddings.variances")?;
                    let vf = vpath.display().to_string();
                    let (vr, vd, vraw) = read_npy2(&vpath, limits)?;
                    check_rows(&vf, vr)?;
                    if vd != d {
                        return Err(LoadError::invalid(
                            &vf,
                            "shape",
                            format!("has dimension {vd} but {} has dimension {d}", mf),
                        ));
                    }
                    match (mraw, vraw) {
                        (NpyValues::F32(mvals), NpyValues::F32(mut vvals)) => {
                            check_finite_named(&mf, phrases, &mvals, d, "mean")?;
                            check_finite_named(&vf, phrases, &vvals, d, "variance")?;
                            apply_scale_f32(&mut vvals, manifest.scale);
                            Gaussians::from_diagonal_f32(n, d, mvals, vvals, floor)
                                .map_err(|e| gauss_err(&vf, phrases, e))
                        }
                        (mraw, vraw) => {
                            let (mvals, mut vvals) = (mraw.into_f64(), vraw.into_f64());
                            check_finite_named(&mf, phrases, &mvals, d, "mean")?;
                            check_finite_named(&vf, phrases, &vvals, d, "variance")?;
                            apply_scale(&mut vvals, manifest.scale);
                            Gaussians::from_diagonal(n, d, mvals, vvals, floor)
                                .map_err(|e| gauss_err(&vf, phrases, e))
                        }
                    }
                }
                (None, Some(c)) => {
                    full_scale_check(&mfile)?;
                    let cpath = resolve_inside(dir, c, "embeddings.covariances")?;
                    let cf = cpath.display().to_string();
                    let (cr, a, b, cvals) = read_npy3(&cpath, limits)?;
                    check_rows(&cf, cr)?;
                    if a != d || b != d {
                        return Err(LoadError::invalid(
                            &cf,
                            "shape",
                            format!("matrices are {a}×{b} but {mf} has dimension {d}"),
                        ));
                    }
                    let mvals = mraw.into_f64();
                    check_finite_named(&mf, phrases, &mvals, d, "mean")?;
                    Gaussians::from_full(n, d, mvals, cvals, floor)
                        .map_err(|e| gauss_err(&cf, phrases, e))
                }
                _ => Err(LoadError::invalid(
                    &mfile,
                    "embeddings",
                    "give exactly one of \"variances\" (diagonal) or \"covariances\" (full)",
                )),
            }
        }
        EmbeddingsRef::Json(f) => {
            let path = resolve_inside(dir, f, "embeddings")?;
            let file = path.display().to_string();
            let e: EmbeddingsJson = read_json_limited(&path, limits)?;
            check_rows(&file, e.means.len())?;
            let d = e.means.first().map_or(0, Vec::len);
            if d == 0 {
                return Err(LoadError::invalid(&file, "means", "dimension is 0"));
            }
            check_dim(&file, d, limits)?;
            let flat = |rows: &[Vec<f64>], field: &str| -> Result<Vec<f64>, LoadError> {
                let mut out = Vec::with_capacity(rows.len() * d);
                for (i, r) in rows.iter().enumerate() {
                    if r.len() != d {
                        return Err(LoadError::invalid(
                            &file,
                            format!("{field}[{i}] (phrase \"{}\")", phrases.id(i as PhraseId)),
                            format!("has {} values, expected {d}", r.len()),
                        ));
                    }
                    out.extend_from_slice(r);
                }
                Ok(out)
            };
            let means = flat(&e.means, "means")?;
            match (e.covariance, &e.variances, &e.covariances) {
                (CovarianceKind::Diagonal, Some(v), None) => {
                    check_rows(&file, v.len())?;
                    let mut vals = flat(v, "variances")?;
                    apply_scale(&mut vals, manifest.scale);
                    Gaussians::from_diagonal(n, d, means, vals, floor)
                        .map_err(|e| gauss_err(&file, phrases, e))
                }
                (CovarianceKind::Full, None, Some(c)) => {
                    full_scale_check(&file)?;
                    check_rows(&file, c.len())?;
                    let mut vals = Vec::with_capacity(n * d * d);
                    for (i, m) in c.iter().enumerate() {
                        if m.len() != d || m.iter().any(|r| r.len() != d) {
                            return Err(LoadError::invalid(
                                &file,
                                format!(
                                    "covariances[{i}] (phrase \"{}\")",
                                    phrases.id(i as PhraseId)
                                ),
                                format!("is not a {d}×{d} matrix"),
                            ));
                        }
                        for r in m {
                            vals.extend_from_slice(r);
                        }
                    }
                    Gaussians::from_full(n, d, means, vals, floor)
                        .map_err(|e| gauss_err(&file, phrases, e))
                }
                (CovarianceKind::Diagonal, _, _) => Err(LoadError::invalid(
                    &file,
                    "variances",
                    "covariance \"diagonal\" needs \"variances\" and no \"covariances\"",
                )),
                (CovarianceKind::Full, _, _) => Err(LoadError::invalid(
                    &file,
                    "covariances",
                    "covariance \"full\" needs \"covariances\" and no \"variances\"",
                )),
            }
        }
    }
}

pub(super) fn check_dim(file: &str, d: usize, limits: &Limits) -> Result<(), LoadError> {
    if d > limits.max_dim {
        return Err(LoadError::invalid(
            file,
            "shape",
            format!(
                "dimension {d} exceeds the limit of {} (raise limits.max_dim in project.json)",
                limits.max_dim
            ),
        ));
    }
    Ok(())
}

fn check_finite_named<T: Copy + Into<f64>>(
    file: &str,
    phrases: &PhraseTable,
    vals: &[T],
    d: usize,
    what: &str,
) -> Result<(), LoadError> {
    if let Some((i, v)) = vals
        .iter()
        .map(|&x| x.into())
        .enumerate()
        .find(|(_, v): &(usize, f64)| !v.is_finite())
    {
        let row = i / d;
        return Err(LoadError::invalid(
            file,
            format!("phrase \"{}\" (row {row})", phrases.id(row as PhraseId)),
            format!("{what}[{}] is {v}, not a finite number", i % d),
        ));
    }
    Ok(())
}

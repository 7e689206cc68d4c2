//! The embeddings: `.npy` or JSON files turned into the project's [`Gaussians`], every
//! value checked and every error naming the file and the phrase.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::LoadError;
use super::embeddings_npz::NpzArchive;
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
    let check_rows = |file: &str, rows: usize| rows_match(file, rows, n);
    let full_scale_check = |file: &str| variances_for_full(file, manifest);
    match &manifest.embeddings {
        EmbeddingsRef::Npy {
            means,
            variances,
            covariances,
        } => from_arrays(
            &mut ArraySource::Files(dir),
            [means, "embeddings.means"],
            variances.as_deref().map(|v| [v, "embeddings.variances"]),
            covariances
                .as_deref()
                .map(|c| [c, "embeddings.covariances"]),
            manifest,
            phrases,
            floor,
            limits,
            &mfile,
        ),
        EmbeddingsRef::Parquet {
            parquet,
            id,
            means,
            variances,
            ..
        } => {
            let path = resolve_inside(dir, parquet, "embeddings.parquet")?;
            let file = path.display().to_string();
            let id = id.as_deref().unwrap_or(super::parquet::DEFAULT_ID_COLUMN);
            let (d, mvals, mut vvals) =
                super::parquet::embeddings_by_id(&path, id, means, variances, phrases, limits)?;
            check_dim(&file, d, limits)?;
            check_finite_named(&file, phrases, &mvals, d, "mean")?;
            check_finite_named(&file, phrases, &vvals, d, "variance")?;
            apply_scale(&mut vvals, manifest.scale);
            Gaussians::from_diagonal(n, d, mvals, vvals, floor)
                .map_err(|e| gauss_err(&file, phrases, e))
        }
        EmbeddingsRef::Npz {
            npz,
            means,
            variances,
            covariances,
        } => {
            let path = resolve_inside(dir, npz, "embeddings.npz")?;
            let mut archive = NpzArchive::open(&path, limits)?;
            from_arrays(
                &mut ArraySource::Npz(&mut archive),
                [means, "embeddings.means"],
                variances.as_deref().map(|v| [v, "embeddings.variances"]),
                covariances
                    .as_deref()
                    .map(|c| [c, "embeddings.covariances"]),
                manifest,
                phrases,
                floor,
                limits,
                &mfile,
            )
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

/// Where named float arrays come from: `.npy` files in the project folder, or the members
/// of one `.npz` archive.
enum ArraySource<'a> {
    Files(&'a Path),
    Npz(&'a mut NpzArchive<std::io::BufReader<std::fs::File>>),
}

impl ArraySource<'_> {
    /// A 2-D array `name` (a file, or an archive member) for manifest `field`:
    /// (the name errors use, rows, columns, values).
    fn read2(
        &mut self,
        name: &str,
        field: &str,
        limits: &Limits,
    ) -> Result<(String, usize, usize, NpyValues), LoadError> {
        match self {
            ArraySource::Files(dir) => {
                let path = resolve_inside(dir, name, field)?;
                let (r, d, v) = read_npy2(&path, limits)?;
                Ok((path.display().to_string(), r, d, v))
            }
            ArraySource::Npz(a) => {
                let (r, d, v) = a.array2(name)?;
                Ok((a.member_name(name), r, d, v))
            }
        }
    }

    /// A 3-D array, as f64.
    fn read3(
        &mut self,
        name: &str,
        field: &str,
        limits: &Limits,
    ) -> Result<(String, usize, usize, usize, Vec<f64>), LoadError> {
        match self {
            ArraySource::Files(dir) => {
                let path = resolve_inside(dir, name, field)?;
                let (n, a, b, v) = read_npy3(&path, limits)?;
                Ok((path.display().to_string(), n, a, b, v))
            }
            ArraySource::Npz(ar) => {
                let (n, a, b, v) = ar.array3(name)?;
                Ok((ar.member_name(name), n, a, b, v))
            }
        }
    }
}

/// Gaussians from named arrays: means plus exactly one of variances or covariances, each
/// given as `[name, manifest field]`.
#[allow(clippy::too_many_arguments)]
fn from_arrays(
    src: &mut ArraySource<'_>,
    means: [&str; 2],
    variances: Option<[&str; 2]>,
    covariances: Option<[&str; 2]>,
    manifest: &Manifest,
    phrases: &PhraseTable,
    floor: f64,
    limits: &Limits,
    mfile: &str,
) -> Result<Gaussians, LoadError> {
    let n = phrases.len();
    let check_rows = |file: &str, rows: usize| rows_match(file, rows, n);
    let full_scale_check = |file: &str| variances_for_full(file, manifest);
    let (mf, rows, d, mraw) = src.read2(means[0], means[1], limits)?;
    check_rows(&mf, rows)?;
    if d == 0 {
        return Err(LoadError::invalid(&mf, "shape", "dimension is 0"));
    }
    check_dim(&mf, d, limits)?;
    match (variances, covariances) {
        (Some(v), None) => {
            let (vf, vr, vd, vraw) = src.read2(v[0], v[1], limits)?;
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
            full_scale_check(mfile)?;
            let (cf, cr, a, b, cvals) = src.read3(c[0], c[1], limits)?;
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
            Gaussians::from_full(n, d, mvals, cvals, floor).map_err(|e| gauss_err(&cf, phrases, e))
        }
        _ => Err(LoadError::invalid(
            mfile,
            "embeddings",
            "give exactly one of \"variances\" (diagonal) or \"covariances\" (full)",
        )),
    }
}

/// An embeddings file must have one row per phrase.
fn rows_match(file: &str, rows: usize, n: usize) -> Result<(), LoadError> {
    if rows != n {
        Err(LoadError::invalid(
            file,
            "rows",
            format!("has {rows} rows but phrases.json lists {n} phrases"),
        ))
    } else {
        Ok(())
    }
}

/// Full covariance matrices are only read as variances.
fn variances_for_full(file: &str, manifest: &Manifest) -> Result<(), LoadError> {
    if manifest.scale != Scale::Variance {
        Err(LoadError::invalid(
            file,
            "scale",
            "full covariance matrices must be given as variances (scale \"variance\")",
        ))
    } else {
        Ok(())
    }
}

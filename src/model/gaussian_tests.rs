//! Tests written for mutation testing of `gaussian.rs` (issue 17, part 2): each one pins a
//! group of mutants (replaced return values, swapped operators, shifted row offsets) to a
//! value computed outside the project. Unless a check says otherwise, the reference numbers
//! come from `tests/data/reference/gaussian_mutants.py`, which integrates each definition
//! numerically with mpmath / scipy or evaluates the closed form with numpy.linalg and
//! scipy.linalg.sqrtm (citations in the script). Means and variances below are exact in
//! `f32`, so the stored table holds exactly these numbers.

use super::*;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

fn close(what: &str, got: f64, want: f64, tol: f64) {
    assert!(
        (got - want).abs() <= tol,
        "{what}: got {got:.15}, want {want:.15} (tol {tol})"
    );
}

fn diag(mean: &[f64], var: &[f64]) -> OwnedGaussian {
    OwnedGaussian::diagonal(mean, var).unwrap()
}

/// The same Gaussian with its diagonal covariance written as a full matrix (matrix path).
fn as_full(mean: &[f64], var: &[f64]) -> OwnedGaussian {
    let d = mean.len();
    let mut cov = vec![0.0; d * d];
    for k in 0..d {
        cov[k * d + k] = var[k];
    }
    OwnedGaussian::full(mean, &cov).unwrap()
}

/// Every pairwise quantity of (p, q) against the reference values `r`, which are
/// [KL(p‖q), KL(q‖p), D_B, ln ELK, W₂, h(p)].
fn check_pair(what: &str, p: &GaussianView, q: &GaussianView, r: [f64; 6], tol: f64) {
    let [kl_pq, kl_qp, db, ln_elk, w2, h] = r;
    close(&format!("{what} KL(p‖q)"), kl(p, q), kl_pq, tol);
    close(&format!("{what} KL(q‖p)"), kl(q, p), kl_qp, tol);
    close(&format!("{what} sym KL"), sym_kl(p, q), kl_pq + kl_qp, tol);
    close(
        &format!("{what} D_B"),
        bhattacharyya_distance(p, q),
        db,
        tol,
    );
    close(
        &format!("{what} D_B(q,p)"),
        bhattacharyya_distance(q, p),
        db,
        tol,
    );
    close(
        &format!("{what} BC"),
        bhattacharyya_coefficient(p, q),
        (-db).exp(),
        tol,
    );
    close(
        &format!("{what} H"),
        hellinger(p, q),
        (1.0 - (-db).exp()).sqrt(),
        tol,
    );
    close(
        &format!("{what} ln ELK"),
        log_expected_likelihood(p, q),
        ln_elk,
        tol,
    );
    close(
        &format!("{what} ln ELK(q,p)"),
        log_expected_likelihood(q, p),
        ln_elk,
        tol,
    );
    close(&format!("{what} W2"), wasserstein2(p, q), w2, tol);
    close(&format!("{what} W2(q,p)"), wasserstein2(q, p), w2, tol);
    close(&format!("{what} h(p)"), p.entropy(), h, tol);
    // the three similarity measures are these quantities, higher = more similar
    close(
        &format!("{what} score elk"),
        Similarity::Elk.score(p, q),
        ln_elk,
        tol,
    );
    close(
        &format!("{what} score bc"),
        Similarity::Bhattacharyya.score(p, q),
        (-db).exp(),
        tol,
    );
    close(
        &format!("{what} score kl"),
        Similarity::Kl.score(p, q),
        -(kl_pq + kl_qp),
        tol,
    );
}

/// P = N(0.5, 2), Q = N(−1, 0.5) (variances): no mean is 0 and no variance 1, so a sign
/// flip or a dropped log-determinant term changes every value. gaussian_mutants.py, 1-D
/// block (mpmath quad of each definition; W₂ by the quantile coupling).
#[test]
fn one_dimension_reference_values_on_both_paths() {
    let r = [
        3.056852819440055,
        0.8806471805599453,
        0.3365717756571049,
        -1.82708389914175,
        1.6583123951777,
        1.765512123484645,
    ];
    let (p, q) = (diag(&[0.5], &[2.0]), diag(&[-1.0], &[0.5]));
    check_pair("1-D diagonal", &p.view(), &q.view(), r, 1e-12);
    let (pf, qf) = (as_full(&[0.5], &[2.0]), as_full(&[-1.0], &[0.5]));
    check_pair("1-D full", &pf.view(), &qf.view(), r, 1e-12);
    // the rounded figures printed by the script
    close(
        "BC",
        bhattacharyya_coefficient(&p.view(), &q.view()),
        0.7142146185128239,
        1e-12,
    );
    close(
        "H",
        hellinger(&p.view(), &q.view()),
        0.5345889836941798,
        1e-12,
    );
}

/// P = N((0.5, −1), diag(2, 0.5)), Q = N((−1, 0.25), diag(0.5, 3)): sums of 1-D integrals
/// (independent dimensions; gaussian_mutants.py, 2-D diagonal block).
#[test]
fn two_dimension_diagonal_reference_values_on_both_paths() {
    let r = [
        3.796482554054082,
        4.047267445945918,
        0.626620535454918,
        -3.595618202308393,
        2.315817405845466,
        2.837877066409345,
    ];
    let (mp, vp, mq, vq) = ([0.5, -1.0], [2.0, 0.5], [-1.0, 0.25], [0.5, 3.0]);
    let (p, q) = (diag(&mp, &vp), diag(&mq, &vq));
    check_pair("2-D diagonal", &p.view(), &q.view(), r, 1e-12);
    let (pf, qf) = (as_full(&mp, &vp), as_full(&mq, &vq));
    check_pair("2-D full", &pf.view(), &qf.view(), r, 1e-12);
    // a diagonal and a full view of one pair take the matrix path together
    check_pair("2-D mixed", &p.view(), &qf.view(), r, 1e-12);
}

/// Correlated unequal covariances P = N((0.5, −0.25), [[1, .5], [.5, 2]]),
/// Q = N((1, −1), [[2, −.3], [−.3, .5]]): D_B and ln ELK by scipy dblquad of their
/// integrals, KL and W₂ from the closed forms with numpy.linalg / scipy.linalg.sqrtm, h by
/// scipy's multivariate_normal.entropy (gaussian_mutants.py, 2-D full block).
#[test]
fn two_dimension_correlated_reference_values() {
    let r = [
        1.87358621684612,
        1.10910609084619,
        0.277827707876884,
        -3.00770169040726,
        1.3195967731888,
        3.11768496037706,
    ];
    let p = OwnedGaussian::full(&[0.5, -0.25], &[1.0, 0.5, 0.5, 2.0]).unwrap();
    let q = OwnedGaussian::full(&[1.0, -1.0], &[2.0, -0.3, -0.3, 0.5]).unwrap();
    check_pair("2-D correlated", &p.view(), &q.view(), r, 1e-10);
}

/// Σ = L Lᵀ from a chosen integer factor L = [[2,0,0],[1,3,0],[−1,2,1]], so the Cholesky
/// factor is L exactly (it is unique, Golub & Van Loan 2013 thm 4.2.7), ln det Σ = 2 ln 6,
/// and Σ's diagonal is (4, 10, 6) by hand. Pairwise values against T are from
/// gaussian_mutants.py (3-D block, numpy.linalg closed forms).
#[test]
fn three_dimension_factor_and_values() {
    let sigma = [4.0, 2.0, -2.0, 2.0, 10.0, 5.0, -2.0, 5.0, 6.0];
    let l = [2.0, 0.0, 0.0, 1.0, 3.0, 0.0, -1.0, 2.0, 1.0];
    let p = OwnedGaussian::full(&[0.5, -1.0, 2.0], &sigma).unwrap();
    assert_eq!(p.chol, l, "the stored factor is L");
    assert_eq!(p.variances, vec![4.0f32, 10.0, 6.0]);
    close("ln det", p.log_det, 2.0 * 6f64.ln(), 1e-12);
    let v = p.view();
    for k in 0..3 {
        close(
            &format!("variance {k}"),
            v.variance(k),
            sigma[k * 3 + k],
            1e-12,
        );
    }
    let (cov, chol) = (v.cov_matrix(), v.chol_matrix());
    assert_eq!((cov.nrows(), cov.ncols()), (3, 3));
    for i in 0..3 {
        for j in 0..3 {
            close(&format!("Σ[{i},{j}]"), cov[(i, j)], sigma[i * 3 + j], 1e-12);
            assert_eq!(chol[(i, j)], l[i * 3 + j]);
        }
    }
    // the private factoriser on its own: the same L, and the first failing pivot named
    let m = DMatrix::from_row_slice(3, 3, &sigma);
    assert_eq!(cholesky(&m).unwrap(), DMatrix::from_row_slice(3, 3, &l));
    let bad = DMatrix::from_row_slice(3, 3, &[1.0, 0.0, 0.0, 0.0, 1.0, 2.0, 0.0, 2.0, 1.0]);
    assert_eq!(cholesky(&bad), Err(2));
    // (x − μ)ᵀ Σ⁻¹ (x − μ) for x = (1, 2, −1): numpy.linalg.solve gives 21.9097222222222
    // (= 3155/144 by hand: L y = x − μ gives y = (1/4, 11/12, −55/12), and 9/144 + 121/144 + 3025/144 = 3155/144)
    close(
        "Mahalanobis²",
        mahalanobis2(&[1.0, 2.0, -1.0], &v),
        3155.0 / 144.0,
        1e-12,
    );
    close(
        "Mahalanobis² (script)",
        3155.0 / 144.0,
        21.9097222222222,
        1e-12,
    );
    let t = [3.0, 1.0, 0.5, 1.0, 2.0, -0.4, 0.5, -0.4, 1.5];
    let q = OwnedGaussian::full(&[-0.5, 0.25, 1.0], &t).unwrap();
    let (p, q) = (p.view(), q.view());
    close("KL(p‖q)", kl(&p, &q), 6.71047786988373, 1e-10);
    close("KL(q‖p)", kl(&q, &p), 6.07278397652149, 1e-10);
    close(
        "D_B",
        bhattacharyya_distance(&p, &q),
        0.860733926297587,
        1e-10,
    );
    close(
        "ln ELK",
        log_expected_likelihood(&p, &q),
        -6.33207502641978,
        1e-10,
    );
    close("W2", wasserstein2(&p, &q), 3.3958497198433, 1e-10);
}

/// Squared Mahalanobis distance under a diagonal covariance, by hand:
/// x = (1, 2), μ = (0.5, −1), σ² = (2, 0.5): 0.5²/2 + 3²/0.5 = 0.125 + 18 = 18.125
/// (common practice, no source).
#[test]
fn diagonal_mahalanobis_by_hand() {
    let q = diag(&[0.5, -1.0], &[2.0, 0.5]);
    close("diag", mahalanobis2(&[1.0, 2.0], &q.view()), 18.125, 1e-12);
    let qf = as_full(&[0.5, -1.0], &[2.0, 0.5]);
    close("full", mahalanobis2(&[1.0, 2.0], &qf.view()), 18.125, 1e-12);
}

/// The factor of a 1 × 1 matrix [v] is the correctly rounded √v (IEEE 754 square root),
/// and a diagonal view's factor is diag(σ) (common practice, no source).
#[test]
fn one_by_one_factor_is_the_square_root() {
    for v in [2.0f64, 3.0, 0.3, 7.0] {
        let g = OwnedGaussian::full(&[0.0], &[v]).unwrap();
        assert_eq!(g.chol, vec![v.sqrt()], "factor of [{v}]");
        assert_eq!(g.view().chol_matrix()[(0, 0)], v.sqrt());
    }
    let g = diag(&[0.0, 1.0], &[4.0, 0.25]);
    let l = g.view().chol_matrix();
    assert_eq!(l, DMatrix::from_row_slice(2, 2, &[2.0, 0.0, 0.0, 0.5]));
    assert_eq!(
        g.view().cov_matrix(),
        DMatrix::from_row_slice(2, 2, &[4.0, 0.0, 0.0, 0.25])
    );
    assert_eq!((g.view().variance(0), g.view().variance(1)), (4.0, 0.25));
}

/// Entropy ½ d (1 + ln 2π) + ½ ln det Σ with ln det Σ ≠ 0: N(0, diag(2, 3)) has
/// h = 1 + ln 2π + ½ ln 6 = 3.7337568 by hand (Cover & Thomas 2006, thm 8.4.1).
#[test]
fn entropy_with_a_non_zero_log_determinant() {
    let want = 1.0 + LN_2PI + 0.5 * 6f64.ln();
    close("formula", entropy_from_log_det(2, 6f64.ln()), want, 1e-12);
    close("hand value", want, 3.733_756_8, 1e-6);
    let g = Gaussians::from_diagonal(1, 2, vec![0.0, 0.0], vec![2.0, 3.0], 0.0).unwrap();
    close("table", g.entropy(0), want, 1e-12);
    close("view", g.get(0).entropy(), want, 1e-12);
}

/// A three-row table answers for every row with that row's numbers (row offsets are
/// i·d and i·d² — a shifted offset reads another row), and counts its bytes by hand.
#[test]
fn table_rows_and_accessors() {
    let (n, d) = (3, 3);
    let means: Vec<f64> = (0..9).map(|k| k as f64 * 0.5 - 1.0).collect();
    let vars = vec![2.0, 0.5, 4.0, 1.0, 0.25, 3.0, 8.0, 1.5, 0.125];
    let g = Gaussians::from_diagonal(n, d, means.clone(), vars.clone(), 0.0).unwrap();
    assert_eq!((g.len(), g.dim(), g.is_empty()), (3, 3, false));
    assert_eq!(g.kind(), CovarianceKind::Diagonal);
    let means32: Vec<f32> = means.iter().map(|&x| x as f32).collect();
    assert_eq!(g.means_flat(), &means32[..]);
    for i in 0..n {
        let ld: f64 = vars[i * d..(i + 1) * d].iter().map(|v| v.ln()).sum();
        assert_eq!(g.mean(i), &means32[i * d..(i + 1) * d], "mean {i}");
        let v32: Vec<f32> = vars[i * d..(i + 1) * d].iter().map(|&x| x as f32).collect();
        assert_eq!(g.variances(i), &v32[..], "variances {i}");
        close(&format!("log det {i}"), g.log_det(i), ld, 1e-12);
        close(&format!("log dets {i}"), g.log_dets()[i], ld, 1e-12);
        close(
            &format!("entropy {i}"),
            g.entropy(i),
            entropy_from_log_det(3, ld),
            1e-12,
        );
        let v = g.get(i);
        assert_eq!(v.mean, &means32[i * d..(i + 1) * d]);
        assert!(
            matches!(v.cov, CovView::Diag(x) if x == &v32[..]),
            "view {i}"
        );
        assert_eq!(v.log_det, g.log_det(i));
    }
    assert_eq!(g.log_dets().len(), 3);
    // 9 means + 9 variances as f32, no factor, 3 log dets as f64
    assert_eq!(g.heap_bytes(), 9 * 4 + 9 * 4 + 3 * 8);

    // the same for full covariances: row 0 = Σ of the 3-D test, row 1 = diag(1, 4, 9),
    // row 2 = [[2,1,0],[1,2,1],[0,1,2]] (det 4 by cofactors)
    let covs = vec![
        4.0, 2.0, -2.0, 2.0, 10.0, 5.0, -2.0, 5.0, 6.0, //
        1.0, 0.0, 0.0, 0.0, 4.0, 0.0, 0.0, 0.0, 9.0, //
        2.0, 1.0, 0.0, 1.0, 2.0, 1.0, 0.0, 1.0, 2.0,
    ];
    let f = Gaussians::from_full(n, d, means.clone(), covs.clone(), 0.0).unwrap();
    assert_eq!(f.kind(), CovarianceKind::Full);
    assert_eq!((f.len(), f.dim()), (3, 3));
    let lds = [2.0 * 6f64.ln(), 2.0 * 6f64.ln(), 4f64.ln()];
    let diags = [[4.0f32, 10.0, 6.0], [1.0, 4.0, 9.0], [2.0, 2.0, 2.0]];
    for i in 0..n {
        close(&format!("full log det {i}"), f.log_det(i), lds[i], 1e-12);
        assert_eq!(f.variances(i), &diags[i][..], "full variances {i}");
        assert_eq!(f.mean(i), &means32[i * d..(i + 1) * d]);
        let v = f.get(i);
        assert_eq!(v.mean, &means32[i * d..(i + 1) * d]);
        assert!(
            matches!(v.cov, CovView::Full(l) if l.len() == 9),
            "view {i}"
        );
        let cov = v.cov_matrix();
        for a in 0..3 {
            for b in 0..3 {
                close(
                    &format!("row {i} Σ[{a},{b}]"),
                    cov[(a, b)],
                    covs[i * 9 + a * 3 + b],
                    1e-12,
                );
            }
            close(
                &format!("row {i} var {a}"),
                v.variance(a),
                diags[i][a] as f64,
                1e-12,
            );
        }
    }
    assert!(
        matches!(f.get(1).cov, CovView::Full(l) if l == [1.0, 0.0, 0.0, 0.0, 2.0, 0.0, 0.0, 0.0, 3.0])
    );
    // 9 + 9 f32, 27 f64 factor entries, 3 f64 log dets
    assert_eq!(f.heap_bytes(), 9 * 4 + 9 * 4 + 27 * 8 + 3 * 8);

    let empty = Gaussians::from_diagonal(0, 3, vec![], vec![], 0.0).unwrap();
    assert!(empty.is_empty());
    assert_eq!((empty.len(), empty.heap_bytes()), (0, 0));
}

/// Wrong lengths are shape errors, and a bad value is reported at its row and column
/// (flat index k of an n × w array is row k / w, column k mod w).
/// (row, column, array) of an error that names a position: "variance ≤ 0" for a
/// non-positive variance; None for any other error.
fn position(e: &GaussError) -> Option<(usize, usize, &'static str)> {
    match e {
        GaussError::NonFinite { row, col, what, .. } => Some((*row, *col, what)),
        GaussError::NonPositiveVariance { row, col, .. } => Some((*row, *col, "variance ≤ 0")),
        _ => None,
    }
}

#[test]
fn shape_errors_and_error_positions() {
    let shape = |r: Result<Gaussians, GaussError>| matches!(r, Err(GaussError::Shape(_)));
    // (means, variances) of a 3 × 2 diagonal table, one of them the wrong length
    for (m, v) in [(5, 6), (6, 7)] {
        let r = Gaussians::from_diagonal(3, 2, vec![0.0; m], vec![1.0; v], 0.0);
        assert!(shape(r), "f64: {m} means, {v} variances");
    }
    for (m, v) in [(5, 6), (6, 5)] {
        let r = Gaussians::from_diagonal_f32(3, 2, vec![0.0; m], vec![1.0; v], 0.0);
        assert!(shape(r), "f32: {m} means, {v} variances");
    }
    // (means, covariance entries) of a 2 × 3 full table
    for (m, c) in [(5, 18), (6, 15), (6, 9)] {
        let r = Gaussians::from_full(2, 3, vec![0.0; m], vec![0.0; c], 0.0);
        assert!(shape(r), "full: {m} means, {c} covariance entries");
    }

    // a bad value at flat index k of the 3 × 2 arrays is reported at row k / 2, column k mod 2
    // (mean or variance, the index, the value, the expected position)
    type Position = (usize, usize, &'static str);
    let cases: [(bool, usize, f64, Position); 5] = [
        (true, 5, f64::NAN, (2, 1, "mean")),
        (false, 3, f64::INFINITY, (1, 1, "variance")),
        (false, 4, -1.0, (2, 0, "variance ≤ 0")),
        (false, 3, f64::NEG_INFINITY, (1, 1, "variance")),
        (false, 5, 0.0, (2, 1, "variance ≤ 0")),
    ];
    for (in_mean, k, bad, want) in cases {
        let (mut m, mut v) = (vec![0.0; 6], vec![1.0; 6]);
        if in_mean {
            m[k] = bad;
        } else {
            v[k] = bad;
        }
        let (m32, v32): (Vec<f32>, Vec<f32>) = (
            m.iter().map(|&x| x as f32).collect(),
            v.iter().map(|&x| x as f32).collect(),
        );
        let e = Gaussians::from_diagonal(3, 2, m, v, 0.0).unwrap_err();
        assert_eq!(position(&e), Some(want), "f64: {e:?}");
        let e = Gaussians::from_diagonal_f32(3, 2, m32, v32, 0.0).unwrap_err();
        assert_eq!(position(&e), Some(want), "f32: {e:?}");
    }

    // a covariance entry is named by its flat index inside its d × d block
    let mut c = vec![0.0; 18];
    for b in 0..2 {
        for k in 0..3 {
            c[b * 9 + k * 4] = 1.0;
        }
    }
    c[14] = f64::NAN;
    let e = Gaussians::from_full(2, 3, vec![0.0; 6], c, 0.0).unwrap_err();
    assert!(
        matches!(
            e,
            GaussError::NonFinite {
                row: 1,
                col: 5,
                what: "covariance",
                ..
            }
        ),
        "{e:?}"
    );
    // the second row's matrix is the one checked: row 1 is not positive definite
    let mut c = vec![0.0; 8];
    c[0] = 1.0;
    c[3] = 1.0;
    c[4..].copy_from_slice(&[1.0, 2.0, 2.0, 1.0]);
    let e = Gaussians::from_full(2, 2, vec![0.0; 4], c, 0.0).unwrap_err();
    assert!(
        matches!(&e, GaussError::NotPositiveDefinite { row: 1, detail } if detail.contains("pivot 1")),
        "{e:?}"
    );
    // and a 2-row diagonal table keeps its rows apart in f32 too
    let a =
        Gaussians::from_diagonal_f32(3, 2, vec![0.0; 6], vec![1.0, 2.0, 4.0, 8.0, 0.5, 0.25], 0.0)
            .unwrap();
    close("f32 log det row 1", a.log_det(1), 32f64.ln(), 1e-12);
    close("f32 log det row 2", a.log_det(2), 0.125f64.ln(), 1e-12);
}

/// The symmetry check is relative (1e-6 of the larger entry) and accepts a difference equal
/// to the tolerance; an accepted matrix is replaced by the mean of its two triangles.
/// a = 15625/16384 makes 1e-6·a = 2⁻²⁰ exactly in f64, and b = a − 2⁻²⁰ (common practice,
/// no source; the exact values were checked in Python's float, which is IEEE f64).
#[test]
fn symmetry_tolerance_is_relative_and_inclusive() {
    let ok = OwnedGaussian::full(&[0.0, 0.0], &[4000.0, 1000.0, 1000.0001, 4000.0]).unwrap();
    close("averaged", ok.view().cov_matrix()[(0, 1)], 1000.00005, 1e-9);
    close("averaged", ok.view().cov_matrix()[(1, 0)], 1000.00005, 1e-9);
    assert!(matches!(
        OwnedGaussian::full(&[0.0, 0.0], &[4000.0, 1000.0, 1000.01, 4000.0]),
        Err(GaussError::NotPositiveDefinite { .. })
    ));
    let a = 0.953_674_316_406_25_f64;
    let b = a - 2f64.powi(-20);
    assert_eq!(1e-6 * a, 2f64.powi(-20));
    assert_eq!(a - b, 2f64.powi(-20));
    assert!(OwnedGaussian::full(&[0.0, 0.0], &[1.0, a, b, 1.0]).is_ok());
}

/// Diagonal entries of a full covariance below the floor are raised to it (like the
/// diagonal loader, `variance_floor_raises_small_variances`).
#[test]
fn full_covariance_floor() {
    let g = Gaussians::from_full(1, 2, vec![0.0, 0.0], vec![1e-9, 0.0, 0.0, 2.0], 1e-4).unwrap();
    close("floored variance", g.variances(0)[0] as f64, 1e-4, 1e-10);
    close("log det", g.log_det(0), 1e-4f64.ln() + 2f64.ln(), 1e-9);
    assert!(matches!(
        Gaussians::from_full(1, 2, vec![0.0, 0.0], vec![0.0, 0.0, 0.0, 1.0], 1e-4),
        Err(GaussError::NotPositiveDefinite { .. })
    ));
}

/// A sample is μ + L z with z drawn from the standard normal by Xoshiro256++ seeded with
/// `seed` (the reports' sampled figures depend on these exact draws); L = diag(σ) for a
/// diagonal covariance. The sample moments agree with μ and Σ within four standard errors
/// (common practice, no source).
#[test]
fn samples_are_mean_plus_factor_times_standard_normal() {
    let sigma = [4.0, 2.0, -2.0, 2.0, 10.0, 5.0, -2.0, 5.0, 6.0];
    let l = [2.0, 0.0, 0.0, 1.0, 3.0, 0.0, -1.0, 2.0, 1.0];
    let mu = [0.5, -1.0, 2.0];
    let full = OwnedGaussian::full(&mu, &sigma).unwrap();
    let dg = diag(&mu, &[4.0, 0.25, 9.0]);
    let sd = [2.0, 0.5, 3.0];
    for (g, is_full) in [(&full, true), (&dg, false)] {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(17);
        let mut count = 0;
        sample_points(&g.view(), 50, 17, |x| {
            let z: Vec<f64> = (0..3).map(|_| StandardNormal.sample(&mut rng)).collect();
            for i in 0..3 {
                let want = if is_full {
                    mu[i] + (0..3).map(|j| l[i * 3 + j] * z[j]).sum::<f64>()
                } else {
                    mu[i] + sd[i] * z[i]
                };
                close(&format!("x[{i}]"), x[i], want, 1e-12);
            }
            count += 1;
        });
        assert_eq!(count, 50);
    }
    // moments of 20 000 draws
    let n = 20_000;
    let mut sum = [0.0; 3];
    let mut sq = [0.0; 9];
    sample_points(&full.view(), n, 3, |x| {
        for i in 0..3 {
            sum[i] += x[i];
            for j in 0..3 {
                sq[i * 3 + j] += (x[i] - mu[i]) * (x[j] - mu[j]);
            }
        }
    });
    for i in 0..3 {
        let se = (sigma[i * 3 + i] / n as f64).sqrt();
        close(&format!("mean {i}"), sum[i] / n as f64, mu[i], 4.0 * se);
        for j in 0..3 {
            // Var[(x_i − μ_i)(x_j − μ_j)] = Σii Σjj + Σij² for a Gaussian (Isserlis 1918)
            let v = sigma[i * 3 + i] * sigma[j * 3 + j] + sigma[i * 3 + j].powi(2);
            let se = (v / n as f64).sqrt();
            close(
                &format!("Σ[{i},{j}]"),
                sq[i * 3 + j] / n as f64,
                sigma[i * 3 + j],
                4.0 * se,
            );
        }
    }
}

/// A sampled share c = hits / N with standard error √(c (1 − c) / N) (binomial proportion,
/// common practice, no source): 30 of 120 is 0.25 ± 0.0395285 by hand.
#[test]
fn sampled_share_and_its_standard_error() {
    let s = Sampled::from_count(30, 120);
    assert_eq!((s.value, s.samples), (0.25, 120));
    close("se", s.std_error, (0.25f64 * 0.75 / 120.0).sqrt(), 1e-15);
    close("se by hand", s.std_error, 0.039_528_470_75, 1e-10);
    let z = Sampled::from_count(0, 0);
    assert_eq!((z.value, z.std_error, z.samples), (0.0, 0.0, 0));
    // containment and coverage report the same binomial error for their own share
    let p = diag(&[0.0], &[1.0]);
    let c = containment(&p.view(), &p.view(), 0.9, 4_000, 5);
    assert_eq!(c.samples, 4_000);
    close(
        "containment se",
        c.std_error,
        (c.value * (1.0 - c.value) / 4_000.0).sqrt(),
        1e-15,
    );
    // N(0,1)'s own 90 % region holds 90 % of it (Johnson & Wichern 2007, Result 4.7)
    close("containment", c.value, 0.9, 4.0 * c.std_error);
}

/// Coverage of N(0, 1) by the 90 % intervals of N(−1, 1) and N(1, 1) is 2 Φ(1 + z₀.₉₅) − 1
/// = 0.991827373879934, by N(−1, 1) alone Φ(z − 1) − Φ(−1 − z) = 0.736402664098523
/// (tests/data/reference/gaussian_values.py, mpmath); none of N(10, 1)'s region holds any.
#[test]
fn coverage_against_the_closed_form() {
    let p = diag(&[0.0], &[1.0]);
    let a = diag(&[-1.0], &[1.0]);
    let b = diag(&[1.0], &[1.0]);
    let far = diag(&[10.0], &[1.0]);
    let both = coverage(&p.view(), &[a.view(), b.view()], 0.90, 20_000, 1);
    assert_eq!(both.samples, 20_000);
    close(
        "two covers",
        both.value,
        0.991827373879934,
        4.0 * both.std_error,
    );
    let one = coverage(&p.view(), &[a.view()], 0.90, 20_000, 2);
    close(
        "one cover",
        one.value,
        0.736402664098523,
        4.0 * one.std_error,
    );
    let none = coverage(&p.view(), &[far.view()], 0.90, 2_000, 3);
    assert_eq!(none.value, 0.0);
    let c = containment(&p.view(), &far.view(), 0.90, 2_000, 3);
    assert_eq!(c.value, 0.0);
}

/// χ² quantiles at the clamped ends stay finite: at prob = 1 the two-degree closed form is
/// −2 ln(1 − (1 − 1e-15)) ≈ 69.08 (−2 ln 1e-15 = 69.0776, gaussian_mutants.py), and at
/// prob ≤ 0 it is 0 (common practice, no source).
#[test]
fn chi_square_quantile_at_the_ends() {
    let top = chi2_quantile(2, 1.0);
    assert!(top.is_finite() && (69.0..69.2).contains(&top), "{top}");
    let top3 = chi2_quantile(3, 1.0);
    assert!(top3.is_finite() && top3 > 60.0, "{top3}");
    assert_eq!(chi2_quantile(2, 0.0), 0.0);
    assert_eq!(chi2_quantile(2, -1.0), 0.0);
    // the 2-dof closed form −2 ln(1 − p) at p = 0.5 is 2 ln 2 (NIST table value 1.386)
    close("median", chi2_quantile(2, 0.5), 2.0 * 2f64.ln(), 1e-12);
}

/// Names used in files, reports and on the command line.
#[test]
fn names() {
    assert_eq!(CovarianceKind::Diagonal.as_str(), "diagonal");
    assert_eq!(CovarianceKind::Full.as_str(), "full");
    assert_eq!(Similarity::Elk.as_str(), "elk");
    assert_eq!(Similarity::Bhattacharyya.as_str(), "bhattacharyya");
    assert_eq!(Similarity::Kl.as_str(), "kl");
}

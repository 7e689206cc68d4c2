//! `fit`: means and variances against NumPy, Ledoit–Wolf against scikit-learn, on the
//! occurrence fixture written by benches/interop/make.py. Reference values printed by that
//! script with NumPy 2.4.6 and scikit-learn 1.9.1 (`sklearn.covariance.LedoitWolf`, default
//! options) and recorded here.

use std::fs;
use std::path::Path;
use std::process::Command;

use treewright::model::fit::{FitOptions, fit};
use treewright::model::project::{Project, parse_npy2};

const DIR: &str = "tests/data/interop";

fn fixture() -> (Vec<String>, Vec<f64>, usize) {
    let bytes = fs::read(Path::new(DIR).join("occurrences.npy")).unwrap();
    let (_, d, data) = parse_npy2(&bytes, "occurrences.npy").unwrap();
    let ids: Vec<String> =
        serde_json::from_slice(&fs::read(Path::new(DIR).join("occurrences_ids.json")).unwrap())
            .unwrap();
    (ids, data, d)
}

fn close(a: &[f64], b: &[f64], tol: f64) {
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(b) {
        assert!((x - y).abs() <= tol * (1.0 + y.abs()), "{a:?}\n{b:?}");
    }
}

/// NumPy: `x.mean(axis=0)`, `x.var(axis=0, ddof=1)` for "plants" (40 rows), "succulent" (25).
const NUMPY: [(&str, [f64; 4], [f64; 4]); 2] = [
    (
        "plants",
        [
            3.7525154526750173,
            -1.460249837700991,
            1.1519167187870314,
            4.48888371683325,
        ],
        [
            1.955168238060433,
            0.9013500222644968,
            1.108219824888483,
            0.21203608885192865,
        ],
    ),
    (
        "succulent",
        [
            -2.414818548725272,
            -3.266234779546329,
            -2.885943476341388,
            5.716343903006731,
        ],
        [
            0.8218091879205219,
            1.4312008317356055,
            0.4127135184000965,
            0.4498198320674059,
        ],
    ),
];

#[test]
fn means_and_unmoderated_variances_match_numpy() {
    let (ids, data, d) = fixture();
    let opt = FitOptions {
        prior_df: 0.0,
        ..FitOptions::default()
    };
    let f = fit(&ids, &data, d, &opt).unwrap();
    for (id, m, v) in NUMPY {
        let i = f.ids.iter().position(|x| x == id).unwrap();
        close(&f.means[i * d..(i + 1) * d], &m, 1e-12);
        close(&f.variances[i * d..(i + 1) * d], &v, 1e-12);
    }
    // "compost" occurs once: left out under the default minimum count of 2
    assert_eq!(f.left_out, vec![("compost".to_string(), 1)]);
}

#[test]
fn moderated_variance_is_the_weighted_mean_of_own_and_pooled() {
    // Smyth (2004), eq. for the posterior variance s̃² = (d₀s₀² + d s²)/(d₀ + d)
    let (ids, data, d) = fixture();
    let f = fit(&ids, &data, d, &FitOptions::default()).unwrap();
    let i = f.ids.iter().position(|x| x == "shade-loving").unwrap();
    assert_eq!(f.counts[i], 3);
    for j in 0..d {
        let s2 = f.sample_variances[i * d + j];
        let want = (4.0 * f.pooled[j] + 2.0 * s2) / 6.0;
        assert!((f.variances[i * d + j] - want).abs() < 1e-12);
    }
}

/// scikit-learn 1.9.1: `LedoitWolf().fit(x)`: `shrinkage_` and `covariance_.ravel()`.
const SKLEARN: [(&str, f64, [f64; 16]); 2] = [
    (
        "plants",
        0.13083721676441942,
        [
            1.7900793733713796,
            0.6236808948453535,
            0.14192106545959118,
            -0.40453096679109524,
            0.6236808948453535,
            0.8970382892424689,
            0.6426550175549992,
            -0.13096776934984442,
            0.14192106545959118,
            0.6426550175549992,
            1.0723467343231263,
            0.08878712585783244,
            -0.40453096679109524,
            -0.13096776934984442,
            0.08878712585783244,
            0.3128904227767336,
        ],
    ),
    (
        "succulent",
        0.32198051769220976,
        [
            0.7756691586728568,
            0.13231298464701632,
            -0.11975243732120357,
            0.23780252480764524,
            0.13231298464701632,
            1.1723213892605653,
            -0.39295052030027644,
            -0.09599358283760033,
            -0.11975243732120357,
            -0.39295052030027644,
            0.5093893179727629,
            0.03508804537107658,
            0.23780252480764524,
            -0.09599358283760033,
            0.03508804537107658,
            0.5335417694125002,
        ],
    ),
];

#[test]
fn ledoit_wolf_matches_scikit_learn() {
    let (ids, data, d) = fixture();
    let opt = FitOptions {
        full: true,
        ..FitOptions::default()
    };
    let f = fit(&ids, &data, d, &opt).unwrap();
    let covs = f.covariances.as_ref().unwrap();
    let shr = f.shrinkage.as_ref().unwrap();
    for (id, k, c) in SKLEARN {
        let i = f.ids.iter().position(|x| x == id).unwrap();
        assert!((shr[i] - k).abs() < 1e-12, "{id}: {} vs {k}", shr[i]);
        close(&covs[i * d * d..(i + 1) * d * d], &c, 1e-12);
    }
}

#[test]
fn cli_fits_a_pandas_parquet_table_into_a_loadable_project() {
    let out = tempfile::tempdir().unwrap();
    let dir = out.path().join("fitted");
    let o = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(["fit", &format!("{DIR}/occurrences.parquet"), "--out"])
        .arg(&dir)
        .arg("--full")
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(
        stdout.contains("fitted 4 phrases (dimension 4) from 81 occurrences"),
        "{stdout}"
    );
    assert!(stdout.contains("  compost (1)"), "{stdout}");
    let p = Project::load(&dir).unwrap();
    assert_eq!(p.gaussians.len(), 4);
    // the Parquet vectors are float32: means agree with NumPy's float64 ones to ~1e-6
    let i = p.phrases.get("plants").unwrap() as usize;
    let m: Vec<f64> = p.gaussians.mean(i).iter().map(|&v| f64::from(v)).collect();
    close(&m, &NUMPY[0].1, 1e-5);
}

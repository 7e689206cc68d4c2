//! Knee (elbow) detection with the kneedle algorithm of Satopaa, Albrecht, Irwin and
//! Raghavan (2011), "Finding a 'Kneedle' in a Haystack: Detecting Knee Points in System
//! Behavior".
//!
//! The curve is normalised to the unit square and turned into an increasing concave shape;
//! the difference curve `yd = yn − xn` is scanned for local maxima. A local maximum at `i`
//! becomes a knee when `yd` drops below the threshold `T = yd(i) − S · mean(Δxn)` before
//! the next local maximum is reached (S is the sensitivity, 1 by default). The first knee
//! found is returned (the paper's offline use). The steps, the builder's use of them and a
//! recomputed check of the paper's Figure 2 example are in `docs/maths.md` §12.

/// The shape of the curve, which tells kneedle how to turn it into an increasing concave one.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Curve {
    /// Rises steeply, then flattens (e.g. the paper's Figure 2 example).
    ConcaveIncreasing,
    /// Falls steeply, then flattens (e.g. k-means inertia against k).
    ConvexDecreasing,
    /// Flat at first, then falls steeply.
    ConcaveDecreasing,
    /// Flat at first, then rises steeply.
    ConvexIncreasing,
}

/// A detected knee.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Knee {
    /// Index of the knee in the input arrays.
    pub index: usize,
    /// Its x value.
    pub x: f64,
    /// Its y value.
    pub y: f64,
    /// The normalised difference value `yd` at the knee (how pronounced it is, in [0, 1]).
    pub strength: f64,
}

/// Why kneedle could not run on the input.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum KneedleError {
    /// x and y have different lengths.
    #[error("x has {x} values but y has {y}")]
    LengthMismatch {
        /// Length of x.
        x: usize,
        /// Length of y.
        y: usize,
    },
    /// A value is NaN or infinite.
    #[error("{axis}[{index}] is {value}, not a finite number")]
    NonFinite {
        /// "x" or "y".
        axis: &'static str,
        /// Position.
        index: usize,
        /// The value.
        value: f64,
    },
    /// x is not strictly increasing.
    #[error(
        "x must be strictly increasing: x[{index}] = {value} does not exceed the value before it"
    )]
    NotIncreasing {
        /// Position of the offending value.
        index: usize,
        /// The value.
        value: f64,
    },
    /// The sensitivity is negative or not finite.
    #[error("sensitivity is {0}; it must be a finite number ≥ 0")]
    BadSensitivity(f64),
}

/// Find the first knee of the curve `(x, y)` of the given shape with sensitivity `s`.
///
/// Returns `Ok(None)` when the curve has fewer than 3 points, is flat, or has no knee at this
/// sensitivity. x must be strictly increasing.
pub fn kneedle(x: &[f64], y: &[f64], curve: Curve, s: f64) -> Result<Option<Knee>, KneedleError> {
    if x.len() != y.len() {
        return Err(KneedleError::LengthMismatch {
            x: x.len(),
            y: y.len(),
        });
    }
    if !(s.is_finite() && s >= 0.0) {
        return Err(KneedleError::BadSensitivity(s));
    }
    for (axis, v) in [("x", x), ("y", y)] {
        if let Some((index, &value)) = v.iter().enumerate().find(|(_, a)| !a.is_finite()) {
            return Err(KneedleError::NonFinite { axis, index, value });
        }
    }
    for i in 1..x.len() {
        if x[i] <= x[i - 1] {
            return Err(KneedleError::NotIncreasing {
                index: i,
                value: x[i],
            });
        }
    }
    let n = x.len();
    if n < 3 {
        return Ok(None);
    }
    let (xmin, xmax) = (x[0], x[n - 1]);
    let ymin = y.iter().copied().fold(f64::INFINITY, f64::min);
    let ymax = y.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if ymax - ymin <= 0.0 {
        return Ok(None);
    }
    let xn: Vec<f64> = x.iter().map(|&v| (v - xmin) / (xmax - xmin)).collect();
    let yn: Vec<f64> = y.iter().map(|&v| (v - ymin) / (ymax - ymin)).collect();
    // transform to an increasing concave curve, scanned in increasing transformed x;
    // `order[j]` is the input index of the j-th transformed point
    let (flip_x, flip_y) = match curve {
        Curve::ConcaveIncreasing => (false, false),
        Curve::ConvexDecreasing => (false, true),
        Curve::ConcaveDecreasing => (true, false),
        Curve::ConvexIncreasing => (true, true),
    };
    let order: Vec<usize> = if flip_x {
        (0..n).rev().collect()
    } else {
        (0..n).collect()
    };
    let tx: Vec<f64> = order
        .iter()
        .map(|&i| if flip_x { 1.0 - xn[i] } else { xn[i] })
        .collect();
    let ty: Vec<f64> = order
        .iter()
        .map(|&i| if flip_y { 1.0 - yn[i] } else { yn[i] })
        .collect();
    let yd: Vec<f64> = tx.iter().zip(&ty).map(|(a, b)| b - a).collect();
    let mean_dx = (tx[n - 1] - tx[0]) / (n - 1) as f64;

    let is_local_max = |j: usize| j > 0 && j + 1 < n && yd[j] >= yd[j - 1] && yd[j] > yd[j + 1];
    let mut j = 1;
    while j + 1 < n {
        if is_local_max(j) {
            let threshold = yd[j] - s * mean_dx;
            for k in (j + 1)..n {
                if k + 1 < n && is_local_max(k) {
                    break;
                }
                if yd[k] < threshold {
                    let index = order[j];
                    return Ok(Some(Knee {
                        index,
                        x: x[index],
                        y: y[index],
                        strength: yd[j],
                    }));
                }
            }
        }
        j += 1;
    }
    Ok(None)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn figure2() -> (Vec<f64>, Vec<f64>) {
        let x: Vec<f64> = (0..10).map(|i| i as f64 / 9.0).collect();
        let y: Vec<f64> = x.iter().map(|&v| -1.0 / (v + 0.1) + 5.0).collect();
        (x, y)
    }

    #[test]
    fn paper_figure_2_example() {
        // Satopaa et al. 2011, Figure 2: y = −1/(x + 0.1) + 5 on 10 evenly spaced points of
        // [0, 1] has its knee at x ≈ 0.22 (with S = 1).
        let (x, y) = figure2();
        let knee = kneedle(&x, &y, Curve::ConcaveIncreasing, 1.0)
            .unwrap()
            .expect("the paper's example has a knee");
        assert!((knee.x - 0.22).abs() < 0.01, "knee at {}", knee.x);
        assert_eq!(knee.index, 2);
    }

    #[test]
    fn mirrored_shapes_give_the_mirrored_knee() {
        let (x, y) = figure2();
        // −y is convex decreasing with the same knee
        let neg: Vec<f64> = y.iter().map(|v| -v).collect();
        let k = kneedle(&x, &neg, Curve::ConvexDecreasing, 1.0)
            .unwrap()
            .unwrap();
        assert_eq!(k.index, 2);
        // reversing x (x' = 1 − x) turns it into a concave decreasing curve: knee at 1 − 0.22
        let xr: Vec<f64> = x.iter().rev().map(|v| 1.0 - v).collect();
        let yr: Vec<f64> = y.iter().rev().copied().collect();
        let k = kneedle(&xr, &yr, Curve::ConcaveDecreasing, 1.0)
            .unwrap()
            .unwrap();
        assert!((k.x - (1.0 - 2.0 / 9.0)).abs() < 1e-12);
        let nr: Vec<f64> = yr.iter().map(|v| -v).collect();
        let k = kneedle(&xr, &nr, Curve::ConvexIncreasing, 1.0)
            .unwrap()
            .unwrap();
        assert!((k.x - (1.0 - 2.0 / 9.0)).abs() < 1e-12);
    }

    #[test]
    fn straight_lines_and_flat_curves_have_no_knee() {
        let x: Vec<f64> = (0..8).map(f64::from).collect();
        let line: Vec<f64> = x.iter().map(|v| 3.0 - 0.5 * v).collect();
        assert_eq!(
            kneedle(&x, &line, Curve::ConvexDecreasing, 1.0).unwrap(),
            None
        );
        let flat = vec![2.0; 8];
        assert_eq!(
            kneedle(&x, &flat, Curve::ConvexDecreasing, 1.0).unwrap(),
            None
        );
        assert_eq!(
            kneedle(&x[..2], &line[..2], Curve::ConvexDecreasing, 1.0).unwrap(),
            None
        );
    }

    #[test]
    fn higher_sensitivity_is_more_conservative() {
        let (x, y) = figure2();
        // a very large S puts the threshold below every reachable yd value
        assert_eq!(
            kneedle(&x, &y, Curve::ConcaveIncreasing, 100.0).unwrap(),
            None
        );
    }

    #[test]
    fn bad_input_is_an_error() {
        assert!(matches!(
            kneedle(&[0.0, 1.0], &[1.0], Curve::ConvexDecreasing, 1.0),
            Err(KneedleError::LengthMismatch { .. })
        ));
        assert!(matches!(
            kneedle(
                &[0.0, 0.0, 1.0],
                &[1.0, 2.0, 3.0],
                Curve::ConvexDecreasing,
                1.0
            ),
            Err(KneedleError::NotIncreasing { index: 1, .. })
        ));
        assert!(matches!(
            kneedle(
                &[0.0, 1.0, 2.0],
                &[1.0, f64::NAN, 3.0],
                Curve::ConvexDecreasing,
                1.0
            ),
            Err(KneedleError::NonFinite {
                axis: "y",
                index: 1,
                ..
            })
        ));
        assert!(matches!(
            kneedle(
                &[0.0, 1.0, 2.0],
                &[1.0, 2.0, 3.0],
                Curve::ConvexDecreasing,
                -1.0
            ),
            Err(KneedleError::BadSensitivity(_))
        ));
    }
}

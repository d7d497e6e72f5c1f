//! Symmetric eigendecomposition by the cyclic Jacobi method.
//!
//! The covariance matrices here are small (`p` ≤ a few dozen sensors), where
//! Jacobi rotations are simple, accurate to rounding (eigenvalues to high
//! relative accuracy) and fast enough: each sweep costs `O(p³)` and 6-10
//! sweeps converge.

use ndarray::{Array1, Array2, ArrayView2};

/// Eigenvalues (descending) and unit eigenvectors (columns, same order) of a
/// symmetric matrix. Each eigenvector's sign is fixed so that its entry of
/// largest magnitude is positive (the convention of the check catalogue §14;
/// T², SPE and contributions do not depend on it).
///
/// ```text
/// repeat: for each p < q: rotate rows/columns p, q by θ with
///   tan 2θ = 2 a_pq / (a_qq - a_pp)   so that a_pq becomes 0
/// until  Σ_{p≠q} a_pq² ≤ (1e-15 · ‖A‖_F)²  or 100 sweeps
/// ```
///
/// # Panics
/// If `a` is not square.
///
/// # References
/// G. H. Golub and C. F. Van Loan (2013), *Matrix Computations*, 4th ed.,
/// Johns Hopkins University Press, §8.5 "Jacobi methods".
pub fn symmetric_eigen(a: ArrayView2<'_, f64>) -> (Array1<f64>, Array2<f64>) {
    let n = a.nrows();
    assert_eq!(n, a.ncols(), "symmetric_eigen: matrix must be square");
    let mut m = a.to_owned();
    let mut v = Array2::<f64>::eye(n);
    let frob2: f64 = m.iter().map(|x| x * x).sum();
    let tol = (1e-15f64).powi(2) * frob2.max(f64::MIN_POSITIVE);
    for _sweep in 0..100 {
        let off: f64 = (0..n)
            .flat_map(|i| (0..n).filter(move |&j| j != i).map(move |j| (i, j)))
            .map(|(i, j)| m[[i, j]] * m[[i, j]])
            .sum();
        if off <= tol {
            break;
        }
        for p in 0..n {
            for q in p + 1..n {
                let apq = m[[p, q]];
                if apq == 0.0 {
                    continue;
                }
                let theta = (m[[q, q]] - m[[p, p]]) / (2.0 * apq);
                let t = theta.signum() / (theta.abs() + (theta * theta + 1.0).sqrt());
                let t = if theta == 0.0 { 1.0 } else { t };
                let c = 1.0 / (t * t + 1.0).sqrt();
                let s = t * c;
                for k in 0..n {
                    let mkp = m[[k, p]];
                    let mkq = m[[k, q]];
                    m[[k, p]] = c * mkp - s * mkq;
                    m[[k, q]] = s * mkp + c * mkq;
                }
                for k in 0..n {
                    let mpk = m[[p, k]];
                    let mqk = m[[q, k]];
                    m[[p, k]] = c * mpk - s * mqk;
                    m[[q, k]] = s * mpk + c * mqk;
                }
                for k in 0..n {
                    let vkp = v[[k, p]];
                    let vkq = v[[k, q]];
                    v[[k, p]] = c * vkp - s * vkq;
                    v[[k, q]] = s * vkp + c * vkq;
                }
            }
        }
    }
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&i, &j| m[[j, j]].total_cmp(&m[[i, i]]));
    let vals = Array1::from_iter(order.iter().map(|&i| m[[i, i]]));
    let mut vecs = Array2::<f64>::zeros((n, n));
    for (c, &i) in order.iter().enumerate() {
        let col = v.column(i);
        let big = col.iter().copied().fold(0.0f64, |b, x| if x.abs() > b.abs() { x } else { b });
        let sign = if big < 0.0 { -1.0 } else { 1.0 };
        for k in 0..n {
            vecs[[k, c]] = sign * col[k];
        }
    }
    (vals, vecs)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use ndarray::array;

    #[test]
    fn reconstructs_the_matrix_and_is_orthonormal() {
        let a = array![
            [4.0, 1.0, 0.5, 0.0],
            [1.0, 3.0, 0.2, 0.1],
            [0.5, 0.2, 2.0, 0.3],
            [0.0, 0.1, 0.3, 1.0]
        ];
        let (l, v) = symmetric_eigen(a.view());
        let back = v.dot(&Array2::from_diag(&l)).dot(&v.t());
        for (x, y) in back.iter().zip(a.iter()) {
            assert_relative_eq!(x, y, epsilon = 1e-13);
        }
        let id = v.t().dot(&v);
        for i in 0..4 {
            for j in 0..4 {
                assert_relative_eq!(id[[i, j]], if i == j { 1.0 } else { 0.0 }, epsilon = 1e-13);
            }
        }
        assert!(l.windows(2).into_iter().all(|w| w[0] >= w[1]));
        // trace is preserved
        assert_relative_eq!(l.sum(), 10.0, epsilon = 1e-13);
    }

    #[test]
    fn diagonal_and_one_by_one_inputs() {
        let (l, v) = symmetric_eigen(array![[2.0, 0.0], [0.0, 5.0]].view());
        assert_eq!(l.to_vec(), vec![5.0, 2.0]);
        assert_eq!(v[[1, 0]], 1.0);
        let (l, _) = symmetric_eigen(array![[3.0]].view());
        assert_eq!(l[0], 3.0);
    }
}

//! Cholesky factorisation of small symmetric positive-definite matrices (p up to a few dozen), for
//! Newton steps, inverse information matrices and quadratic-form tests.
//!
//! A = L Lᵀ by the column-by-column (Cholesky–Banachiewicz) recurrence (Golub & Van Loan, Matrix
//! Computations, 4th ed., §4.2). A pivot at or below `RELATIVE_PIVOT_TOLERANCE` times the column's
//! own diagonal means the column is (numerically) a linear combination of the columns before it,
//! and its index is returned so the caller can name the covariate. This is the same idea as R
//! survival's `cholesky2` (toler.chol), there relative to the largest diagonal.

/// Pivots at or below this fraction of the original diagonal count as zero.
pub(crate) const RELATIVE_PIVOT_TOLERANCE: f64 = 1e-11;

/// The lower-triangular factor of a p × p matrix, row-major.
#[derive(Debug, Clone)]
pub(crate) struct Cholesky {
    size: usize,
    lower: Vec<f64>,
}

impl Cholesky {
    /// Factorises the symmetric matrix `matrix` (row-major, size × size; only the lower triangle
    /// is read). `Err(j)` names the first column whose pivot is not clearly positive.
    pub fn new(matrix: &[f64], size: usize) -> Result<Self, usize> {
        assert_eq!(matrix.len(), size * size, "matrix must be size × size");
        let mut lower = vec![0.0; size * size];
        for j in 0..size {
            let diagonal = matrix[j * size + j];
            let mut pivot = diagonal;
            for k in 0..j {
                pivot -= lower[j * size + k] * lower[j * size + k];
            }
            if !(diagonal > 0.0 && pivot > RELATIVE_PIVOT_TOLERANCE * diagonal && pivot.is_finite())
            {
                return Err(j);
            }
            let root = pivot.sqrt();
            lower[j * size + j] = root;
            for i in j + 1..size {
                let mut value = matrix[i * size + j];
                for k in 0..j {
                    value -= lower[i * size + k] * lower[j * size + k];
                }
                lower[i * size + j] = value / root;
            }
        }
        Ok(Cholesky { size, lower })
    }

    /// Solves A x = b.
    pub fn solve(&self, b: &[f64]) -> Vec<f64> {
        let n = self.size;
        let l = &self.lower;
        let mut y = b.to_vec();
        for i in 0..n {
            for k in 0..i {
                y[i] -= l[i * n + k] * y[k];
            }
            y[i] /= l[i * n + i];
        }
        for i in (0..n).rev() {
            for k in i + 1..n {
                y[i] -= l[k * n + i] * y[k];
            }
            y[i] /= l[i * n + i];
        }
        y
    }

    /// A⁻¹, row-major.
    pub fn inverse(&self) -> Vec<f64> {
        let n = self.size;
        let mut inverse = vec![0.0; n * n];
        let mut unit = vec![0.0; n];
        for j in 0..n {
            unit.iter_mut().for_each(|u| *u = 0.0);
            unit[j] = 1.0;
            let column = self.solve(&unit);
            for i in 0..n {
                inverse[i * n + j] = column[i];
            }
        }
        // Symmetrise away rounding differences between the two triangles.
        for i in 0..n {
            for j in 0..i {
                let mean = 0.5 * (inverse[i * n + j] + inverse[j * n + i]);
                inverse[i * n + j] = mean;
                inverse[j * n + i] = mean;
            }
        }
        inverse
    }

    /// bᵀ A⁻¹ b, the quadratic form of score and Wald tests.
    pub fn quadratic_form(&self, b: &[f64]) -> f64 {
        self.solve(b).iter().zip(b).map(|(x, y)| x * y).sum()
    }
}

/// Rows of a row-major size × size matrix, for serialisation.
pub(crate) fn to_rows(matrix: &[f64], size: usize) -> Vec<Vec<f64>> {
    matrix.chunks(size.max(1)).map(|row| row.to_vec()).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_and_inverts_a_known_matrix() {
        // A = [[4, 2, 0.4], [2, 2, 0.5], [0.4, 0.5, 3]]; checked by multiplying back.
        let a = [4.0, 2.0, 0.4, 2.0, 2.0, 0.5, 0.4, 0.5, 3.0];
        let c = Cholesky::new(&a, 3).unwrap();
        let inverse = c.inverse();
        for i in 0..3 {
            for j in 0..3 {
                let product: f64 = (0..3).map(|k| a[i * 3 + k] * inverse[k * 3 + j]).sum();
                let identity = if i == j { 1.0 } else { 0.0 };
                assert!((product - identity).abs() < 1e-14, "({i},{j}) = {product}");
            }
        }
        let x = c.solve(&[1.0, 2.0, 3.0]);
        let back: Vec<f64> = (0..3)
            .map(|i| (0..3).map(|k| a[i * 3 + k] * x[k]).sum())
            .collect();
        for (b, e) in back.iter().zip([1.0, 2.0, 3.0]) {
            assert!((b - e).abs() < 1e-14);
        }
        assert!(
            (c.quadratic_form(&[1.0, 2.0, 3.0])
                - x.iter()
                    .zip([1.0, 2.0, 3.0])
                    .map(|(a, b)| a * b)
                    .sum::<f64>())
            .abs()
                < 1e-15
        );
    }

    #[test]
    fn names_the_first_dependent_column() {
        // Column 2 = column 0 + column 1.
        let a = [2.0, 1.0, 3.0, 1.0, 2.0, 3.0, 3.0, 3.0, 6.0];
        assert_eq!(Cholesky::new(&a, 3).unwrap_err(), 2);
        assert_eq!(Cholesky::new(&[0.0], 1).unwrap_err(), 0);
    }
}

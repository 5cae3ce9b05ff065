//! Kronecker-structured contrast and coding matrices (METHODS §1.1).
//!
//! A factorial design's matrices are Kronecker products of one small matrix per
//! factor. Cells are ordered row-major with the last factor varying fastest, so a
//! vector over cells is a k-way tensor and `(⊗_f M_f) x` is a sequence of mode
//! products: O(C·Σ a_f) work and no C×C matrix. Small designs also get the dense
//! products, which the fast resampling loops use.

/// A small dense matrix, row-major.
#[derive(Debug, Clone, PartialEq)]
pub struct Small {
    /// Number of rows.
    pub rows: usize,
    /// Number of columns.
    pub cols: usize,
    /// Entries, row-major.
    pub data: Vec<f64>,
}

impl Small {
    /// Entry (i, j).
    pub fn at(&self, i: usize, j: usize) -> f64 {
        self.data[i * self.cols + j]
    }

    /// The transpose.
    pub fn transpose(&self) -> Small {
        let mut data = vec![0.0; self.data.len()];
        for i in 0..self.rows {
            for j in 0..self.cols {
                data[j * self.rows + i] = self.at(i, j);
            }
        }
        Small { rows: self.cols, cols: self.rows, data }
    }
}

/// H_a = [I_{a−1} | −1_{a−1}] ((a−1)×a): the hypothesis block of a factor in a term
/// (METHODS §1.1). Its rows sum to zero.
pub fn h_matrix(a: usize) -> Small {
    let mut data = vec![0.0; (a - 1) * a];
    for i in 0..a - 1 {
        data[i * a + i] = 1.0;
        data[i * a + a - 1] = -1.0;
    }
    Small { rows: a - 1, cols: a, data }
}

/// 1'_a (1×a): sums a factor out of a hypothesis.
pub fn ones_row(a: usize) -> Small {
    Small { rows: 1, cols: a, data: vec![1.0; a] }
}

/// K_a (a×(a−1)): sum-to-zero coding, rows e_j' for j < a and a last row of −1
/// (patsy/statsmodels `C(x, Sum)`).
pub fn k_matrix(a: usize) -> Small {
    h_matrix(a).transpose()
}

/// 1_a (a×1): a factor absent from a term in the coding matrix.
pub fn ones_col(a: usize) -> Small {
    Small { rows: a, cols: 1, data: vec![1.0; a] }
}

/// Applies `⊗_f mats[f]` to `x`, a tensor of shape `dims` (row-major, last fastest,
/// `dims[f] == mats[f].cols`). Returns the result, of shape `mats[f].rows`.
pub fn kron_apply(mats: &[&Small], x: &[f64]) -> Vec<f64> {
    let mut dims: Vec<usize> = mats.iter().map(|m| m.cols).collect();
    debug_assert_eq!(dims.iter().product::<usize>(), x.len());
    let mut cur = x.to_vec();
    for (f, m) in mats.iter().enumerate() {
        let outer: usize = dims[..f].iter().product();
        let inner: usize = dims[f + 1..].iter().product();
        let mut out = vec![0.0; outer * m.rows * inner];
        for o in 0..outer {
            for r in 0..m.rows {
                let dst = &mut out[(o * m.rows + r) * inner..(o * m.rows + r + 1) * inner];
                for j in 0..m.cols {
                    let w = m.at(r, j);
                    if w == 0.0 {
                        continue;
                    }
                    let src = &cur[(o * m.cols + j) * inner..(o * m.cols + j + 1) * inner];
                    for (d, s) in dst.iter_mut().zip(src) {
                        *d += w * s;
                    }
                }
            }
        }
        dims[f] = m.rows;
        cur = out;
    }
    cur
}

/// The dense Kronecker product `⊗_f mats[f]` (first factor slowest).
pub fn kron_dense(mats: &[&Small]) -> Small {
    let mut acc = Small { rows: 1, cols: 1, data: vec![1.0] };
    for m in mats {
        let rows = acc.rows * m.rows;
        let cols = acc.cols * m.cols;
        let mut data = vec![0.0; rows * cols];
        for i in 0..acc.rows {
            for j in 0..acc.cols {
                let a = acc.at(i, j);
                if a == 0.0 {
                    continue;
                }
                for k in 0..m.rows {
                    for l in 0..m.cols {
                        data[(i * m.rows + k) * cols + j * m.cols + l] = a * m.at(k, l);
                    }
                }
            }
        }
        acc = Small { rows, cols, data };
    }
    acc
}

/// Factor blocks of the hypothesis matrix L_S = ⊗_f (H_{a_f} if f ∈ S else 1'_{a_f}).
pub fn hypothesis_blocks(shape: &[usize], term: &[usize]) -> Vec<Small> {
    shape.iter().enumerate().map(|(f, &a)| if term.contains(&f) { h_matrix(a) } else { ones_row(a) }).collect()
}

/// Factor blocks of the coding matrix A_S = ⊗_f (K_{a_f} if f ∈ S else 1_{a_f}).
/// The empty term gives the intercept column 1_C.
pub fn coding_blocks(shape: &[usize], term: &[usize]) -> Vec<Small> {
    shape.iter().enumerate().map(|(f, &a)| if term.contains(&f) { k_matrix(a) } else { ones_col(a) }).collect()
}

/// Borrows a block list for [`kron_apply`] / [`kron_dense`].
pub fn refs(blocks: &[Small]) -> Vec<&Small> {
    blocks.iter().collect()
}

/// Transposes every block (so `kron_apply` computes the transposed product).
pub fn transposed(blocks: &[Small]) -> Vec<Small> {
    blocks.iter().map(Small::transpose).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mode_products_equal_the_dense_kronecker_product() {
        // Property test on a 3×2×4 tensor with mixed blocks.
        let blocks = vec![h_matrix(3), ones_row(2), k_matrix(4).transpose()];
        let x: Vec<f64> = (0..24).map(|i| ((i * 7) % 11) as f64 - 3.5).collect();
        let fast = kron_apply(&refs(&blocks), &x);
        let dense = kron_dense(&refs(&blocks));
        assert_eq!(dense.rows, 2 * 3);
        for (r, f) in fast.iter().enumerate() {
            let v: f64 = (0..dense.cols).map(|c| dense.at(r, c) * x[c]).sum();
            assert!((v - f).abs() < 1e-12);
        }
    }

    #[test]
    fn coding_matches_patsy_sum_contrasts() {
        // patsy `C(x, Sum)` for three levels: rows (1,0), (0,1), (−1,−1) (from memory of
        // patsy's documented Sum coding; the statsmodels fixtures confirm it end to end).
        let k = k_matrix(3);
        assert_eq!(k.data, vec![1.0, 0.0, 0.0, 1.0, -1.0, -1.0]);
    }
}

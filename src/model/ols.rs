//! Observation-level least squares (nalgebra QR): the slow, obvious reference.
//!
//! quorum never fits models this way in its analyses (the cell-sum forms are exact and
//! far faster); this file exists so that tests can check every fast path against a
//! full refit of the sum-coded model, as statsmodels would do it.

use crate::config::SsType;
use crate::design::forms::nuisance;
use crate::design::{kron, Design};
use nalgebra::{DMatrix, DVector};

/// The observation-level sum-coded model matrix X = Z A for the intercept and the
/// given terms (indices into the design's terms), rows in canonical order.
pub fn model_matrix(design: &Design, terms: &[usize]) -> DMatrix<f64> {
    let shape = design.shape();
    let mut blocks: Vec<kron::Small> =
        vec![kron::Small { rows: design.n_cells(), cols: 1, data: vec![1.0; design.n_cells()] }];
    for &t in terms {
        let cb = kron::coding_blocks(shape, &design.terms()[t].factors);
        blocks.push(kron::kron_dense(&kron::refs(&cb)));
    }
    let p: usize = blocks.iter().map(|b| b.cols).sum();
    let mut x = DMatrix::zeros(design.n_obs(), p);
    for c in 0..design.n_cells() {
        for i in design.cell_range(c) {
            let mut col = 0;
            for b in &blocks {
                for j in 0..b.cols {
                    x[(i, col)] = b.at(c, j);
                    col += 1;
                }
            }
        }
    }
    x
}

/// Residual sum of squares of the least-squares fit of `y` on `x` (Householder QR).
pub fn rss(x: &DMatrix<f64>, y: &[f64]) -> f64 {
    let yv = DVector::from_column_slice(y);
    let qr = x.clone().qr();
    let qty = qr.q().transpose() * &yv;
    let fitted = qr.q() * qty;
    (yv - fitted).norm_squared()
}

/// SS of term `t` by refitting the nuisance and extended models (METHODS §1.2):
/// RSS(𝒯₀) − RSS(𝒯₀ ∪ {S}).
pub fn refit_ss(design: &Design, y: &[f64], t: usize, ty: SsType) -> f64 {
    let terms: Vec<Vec<usize>> = design.terms().iter().map(|x| x.factors.clone()).collect();
    let reduced = nuisance(&terms, t, ty);
    let mut full = reduced.clone();
    full.push(t);
    rss(&model_matrix(design, &reduced), y) - rss(&model_matrix(design, &full), y)
}

//! Sums of squares as quadratic forms in the vector of cell sums (METHODS §1.2).
//!
//! Every model here has columns that are constant within cells, so each term's sum of
//! squares of any SS type is `s'Q s` for the vector `s` of cell sums, with `Q` depending
//! only on the cell sizes. For designs up to [`DENSE_CELL_LIMIT`] cells we store a
//! factor `X` (q×C) with `Q = X'X`, so one SS costs O(C·q): this is the fast path of
//! every resampling loop. Larger designs never form C×C matrices: they solve with
//! preconditioned conjugate gradients on the Kronecker-structured operators of
//! [`super::kron`].
//!
//! * Type III: `X = R⁻ᵀ L_S D⁻¹` with `R'R = L_S D⁻¹ L_S'` (the L-form).
//! * Types I and II: `X = R⁻ᵀ Ã'`, where `Ã = A_S − A₀(A₀'DA₀)⁻¹A₀'DA_S` is the term's
//!   coding block made D-orthogonal to the nuisance model `A₀` and `R'R = Ã'DÃ`.

use super::kron::{self, Small};
use super::Layout;
use crate::config::SsType;
use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// Designs with more cells than this use the matrix-free path.
pub const DENSE_CELL_LIMIT: usize = 2048;

/// How the forms are evaluated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Strategy {
    /// Dense factors up to [`DENSE_CELL_LIMIT`] cells, matrix-free above.
    Auto,
    /// Always dense (tests).
    Dense,
    /// Always matrix-free (tests).
    MatrixFree,
}

#[derive(Debug, Clone)]
enum TermForm {
    /// Rows of X (q×C, row-major).
    Dense {
        q: usize,
        x: Vec<f64>,
    },
    MatrixFree,
}

/// The quadratic forms of every term for one SS type and one set of cell sizes.
#[derive(Debug, Clone)]
pub struct SsForms {
    ty: SsType,
    shape: Vec<usize>,
    terms: Vec<Vec<usize>>,
    n: Vec<f64>,
    forms: Vec<TermForm>,
}

impl SsForms {
    /// Builds the forms of every term of `layout` for cell sizes `n` (all ≥ 1).
    ///
    /// # Errors
    /// An internal error if a Gram matrix is not positive definite (impossible for a
    /// complete factorial; it would mean a bug).
    pub fn new(layout: &Layout, n: &[usize], ty: SsType) -> Result<SsForms> {
        Self::with_strategy(layout, n, ty, Strategy::Auto)
    }

    /// As [`SsForms::new`], choosing the evaluation strategy.
    ///
    /// # Errors
    /// As [`SsForms::new`].
    pub fn with_strategy(layout: &Layout, n: &[usize], ty: SsType, strategy: Strategy) -> Result<SsForms> {
        let c = layout.n_cells();
        let dense = match strategy {
            Strategy::Auto => c <= DENSE_CELL_LIMIT,
            Strategy::Dense => true,
            Strategy::MatrixFree => false,
        };
        let terms: Vec<Vec<usize>> = layout.terms.iter().map(|t| t.factors.clone()).collect();
        let nf: Vec<f64> = n.iter().map(|&v| v as f64).collect();
        let mut forms = Vec::with_capacity(terms.len());
        for (t, term) in terms.iter().enumerate() {
            forms.push(if dense {
                let x = match ty {
                    SsType::Three => dense_type3(&layout.shape, term, &nf)?,
                    SsType::One | SsType::Two => {
                        let nuisance = nuisance_terms(&terms, t, ty);
                        dense_residualized(&layout.shape, term, &nuisance, &nf)?
                    }
                };
                TermForm::Dense { q: layout.terms[t].df, x }
            } else {
                TermForm::MatrixFree
            });
        }
        Ok(SsForms { ty, shape: layout.shape.clone(), terms, n: nf, forms })
    }

    /// Number of terms.
    pub fn n_terms(&self) -> usize {
        self.forms.len()
    }

    /// The SS type.
    pub fn ss_type(&self) -> SsType {
        self.ty
    }

    /// Sum of squares of term `t` for cell sums `s` (any shift of the data gives the
    /// same value; pass sums of centred data for accuracy).
    pub fn ss(&self, t: usize, s: &[f64]) -> f64 {
        match &self.forms[t] {
            TermForm::Dense { q, x } => {
                let c = s.len();
                (0..*q)
                    .map(|r| {
                        let row = &x[r * c..(r + 1) * c];
                        let v: f64 = row.iter().zip(s).map(|(a, b)| a * b).sum();
                        v * v
                    })
                    .sum()
            }
            TermForm::MatrixFree => match self.ty {
                SsType::Three => self.matrix_free_type3(t, s),
                SsType::One | SsType::Two => self.matrix_free_residualized(t, s),
            },
        }
    }

    /// The dense factor of term `t` as `(rows of X, q)`, when the dense path is used.
    /// `ss = Σ_r (X_r · s)²`; the resampling loops evaluate it without allocation.
    pub fn dense(&self, t: usize) -> Option<(&[f64], usize)> {
        match &self.forms[t] {
            TermForm::Dense { q, x } => Some((x, *q)),
            TermForm::MatrixFree => None,
        }
    }

    fn matrix_free_type3(&self, t: usize, s: &[f64]) -> f64 {
        let term = &self.terms[t];
        let l_blocks = kron::hypothesis_blocks(&self.shape, term);
        let lt_blocks = kron::transposed(&l_blocks);
        let mu: Vec<f64> = s.iter().zip(&self.n).map(|(a, b)| a / b).collect();
        let b = kron::kron_apply(&kron::refs(&l_blocks), &mu);
        let n_bar = harmonic_mean(&self.n);
        let inv_blocks = gram_inverse_blocks(&self.shape, term);
        let z = pcg(
            |v| {
                let mut w = kron::kron_apply(&kron::refs(&lt_blocks), v);
                for (wi, ni) in w.iter_mut().zip(&self.n) {
                    *wi /= ni;
                }
                kron::kron_apply(&kron::refs(&l_blocks), &w)
            },
            |v| kron::kron_apply(&kron::refs(&inv_blocks), v).into_iter().map(|x| x * n_bar).collect(),
            &b,
        );
        b.iter().zip(&z).map(|(a, c)| a * c).sum()
    }

    fn matrix_free_residualized(&self, t: usize, s: &[f64]) -> f64 {
        let nuisance = nuisance_terms(&self.terms, t, self.ty);
        let mut with_term = nuisance.clone();
        with_term.push(self.terms[t].clone());
        let f1 = self.weighted_fit(&with_term, s);
        let f0 = self.weighted_fit(&nuisance, s);
        f1.iter().zip(&f0).zip(&self.n).map(|((a, b), n)| n * (a - b) * (a - b)).sum()
    }

    /// Fitted cell means of the D-weighted least-squares fit of the cell means on the
    /// intercept and `set`'s coding columns (normal equations A'DAβ = A's, solved by PCG).
    fn weighted_fit(&self, set: &[Vec<usize>], s: &[f64]) -> Vec<f64> {
        let mut blocks: Vec<(Vec<Small>, Vec<Small>, Vec<Small>)> = Vec::new();
        for term in std::iter::once(&Vec::new()).chain(set.iter()) {
            let a = kron::coding_blocks(&self.shape, term);
            let at = kron::transposed(&a);
            let inv = gram_inverse_blocks(&self.shape, term);
            blocks.push((a, at, inv));
        }
        let sizes: Vec<usize> = blocks.iter().map(|(a, _, _)| a.iter().map(|m| m.cols).product()).collect();
        let offsets: Vec<usize> = sizes
            .iter()
            .scan(0, |acc, &k| {
                let o = *acc;
                *acc += k;
                Some(o)
            })
            .collect();
        let total: usize = sizes.iter().sum();
        let apply_a = |beta: &[f64]| -> Vec<f64> {
            let mut out = vec![0.0; s.len()];
            for (i, (a, _, _)) in blocks.iter().enumerate() {
                let part = kron::kron_apply(&kron::refs(a), &beta[offsets[i]..offsets[i] + sizes[i]]);
                for (o, p) in out.iter_mut().zip(part) {
                    *o += p;
                }
            }
            out
        };
        let apply_at = |v: &[f64]| -> Vec<f64> {
            let mut out = Vec::with_capacity(total);
            for (_, at, _) in &blocks {
                out.extend(kron::kron_apply(&kron::refs(at), v));
            }
            out
        };
        let n_bar = harmonic_mean(&self.n);
        let rhs = apply_at(s);
        let beta = pcg(
            |b| {
                let mut v = apply_a(b);
                for (vi, ni) in v.iter_mut().zip(&self.n) {
                    *vi *= ni;
                }
                apply_at(&v)
            },
            |r| {
                let mut out = Vec::with_capacity(total);
                for (i, (_, _, inv)) in blocks.iter().enumerate() {
                    let part = kron::kron_apply(&kron::refs(inv), &r[offsets[i]..offsets[i] + sizes[i]]);
                    out.extend(part.into_iter().map(|x| x / n_bar));
                }
                out
            },
            &rhs,
        );
        apply_a(&beta)
    }
}

/// Indices of the terms in the nuisance model 𝒯₀ of term `t` (METHODS §1.2): Type I,
/// the preceding terms; Type II, the terms that do not contain it; Type III, all others.
/// The intercept is always part of 𝒯₀ and not listed.
pub fn nuisance(terms: &[Vec<usize>], t: usize, ty: SsType) -> Vec<usize> {
    let s = &terms[t];
    (0..terms.len())
        .filter(|&u| match ty {
            SsType::One => u < t,
            SsType::Two => u != t && !s.iter().all(|f| terms[u].contains(f)),
            SsType::Three => u != t,
        })
        .collect()
}

fn nuisance_terms(terms: &[Vec<usize>], t: usize, ty: SsType) -> Vec<Vec<usize>> {
    nuisance(terms, t, ty).into_iter().map(|u| terms[u].clone()).collect()
}

fn harmonic_mean(n: &[f64]) -> f64 {
    n.len() as f64 / n.iter().map(|v| 1.0 / v).sum::<f64>()
}

/// Blocks of the exact inverse of L_S L_S' and of A_S'A_S (the two are equal):
/// (HH')⁻¹ = (K'K)⁻¹ = I − J/a for a factor in the term, 1/a otherwise.
fn gram_inverse_blocks(shape: &[usize], term: &[usize]) -> Vec<Small> {
    shape
        .iter()
        .enumerate()
        .map(|(f, &a)| {
            if term.contains(&f) {
                let m = a - 1;
                let mut data = vec![-1.0 / a as f64; m * m];
                for i in 0..m {
                    data[i * m + i] += 1.0;
                }
                Small { rows: m, cols: m, data }
            } else {
                Small { rows: 1, cols: 1, data: vec![1.0 / a as f64] }
            }
        })
        .collect()
}

/// Preconditioned conjugate gradients for a symmetric positive definite operator.
fn pcg(apply: impl Fn(&[f64]) -> Vec<f64>, precondition: impl Fn(&[f64]) -> Vec<f64>, b: &[f64]) -> Vec<f64> {
    let dim = b.len();
    let mut x = vec![0.0; dim];
    let b_norm = b.iter().map(|v| v * v).sum::<f64>().sqrt();
    if b_norm == 0.0 {
        return x;
    }
    let mut r = b.to_vec();
    let mut z = precondition(&r);
    let mut p = z.clone();
    let mut rz: f64 = r.iter().zip(&z).map(|(a, c)| a * c).sum();
    let max_iter = 10 * dim + 100;
    for _ in 0..max_iter {
        let ap = apply(&p);
        let pap: f64 = p.iter().zip(&ap).map(|(a, c)| a * c).sum();
        if pap <= 0.0 {
            break;
        }
        let alpha = rz / pap;
        for i in 0..dim {
            x[i] += alpha * p[i];
            r[i] -= alpha * ap[i];
        }
        let r_norm = r.iter().map(|v| v * v).sum::<f64>().sqrt();
        if r_norm <= 1e-15 * b_norm {
            break;
        }
        z = precondition(&r);
        let rz_new: f64 = r.iter().zip(&z).map(|(a, c)| a * c).sum();
        let beta = rz_new / rz;
        rz = rz_new;
        for i in 0..dim {
            p[i] = z[i] + beta * p[i];
        }
    }
    x
}

fn to_dmatrix(m: &Small) -> DMatrix<f64> {
    DMatrix::from_row_slice(m.rows, m.cols, &m.data)
}

fn dense_term_matrix(shape: &[usize], term: &[usize], hypothesis: bool) -> DMatrix<f64> {
    let blocks = if hypothesis { kron::hypothesis_blocks(shape, term) } else { kron::coding_blocks(shape, term) };
    to_dmatrix(&kron::kron_dense(&kron::refs(&blocks)))
}

fn row_major(m: &DMatrix<f64>) -> Vec<f64> {
    let mut out = Vec::with_capacity(m.len());
    for i in 0..m.nrows() {
        for j in 0..m.ncols() {
            out.push(m[(i, j)]);
        }
    }
    out
}

fn not_positive_definite(what: &str) -> Error {
    Error::internal(format!("{what} is not positive definite although every cell is observed"))
}

/// Type III: X = R⁻ᵀ L D⁻¹ with R'R = L D⁻¹ L'.
fn dense_type3(shape: &[usize], term: &[usize], n: &[f64]) -> Result<Vec<f64>> {
    let l = dense_term_matrix(shape, term, true);
    let d_inv = DVector::from_iterator(n.len(), n.iter().map(|v| 1.0 / v));
    let l_dinv = DMatrix::from_fn(l.nrows(), l.ncols(), |i, j| l[(i, j)] * d_inv[j]);
    let m = &l_dinv * l.transpose();
    let chol = m.cholesky().ok_or_else(|| not_positive_definite("L D⁻¹ L'"))?;
    let x = chol.l().solve_lower_triangular(&l_dinv).ok_or_else(|| not_positive_definite("L D⁻¹ L'"))?;
    Ok(row_major(&x))
}

/// Types I/II: X = R⁻ᵀ Ã', Ã = A_S − A₀(A₀'DA₀)⁻¹A₀'DA_S, R'R = Ã'DÃ.
fn dense_residualized(shape: &[usize], term: &[usize], nuisance: &[Vec<usize>], n: &[f64]) -> Result<Vec<f64>> {
    let c = n.len();
    let a_s = dense_term_matrix(shape, term, false);
    let mut cols: Vec<DMatrix<f64>> = vec![DMatrix::from_element(c, 1, 1.0)];
    cols.extend(nuisance.iter().map(|t| dense_term_matrix(shape, t, false)));
    let p0: usize = cols.iter().map(|m| m.ncols()).sum();
    let mut a0 = DMatrix::zeros(c, p0);
    let mut at = 0;
    for m in &cols {
        a0.view_mut((0, at), (c, m.ncols())).copy_from(m);
        at += m.ncols();
    }
    let d_a0 = DMatrix::from_fn(c, p0, |i, j| n[i] * a0[(i, j)]);
    let gram = a0.transpose() * &d_a0;
    let chol = gram.cholesky().ok_or_else(|| not_positive_definite("A₀'DA₀"))?;
    let cross = d_a0.transpose() * &a_s;
    let coef = chol.solve(&cross);
    let resid = &a_s - &a0 * coef;
    let d_resid = DMatrix::from_fn(c, resid.ncols(), |i, j| n[i] * resid[(i, j)]);
    let r_gram = resid.transpose() * d_resid;
    let r_chol = r_gram.cholesky().ok_or_else(|| not_positive_definite("Ã'DÃ"))?;
    let x = r_chol.l().solve_lower_triangular(&resid.transpose()).ok_or_else(|| not_positive_definite("Ã'DÃ"))?;
    Ok(row_major(&x))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    fn layout(shape: &[usize]) -> Layout {
        let names = ["A", "B", "C", "D"];
        Layout::new(
            shape
                .iter()
                .enumerate()
                .map(|(f, &a)| Factor {
                    name: names[f].into(),
                    levels: (0..a).map(|i| format!("l{i}")).collect(),
                    measured: false,
                })
                .collect(),
        )
    }

    /// Pseudo-random but fixed test data (no RNG dependency).
    fn fake(len: usize, seed: u64) -> Vec<f64> {
        let mut x = seed;
        (0..len)
            .map(|_| {
                x = x.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                ((x >> 11) as f64 / (1u64 << 53) as f64) * 10.0 - 3.0
            })
            .collect()
    }

    #[test]
    fn matrix_free_equals_dense_for_every_type() {
        // Property test: both evaluation strategies give the same SS on an unbalanced 3×2×4 design.
        let lay = layout(&[3, 2, 4]);
        let n: Vec<usize> = (0..lay.n_cells()).map(|c| 1 + (c * 5) % 4).collect();
        let s = fake(lay.n_cells(), 7);
        for ty in [SsType::One, SsType::Two, SsType::Three] {
            let dense = SsForms::with_strategy(&lay, &n, ty, Strategy::Dense).unwrap();
            let free = SsForms::with_strategy(&lay, &n, ty, Strategy::MatrixFree).unwrap();
            for t in 0..lay.terms.len() {
                let (a, b) = (dense.ss(t, &s), free.ss(t, &s));
                assert!((a - b).abs() <= 1e-9 * a.abs().max(1e-12), "{ty:?} term {t}: {a} vs {b}");
            }
        }
    }

    #[test]
    fn balanced_designs_give_equal_types() {
        // Property (METHODS §1.2): Types I, II, III coincide in balanced designs.
        let lay = layout(&[2, 3]);
        let n = vec![4; 6];
        let s = fake(6, 3);
        let f: Vec<SsForms> =
            [SsType::One, SsType::Two, SsType::Three].iter().map(|&ty| SsForms::new(&lay, &n, ty).unwrap()).collect();
        for t in 0..3 {
            let v: Vec<f64> = f.iter().map(|x| x.ss(t, &s)).collect();
            assert!((v[0] - v[1]).abs() < 1e-9 && (v[1] - v[2]).abs() < 1e-9, "{v:?}");
        }
    }

    #[test]
    fn forms_ignore_constant_shifts() {
        let lay = layout(&[2, 3]);
        let n = vec![2, 3, 1, 4, 2, 5];
        let s = fake(6, 11);
        let shifted: Vec<f64> = s.iter().zip(&n).map(|(v, &k)| v + 7.5 * k as f64).collect();
        for ty in [SsType::One, SsType::Two, SsType::Three] {
            let f = SsForms::new(&lay, &n, ty).unwrap();
            for t in 0..3 {
                assert!((f.ss(t, &s) - f.ss(t, &shifted)).abs() < 1e-9);
            }
        }
    }
}

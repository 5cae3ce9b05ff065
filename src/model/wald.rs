//! Wald-type quadratic forms in cell means with a diagonal covariance:
//! W_S = (L_S μ̂)' (L_S V L_S')⁻¹ (L_S μ̂), V = diag(v_1..v_C).
//!
//! One formula serves several engines (METHODS §3.6, §4.2, §7.2): the HC Wald tests
//! (v_c from HC0–HC4), the studentized permutation statistic (v_c = s²_c/n_c), and
//! Johansen's Welch–James Q on trimmed means (v_c = d_c), which also needs the diagonal
//! R_cc = v_c·ℓ_c' M⁻¹ ℓ_c of R = V L' M⁻¹ L. L_S is stored dense (q×C), so these forms
//! are meant for designs up to [`crate::design::forms::DENSE_CELL_LIMIT`] cells; the
//! evaluation allocates nothing once a [`WaldScratch`] exists, so it can run inside
//! resampling loops.

use crate::design::{kron, Layout};

/// The dense hypothesis matrix L_S of one term (q×C, row-major).
#[derive(Debug, Clone)]
pub struct WaldForm {
    q: usize,
    c: usize,
    l: Vec<f64>,
}

/// Reusable work space for [`WaldForm::statistic`].
#[derive(Debug, Clone)]
pub struct WaldScratch {
    lmu: Vec<f64>,
    m: Vec<f64>,
    z: Vec<f64>,
}

impl WaldForm {
    /// L_S = ⊗_f (H_{a_f} if f ∈ S else 1'_{a_f}) for term `t` of `layout` (METHODS §1.1).
    pub fn new(layout: &Layout, t: usize) -> WaldForm {
        let blocks = kron::hypothesis_blocks(&layout.shape, &layout.terms[t].factors);
        Self::from_blocks(&blocks)
    }

    /// A form for any Kronecker-structured contrast (simple effects, custom contrasts).
    pub fn from_blocks(blocks: &[kron::Small]) -> WaldForm {
        let l = kron::kron_dense(&kron::refs(blocks));
        WaldForm { q: l.rows, c: l.cols, l: l.data }
    }

    /// A form from an explicit q×C matrix (row-major).
    pub fn from_matrix(q: usize, c: usize, l: Vec<f64>) -> WaldForm {
        assert_eq!(l.len(), q * c, "L must be q×C");
        WaldForm { q, c, l }
    }

    /// Number of rows q (the term's df).
    pub fn q(&self) -> usize {
        self.q
    }

    /// Row r of L.
    pub fn row(&self, r: usize) -> &[f64] {
        &self.l[r * self.c..(r + 1) * self.c]
    }

    /// Work space sized for this form.
    pub fn scratch(&self) -> WaldScratch {
        WaldScratch { lmu: vec![0.0; self.q], m: vec![0.0; self.q * self.q], z: vec![0.0; self.q] }
    }

    /// W = (Lμ)'(L diag(v) L')⁻¹(Lμ). `None` when L diag(v) L' is not positive definite
    /// (e.g. zero variance in cells the term needs).
    pub fn statistic(&self, mu: &[f64], v: &[f64], s: &mut WaldScratch) -> Option<f64> {
        self.factor(mu, v, s)?;
        Some(s.z.iter().map(|z| z * z).sum())
    }

    /// W and the diagonal of R = V L' M⁻¹ L: R_cc = v_c·ℓ_c' M⁻¹ ℓ_c (Johansen's A uses it).
    pub fn statistic_and_leverages(&self, mu: &[f64], v: &[f64]) -> Option<(f64, Vec<f64>)> {
        let mut s = self.scratch();
        self.factor(mu, v, &mut s)?;
        let w = s.z.iter().map(|z| z * z).sum();
        let mut lev = vec![0.0; self.c];
        let mut col = vec![0.0; self.q];
        for (c, out) in lev.iter_mut().enumerate() {
            for (r, x) in col.iter_mut().enumerate() {
                *x = self.l[r * self.c + c];
            }
            forward_solve(&s.m, self.q, &mut col);
            *out = v[c] * col.iter().map(|x| x * x).sum::<f64>();
        }
        Some((w, lev))
    }

    /// Computes Lμ, M = L diag(v) L' and its Cholesky factor (in `s.m`), and z = R⁻ᵀLμ.
    fn factor(&self, mu: &[f64], v: &[f64], s: &mut WaldScratch) -> Option<()> {
        let (q, c) = (self.q, self.c);
        for r in 0..q {
            let row = &self.l[r * c..(r + 1) * c];
            s.lmu[r] = row.iter().zip(mu).map(|(a, b)| a * b).sum();
        }
        for i in 0..q {
            let ri = &self.l[i * c..(i + 1) * c];
            for j in 0..=i {
                let rj = &self.l[j * c..(j + 1) * c];
                let mut acc = 0.0;
                for k in 0..c {
                    acc += ri[k] * v[k] * rj[k];
                }
                s.m[i * q + j] = acc;
            }
        }
        cholesky_in_place(&mut s.m, q)?;
        s.z.copy_from_slice(&s.lmu);
        forward_solve(&s.m, q, &mut s.z);
        Some(())
    }
}

/// Relative size below which a Cholesky pivot counts as zero (the matrix is singular up
/// to rounding, e.g. zero variance in the cells a contrast needs).
const PIVOT_TOLERANCE: f64 = 1e-12;

/// Lower Cholesky factor in place (lower triangle of `m`, q×q row-major). `None` if not
/// positive definite.
fn cholesky_in_place(m: &mut [f64], q: usize) -> Option<()> {
    for j in 0..q {
        let diagonal = m[j * q + j];
        let mut d = diagonal;
        for k in 0..j {
            d -= m[j * q + k] * m[j * q + k];
        }
        if d.is_nan() || d <= PIVOT_TOLERANCE * diagonal.abs() || !d.is_finite() {
            return None;
        }
        let d = d.sqrt();
        m[j * q + j] = d;
        for i in j + 1..q {
            let mut x = m[i * q + j];
            for k in 0..j {
                x -= m[i * q + k] * m[j * q + k];
            }
            m[i * q + j] = x / d;
        }
    }
    Some(())
}

/// Solves L x = b in place for the lower factor stored in `m`.
fn forward_solve(m: &[f64], q: usize, b: &mut [f64]) {
    for i in 0..q {
        let mut x = b[i];
        for k in 0..i {
            x -= m[i * q + k] * b[k];
        }
        b[i] = x / m[i * q + i];
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    fn layout_2x3() -> Layout {
        let f = |n: &str, a: usize| Factor {
            name: n.into(),
            levels: (0..a).map(|i| format!("{i}")).collect(),
            measured: false,
        };
        Layout::new(vec![f("A", 2), f("B", 3)])
    }

    /// METHODS §12.0 cells (invented data).
    fn cells() -> Vec<Vec<f64>> {
        vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ]
    }

    #[test]
    fn hc2_variances_give_the_statsmodels_hc2_wald_f() {
        // Source: METHODS §12.2, statsmodels OLS(cov_type='HC2').wald_test(use_f=True):
        // HC2 F = 8.674885271 (A), 25.42962434 (B), 1.809130919 (A×B); W = q·F.
        let layout = layout_2x3();
        let mu: Vec<f64> = cells().iter().map(|c| c.iter().sum::<f64>() / c.len() as f64).collect();
        let v: Vec<f64> = cells().iter().map(|c| crate::summary::variance(c) / c.len() as f64).collect();
        for (t, want) in [(0, 8.674885271), (1, 25.42962434), (2, 1.809130919)] {
            let form = WaldForm::new(&layout, t);
            let w = form.statistic(&mu, &v, &mut form.scratch()).unwrap();
            let f = w / form.q() as f64;
            assert!((f / want - 1.0).abs() < 1e-9, "term {t}: {f} vs {want}");
        }
    }

    #[test]
    fn leverages_of_a_one_factor_contrast_are_one_minus_weight_share() {
        // Property (METHODS §4.2): for one factor, R = I − 1w'/U with w_c = 1/v_c.
        let f = Factor { name: "A".into(), levels: (0..4).map(|i| format!("{i}")).collect(), measured: false };
        let layout = Layout::new(vec![f]);
        let v = [0.5, 1.0, 2.0, 4.0];
        let mu = [1.0, 2.0, 0.5, 3.0];
        let (_, lev) = WaldForm::new(&layout, 0).statistic_and_leverages(&mu, &v).unwrap();
        let u: f64 = v.iter().map(|x| 1.0 / x).sum();
        for (c, l) in lev.iter().enumerate() {
            assert!((l - (1.0 - (1.0 / v[c]) / u)).abs() < 1e-12);
        }
    }

    #[test]
    fn zero_variance_is_not_positive_definite() {
        let layout = layout_2x3();
        let form = WaldForm::new(&layout, 0);
        assert!(form.statistic(&[1.0; 6], &[0.0; 6], &mut form.scratch()).is_none());
    }
}

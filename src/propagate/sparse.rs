//! Kicks with a sparse coupling matrix: exp(iθA) ψ by a Chebyshev expansion (Tal-Ezer & Kosloff,
//! J. Chem. Phys. 81, 3967 (1984)) for a real symmetric A with spectrum in [0, 1], applied to all
//! states of a block at once. Used for tops, whose coupling is sparse in the symmetric-top basis but
//! whose blocks are too large for a dense eigendecomposition.

use nalgebra::DMatrix;

/// A real sparse matrix in compressed-row form.
#[derive(Debug, Clone)]
pub struct Csr {
    /// Dimension.
    pub n: usize,
    row_ptr: Vec<usize>,
    col: Vec<usize>,
    val: Vec<f64>,
}

impl Csr {
    /// From (row, column, value) triplets of an n × n matrix (duplicates are summed).
    pub fn from_triplets(n: usize, mut t: Vec<(usize, usize, f64)>) -> Csr {
        t.sort_by_key(|x| (x.0, x.1));
        let mut row_ptr = vec![0; n + 1];
        let mut col = vec![];
        let mut val: Vec<f64> = vec![];
        let mut last: Option<(usize, usize)> = None;
        for (r, c, v) in t {
            if last == Some((r, c)) {
                *val.last_mut().expect("entry") += v;
                continue;
            }
            col.push(c);
            val.push(v);
            row_ptr[r + 1] += 1;
            last = Some((r, c));
        }
        for r in 0..n {
            row_ptr[r + 1] += row_ptr[r];
        }
        Csr { n, row_ptr, col, val }
    }

    /// From compressed rows: `row_ptr` (n + 1 offsets), column indices and values.
    pub fn from_parts(n: usize, row_ptr: Vec<usize>, col: Vec<usize>, val: Vec<f64>) -> Csr {
        assert!(row_ptr.len() == n + 1 && col.len() == val.len() && row_ptr[n] == val.len(), "Csr::from_parts: inconsistent rows");
        Csr { n, row_ptr, col, val }
    }

    /// Overwrite the values with Σ c_i A_i of matrices stored on this matrix's pattern (the same rows and
    /// columns, as built from the same triplet positions; checked in debug builds).
    pub fn set_combination(&mut self, parts: &[(&Csr, f64)]) {
        self.val.iter_mut().for_each(|v| *v = 0.0);
        for (m, c) in parts {
            debug_assert!(m.row_ptr == self.row_ptr && m.col == self.col, "Csr::set_combination: the matrices do not share one pattern");
            assert_eq!(m.val.len(), self.val.len(), "Csr::set_combination: the matrices do not share one pattern");
            for (v, x) in self.val.iter_mut().zip(&m.val) {
                *v += c * x;
            }
        }
    }

    /// The matrix as a dense one (for checks).
    pub fn to_dense(&self) -> DMatrix<f64> {
        let mut m = DMatrix::zeros(self.n, self.n);
        for r in 0..self.n {
            for e in self.row_ptr[r]..self.row_ptr[r + 1] {
                m[(r, self.col[e])] += self.val[e];
            }
        }
        m
    }

    /// A X for a dense X with n rows.
    pub fn mul_dense(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        assert_eq!(x.nrows(), self.n, "Csr::mul_dense: the matrix and the columns differ in size");
        let mut out = DMatrix::zeros(self.n, x.ncols());
        for c in 0..x.ncols() {
            let (xc, mut oc) = (x.column(c), out.column_mut(c));
            for r in 0..self.n {
                oc[r] = (self.row_ptr[r]..self.row_ptr[r + 1]).map(|e| self.val[e] * xc[self.col[e]]).sum();
            }
        }
        out
    }

    /// The non-zero elements (column, value) of row `r`.
    pub fn row(&self, r: usize) -> impl Iterator<Item = (usize, f64)> + '_ {
        let span = self.row_ptr[r]..self.row_ptr[r + 1];
        self.col[span.clone()].iter().copied().zip(self.val[span].iter().copied())
    }

    /// Number of stored elements.
    pub fn nnz(&self) -> usize {
        self.val.len()
    }

    /// x_cᵀ A x_c for every column c of states stored transposed (`xt` is `cols` × n column-major:
    /// column r holds row r of every state).
    pub fn quadratic_forms_t(&self, xt: &[f64], cols: usize) -> Vec<f64> {
        assert_eq!(xt.len(), self.n * cols, "Csr::quadratic_forms_t: states and operator differ in size");
        let mut out = vec![0.0; cols];
        let mut y = vec![0.0; cols];
        for r in 0..self.n {
            y.iter_mut().for_each(|v| *v = 0.0);
            for p in self.row_ptr[r]..self.row_ptr[r + 1] {
                let (v, c) = (self.val[p], self.col[p]);
                for (yv, xv) in y.iter_mut().zip(&xt[c * cols..(c + 1) * cols]) {
                    *yv += v * xv;
                }
            }
            for ((o, yv), xv) in out.iter_mut().zip(&y).zip(&xt[r * cols..(r + 1) * cols]) {
                *o += yv * xv;
            }
        }
        out
    }
}

crate::numeric::wide_simd! {
/// y = a·(M x) + b·x − z for states stored transposed (x, y, z as slices of k × n column-major
/// matrices: column r holds row r of the states), so that each stored element updates k contiguous
/// numbers. `z` may be omitted. With `acc` = Some((m, c, acc)), also acc += c i^m y row by row while
/// y is in cache (as `add_rotated`).
fn affine_t(mat: &Csr, k: usize, a: f64, b: f64, x: &[f64], z: Option<&[f64]>, y: &mut [f64], acc: Option<(usize, f64, &mut [f64])>) {
    let mut acc = acc;
    for r in 0..mat.n {
        let yr = &mut y[r * k..(r + 1) * k];
        let xr = &x[r * k..(r + 1) * k];
        match z {
            Some(z) => {
                for ((yv, xv), zv) in yr.iter_mut().zip(xr).zip(&z[r * k..(r + 1) * k]) {
                    *yv = b * xv - zv;
                }
            }
            None => {
                for (yv, xv) in yr.iter_mut().zip(xr) {
                    *yv = b * xv;
                }
            }
        }
        for p in mat.row_ptr[r]..mat.row_ptr[r + 1] {
            let v = a * mat.val[p];
            let c = mat.col[p];
            for (yv, xv) in yr.iter_mut().zip(&x[c * k..(c + 1) * k]) {
                *yv += v * xv;
            }
        }
        if let Some((m, c, acc)) = acc.as_mut() {
            rotate_add_row(*m, *c, yr, &mut acc[r * k..(r + 1) * k]);
        }
    }
}
}

/// acc += c i^m v for one complex row stored as [Re (k/2) | Im (k/2)].
#[inline(always)]
fn rotate_add_row(m: usize, c: f64, v: &[f64], acc: &mut [f64]) {
    let h = v.len() / 2;
    let (ar, ai) = acc.split_at_mut(h);
    let (vr, vi) = v.split_at(h);
    // i^m: 1, i, −1, −i; (x + iy)·i = −y + ix.
    match m % 4 {
        0 => ar.iter_mut().zip(vr).zip(ai.iter_mut().zip(vi)).for_each(|((x, y), (u, w))| {
            *x += c * y;
            *u += c * w;
        }),
        1 => ar.iter_mut().zip(vi).zip(ai.iter_mut().zip(vr)).for_each(|((x, y), (u, w))| {
            *x -= c * y;
            *u += c * w;
        }),
        2 => ar.iter_mut().zip(vr).zip(ai.iter_mut().zip(vi)).for_each(|((x, y), (u, w))| {
            *x -= c * y;
            *u -= c * w;
        }),
        _ => ar.iter_mut().zip(vi).zip(ai.iter_mut().zip(vr)).for_each(|((x, y), (u, w))| {
            *x += c * y;
            *u -= c * w;
        }),
    }
}

thread_local! {
    /// Reused buffers of `chebyshev_kick` (large blocks would otherwise fault fresh pages on every kick).
    static WORK: std::cell::RefCell<[Vec<f64>; 4]> = const { std::cell::RefCell::new([Vec::new(), Vec::new(), Vec::new(), Vec::new()]) };
}

thread_local! {
    /// Scratch for the function-basis copy of a block's states around a kick or an evaluation.
    static SCRATCH: std::cell::RefCell<Vec<f64>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// Run `f` on a reused thread-local buffer of `len` numbers (contents unspecified on entry: write before
/// reading). Not re-entrant: `f` must not call `with_scratch` itself.
pub fn with_scratch<R>(len: usize, f: impl FnOnce(&mut [f64]) -> R) -> R {
    SCRATCH.with_borrow_mut(|buf| {
        buf.resize(len.max(buf.len()), 0.0);
        f(&mut buf[..len])
    })
}

/// Bessel functions J_0(z) … J_kmax(z) by Miller's backward recurrence, normalized with
/// J_0 + 2 Σ J_2k = 1 (Abramowitz & Stegun 9.1.46 and 9.12).
pub fn bessel_j_series(z: f64, kmax: usize) -> Vec<f64> {
    if z == 0.0 {
        let mut v = vec![0.0; kmax + 1];
        v[0] = 1.0;
        return v;
    }
    let x = z.abs();
    let start = kmax + 30 + (x as usize);
    let mut v = vec![0.0; start + 2];
    v[start] = 1e-300;
    for k in (1..=start).rev() {
        v[k - 1] = 2.0 * k as f64 / x * v[k] - v[k + 1];
        if v[k - 1].abs() > 1e250 {
            for w in v.iter_mut().skip(k - 1) {
                *w *= 1e-250;
            }
        }
    }
    let norm = v[0] + 2.0 * v.iter().skip(2).step_by(2).sum::<f64>();
    v.truncate(kmax + 1);
    for (k, w) in v.iter_mut().enumerate() {
        *w /= norm;
        if z < 0.0 && k % 2 == 1 {
            *w = -*w;
        }
    }
    v
}

/// Bessel coefficients below this end the Chebyshev series: the error of one kick stays near this
/// fraction of the norm. A finite pulse takes a few hundred kicks, so the accumulated error (~1e-10)
/// stays far below the splitting error of the time step (~1e-7).
const CHEBYSHEV_CUT: f64 = 1e-12;

/// ψ ← exp(iθA) ψ for the complex states ψ = [Re | Im] (n × 2k) and a real symmetric A whose spectrum
/// lies in [0, 1]: with X = 2A − 1, exp(iθA) = e^{iθ/2} Σ_m (2 − δ_m0) i^m J_m(θ/2) T_m(X), truncated once
/// the Bessel coefficients fall below `CHEBYSHEV_CUT`.
pub fn chebyshev_kick(a: &Csr, theta: f64, psi: &mut DMatrix<f64>) {
    let (n, cols) = psi.shape();
    let mut xt = vec![0.0; n * cols];
    let data = psi.as_slice();
    for c in 0..cols {
        for r in 0..n {
            xt[r * cols + c] = data[c * n + r];
        }
    }
    chebyshev_kick_transposed(a, theta, &mut xt, cols);
    let data = psi.as_mut_slice();
    for c in 0..cols {
        for r in 0..n {
            data[c * n + r] = xt[r * cols + c];
        }
    }
}

/// As [`chebyshev_kick`] for states stored transposed: `xt` is 2k × n column-major, so column r holds
/// row r of every state (entries 0..k real parts, k..2k imaginary parts), with `cols` = 2k.
pub fn chebyshev_kick_transposed(a: &Csr, theta: f64, xt: &mut [f64], cols: usize) {
    if theta == 0.0 {
        return;
    }
    let n = a.n;
    assert_eq!(xt.len(), n * cols, "chebyshev_kick_transposed: states and operator differ in size");
    let z = 0.5 * theta;
    let kmax = (z.abs() + 12.0 + 6.0 * z.abs().cbrt()).ceil() as usize;
    let bj = bessel_j_series(z, kmax + 8);
    let last = (0..=kmax + 8).rev().find(|&m| bj[m].abs() > CHEBYSHEV_CUT).unwrap_or(0);
    let k = cols / 2;
    WORK.with(|w| {
        let mut w = w.borrow_mut();
        for buf in w.iter_mut() {
            // Every buffer is fully written before it is read: no need to clear it.
            buf.resize(cols * n, 0.0);
        }
        let [prev, cur, next, acc] = &mut *w;
        let (prev, cur, next, acc) = (&mut prev[..cols * n], &mut cur[..cols * n], &mut next[..cols * n], &mut acc[..cols * n]);
        prev.copy_from_slice(xt);
        // acc = Σ c_m v_m, c_m = (2 − δ_m0) i^m J_m.
        for (x, p) in acc.iter_mut().zip(prev.iter()) {
            *x = bj[0] * p;
        }
        affine_t(a, cols, 2.0, -1.0, prev, None, cur, (last >= 1).then_some((1, 2.0 * bj[1], &mut *acc)));
        let (mut prev, mut cur, mut next) = (prev, cur, next);
        for (m, &b) in bj.iter().enumerate().take(last + 1).skip(2) {
            // v_m = 2 X v_{m−1} − v_{m−2} = 4 A v_{m−1} − 2 v_{m−1} − v_{m−2}.
            affine_t(a, cols, 4.0, -2.0, cur, Some(prev), next, Some((m, 2.0 * b, &mut *acc)));
            (prev, cur, next) = (cur, next, prev);
        }
        let (s, c) = z.sin_cos();
        for (out, a) in xt.chunks_exact_mut(cols).zip(acc.chunks_exact(cols)) {
            for r in 0..k {
                let (x, y) = (a[r], a[r + k]);
                out[r] = x * c - y * s;
                out[r + k] = x * s + y * c;
            }
        }
    });
}

/// Gershgorin bounds (lowest, highest) of the spectrum of a real symmetric sparse matrix.
fn gershgorin(h: &Csr) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for r in 0..h.n {
        let (mut d, mut off) = (0.0, 0.0);
        for p in h.row_ptr[r]..h.row_ptr[r + 1] {
            if h.col[p] == r {
                d += h.val[p];
            } else {
                off += h.val[p].abs();
            }
        }
        lo = lo.min(d - off);
        hi = hi.max(d + off);
    }
    (lo, hi)
}

/// Rows of the n × m column-major block `x` as an m × n column-major slice (row r contiguous).
fn to_rows(x: &DMatrix<f64>) -> Vec<f64> {
    let (n, m) = x.shape();
    let mut t = vec![0.0; n * m];
    for c in 0..m {
        for (r, v) in x.column(c).iter().enumerate() {
            t[r * m + c] = *v;
        }
    }
    t
}

fn from_rows(t: &[f64], n: usize, m: usize) -> DMatrix<f64> {
    DMatrix::from_fn(n, m, |r, c| t[r * m + c])
}

/// The `k` lowest eigenvalues (ascending) and eigenvectors (columns) of a real symmetric sparse matrix,
/// by Chebyshev-filtered subspace iteration (Y. Zhou, Y. Saad, M. L. Tiago, J. R. Chelikowsky, J. Comput.
/// Phys. 219, 172 (2006), Algorithm 3.2 for the scaled filter): a block of k + guard vectors is filtered by
/// a Chebyshev polynomial of H that damps the spectrum above the block's highest Ritz value, then
/// orthonormalized and rotated to the Ritz vectors, until every wanted residual ‖Hx − θx‖ is below
/// `tol` times the spectral radius. Small matrices are diagonalized densely. `None` when the iteration
/// does not converge (the caller reports it; nothing is truncated silently).
pub fn lowest_eigenpairs(h: &Csr, k: usize, tol: f64) -> Option<(Vec<f64>, DMatrix<f64>)> {
    let n = h.n;
    let k = k.min(n);
    if k == 0 {
        return Some((vec![], DMatrix::zeros(n, 0)));
    }
    let guard = (k / 4).max(12);
    let m = (k + guard).min(n);
    if n <= 600 || 3 * m >= n {
        let (vals, vecs) = crate::numeric::sorted_eigen(h.to_dense());
        return Some((vals[..k].to_vec(), vecs.columns(0, k).into_owned()));
    }
    let (lo, hi) = gershgorin(h);
    let scale = lo.abs().max(hi.abs()).max(f64::MIN_POSITIVE);
    // Start: the unit vectors of the m lowest diagonal entries, plus a deterministic spread over every
    // state so that no eigenvector is missed for want of overlap.
    let dense_diag: Vec<f64> = (0..n).map(|r| (h.row_ptr[r]..h.row_ptr[r + 1]).filter(|&p| h.col[p] == r).map(|p| h.val[p]).sum()).collect();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| dense_diag[a].total_cmp(&dense_diag[b]));
    let mut seed: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut x = DMatrix::from_fn(n, m, |_, _| {
        seed = seed.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
        ((seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 1e-2
    });
    for (c, &r) in order.iter().take(m).enumerate() {
        x[(r, c)] += 1.0;
    }
    let degree = 20;
    let mut y = vec![0.0; n * m];
    let mut z = vec![0.0; n * m];
    for _ in 0..300 {
        // Orthonormalize, then Rayleigh–Ritz.
        let q = x.clone().qr().q();
        let qt = to_rows(&q);
        affine_t(h, m, 1.0, 0.0, &qt, None, &mut y, None);
        let w = from_rows(&y, n, m);
        let t = q.transpose() * &w;
        let t = (&t + t.transpose()) * 0.5;
        let (theta, v) = crate::numeric::sorted_eigen(t);
        x = &q * &v;
        let hx = &w * &v;
        let worst = (0..k).map(|i| (hx.column(i) - x.column(i) * theta[i]).norm()).fold(0.0, f64::max);
        if !worst.is_finite() {
            return None;
        }
        if worst <= tol * scale {
            return Some((theta[..k].to_vec(), x.columns(0, k).into_owned()));
        }
        // Filter: damp [cut, hi], amplify below cut (scaled so that the lowest Ritz value maps near 1).
        let (a0, cut) = (theta[0], theta[m - 1]);
        if cut >= hi || a0 >= cut {
            return None;
        }
        let e = 0.5 * (hi - cut);
        let c = 0.5 * (hi + cut);
        let mut sigma = e / (a0 - c);
        let tau = 2.0 / sigma;
        let mut xt = to_rows(&x);
        affine_t(h, m, sigma / e, -sigma * c / e, &xt, None, &mut y, None);
        for _ in 2..=degree {
            let sigma2 = 1.0 / (tau - sigma);
            for v in xt.iter_mut() {
                *v *= sigma * sigma2;
            }
            affine_t(h, m, 2.0 * sigma2 / e, -2.0 * sigma2 * c / e, &y, Some(&xt), &mut z, None);
            std::mem::swap(&mut xt, &mut y);
            std::mem::swap(&mut y, &mut z);
            sigma = sigma2;
        }
        x = from_rows(&y, n, m);
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::SymmetricEigen;

    #[test]
    fn a_combination_on_one_pattern_is_the_dense_sum() {
        // Matrices built on one set of positions (zeros included) share a pattern; the combination
        // written in place equals the sum of their dense forms (direct arithmetic).
        let positions = [(0, 0), (0, 2), (1, 1), (2, 0), (2, 2)];
        let with = |own: &[(usize, usize, f64)]| {
            let mut t: Vec<(usize, usize, f64)> = positions.iter().map(|&(r, c)| (r, c, 0.0)).collect();
            t.extend_from_slice(own);
            Csr::from_triplets(3, t)
        };
        let a = with(&[(0, 2, 1.5), (2, 0, 1.5), (1, 1, -2.0)]);
        let b = with(&[(0, 0, 0.5), (2, 2, 3.0)]);
        let mut c = with(&[]);
        c.set_combination(&[(&a, 2.0), (&b, -1.0)]);
        let want = a.to_dense() * 2.0 - b.to_dense();
        assert!((c.to_dense() - want).abs().max() < 1e-15);
        c.set_combination(&[(&b, 1.0)]);
        assert!((c.to_dense() - b.to_dense()).abs().max() < 1e-15, "values are overwritten, not accumulated");
    }

    #[test]
    fn bessel_values_match_tables() {
        // Abramowitz & Stegun Table 9.1: J0(1) = 0.7651976866, J1(1) = 0.4400505857, J2(1) = 0.1149034849;
        // J0(10) = −0.2459357645, J1(10) = 0.0434727462 (all five also confirmed with scipy.special.jv,
        // SciPy 1.17.1).
        let v = bessel_j_series(1.0, 3);
        assert!((v[0] - 0.765_197_686_6).abs() < 1e-10 && (v[1] - 0.440_050_585_7).abs() < 1e-10 && (v[2] - 0.114_903_484_9).abs() < 1e-10);
        let w = bessel_j_series(10.0, 2);
        assert!((w[0] + 0.245_935_764_5).abs() < 1e-10 && (w[1] - 0.043_472_746_2).abs() < 1e-10);
        // J_1(−x) = −J_1(x): the ascending series of J_1 has only odd powers of x (Abramowitz & Stegun §9.1).
        assert!((bessel_j_series(-1.0, 1)[1] + v[1]).abs() < 1e-15);
    }

    #[test]
    fn chebyshev_kick_equals_the_eigendecomposition() {
        // A random sparse symmetric matrix scaled into [0, 1]: the expansion against V exp(iθΛ) Vᵀ.
        let n = 40;
        let mut t = vec![];
        let mut seed = 12345u64;
        let mut rnd = || {
            seed = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut dense = DMatrix::zeros(n, n);
        for i in 0..n {
            for j in i..(i + 3).min(n) {
                let v = rnd() - 0.3;
                dense[(i, j)] = v;
                dense[(j, i)] = v;
            }
        }
        let e = SymmetricEigen::new(dense.clone());
        let (lo, hi) = (e.eigenvalues.min(), e.eigenvalues.max());
        let scaled = (&dense - DMatrix::identity(n, n) * lo) / (hi - lo);
        for i in 0..n {
            for j in 0..n {
                if scaled[(i, j)] != 0.0 {
                    t.push((i, j, scaled[(i, j)]));
                }
            }
        }
        let a = Csr::from_triplets(n, t);
        let es = SymmetricEigen::new(scaled.clone());
        for theta in [0.7, -3.0, 45.0] {
            let mut psi = DMatrix::from_fn(n, 4, |r, c| ((r * 7 + c * 3) % 11) as f64 - 5.0);
            let reference = {
                let v = &es.eigenvectors;
                let pr = v.transpose() * psi.columns(0, 2);
                let pi = v.transpose() * psi.columns(2, 2);
                let mut rr = pr.clone();
                let mut ri = pi.clone();
                for q in 0..n {
                    let (s, c) = (theta * es.eigenvalues[q]).sin_cos();
                    for col in 0..2 {
                        rr[(q, col)] = c * pr[(q, col)] - s * pi[(q, col)];
                        ri[(q, col)] = s * pr[(q, col)] + c * pi[(q, col)];
                    }
                }
                (v * rr, v * ri)
            };
            chebyshev_kick(&a, theta, &mut psi);
            let err = (psi.columns(0, 2) - &reference.0).abs().max().max((psi.columns(2, 2) - &reference.1).abs().max());
            assert!(err < 1e-11, "θ = {theta}: {err}");
        }
    }

    #[test]
    fn lowest_eigenpairs_of_a_sparse_matrix_match_a_dense_diagonalization() {
        // Reference: nalgebra's dense symmetric eigensolver on the same matrix (a general-purpose library),
        // on a banded matrix with a cluster of near-degenerate low eigenvalues (the hard case for
        // subspace iteration) and one large enough for the iterative branch.
        let n = 900;
        let mut t = vec![];
        for i in 0..n {
            let d = (i as f64 / 7.0).floor() * 3.0 + 1e-3 * (i % 7) as f64;
            t.push((i, i, d));
            for off in [1usize, 5, 13] {
                if i + off < n {
                    let v = 0.3 / (1.0 + off as f64) * (((i * 31 + off) % 11) as f64 / 11.0 - 0.4);
                    t.push((i, i + off, v));
                    t.push((i + off, i, v));
                }
            }
        }
        let h = Csr::from_triplets(n, t);
        let want = SymmetricEigen::new(h.to_dense());
        let mut vals: Vec<f64> = want.eigenvalues.iter().copied().collect();
        vals.sort_by(f64::total_cmp);
        let k = 40;
        let (got, vecs) = lowest_eigenpairs(&h, k, 1e-12).expect("converges");
        let dense = h.to_dense();
        for i in 0..k {
            assert!((got[i] - vals[i]).abs() < 1e-10, "{i}: {} vs {}", got[i], vals[i]);
            let v = vecs.column(i);
            assert!((v.norm() - 1.0).abs() < 1e-10);
            assert!((&dense * v - v * got[i]).norm() < 1e-9);
        }
    }
}

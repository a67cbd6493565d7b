//! Small numerical kernels shared by the hot loops, and the dense linear algebra the bases share
//! (`sorted_eigen`, `Banded` storage).

use nalgebra::{DMatrix, SymmetricEigen};

/// π/2 split for Cody–Waite reduction: the first 33 bits (so that k·P1 is exact for |k| < 2²⁰) ...
const PIO2_HI: f64 = 1.570_796_326_734_125_6;
/// ... and the f64 nearest to π/2 − PIO2_HI.
const PIO2_LO: f64 = 6.077_100_506_506_192e-11;

/// Taylor coefficients (−1)ⁿ/(2n+1)! for n = 1..=7: sine on |r| ≤ π/4 to about 5e-17 (the next
/// term, (π/4)¹⁷/17!).
const SIN_TAYLOR: [f64; 7] = [-1.0 / 6.0, 1.0 / 120.0, -1.0 / 5040.0, 1.0 / 362_880.0, -1.0 / 39_916_800.0, 1.0 / 6_227_020_800.0, -1.0 / 1_307_674_368_000.0];
/// Taylor coefficients (−1)ⁿ/(2n)! for n = 1..=8: cosine on |r| ≤ π/4 to about 2e-18 (the next
/// term, (π/4)¹⁸/18!).
const COS_TAYLOR: [f64; 8] =
    [-1.0 / 2.0, 1.0 / 24.0, -1.0 / 720.0, 1.0 / 40_320.0, -1.0 / 3_628_800.0, 1.0 / 479_001_600.0, -1.0 / 87_178_291_200.0, 1.0 / 20_922_789_888_000.0];

/// (sin x, cos x) for |x| < 1e6 rad, within about 3e-16 of the correctly rounded values, several
/// times faster than the C library's `sincos` and free of branches (so loops over it vectorize).
/// Beyond 1e6 rad it falls back to the standard library.
#[inline]
pub fn sin_cos(x: f64) -> (f64, f64) {
    if x.abs() >= 1e6 || x.is_nan() {
        return x.sin_cos();
    }
    reduced_sin_cos(x)
}

/// Run `$body` (a block using only its own arguments) in a copy compiled for AVX2 when the processor has
/// it, else in the portable build. Element-wise loops give bit-identical results either way (no
/// reassociation or fused multiply-add is allowed), only wider vectors.
macro_rules! wide_simd {
    ($(#[$meta:meta])* $vis:vis fn $name:ident($($arg:ident: $ty:ty),*) $(-> $ret:ty)? $body:block) => {
        $(#[$meta])*
        #[allow(clippy::too_many_arguments)]
        $vis fn $name($($arg: $ty),*) $(-> $ret)? {
            #[cfg(target_arch = "x86_64")]
            {
                #[allow(clippy::too_many_arguments)]
                #[target_feature(enable = "avx2")]
                fn wide($($arg: $ty),*) $(-> $ret)? $body
                if std::arch::is_x86_feature_detected!("avx2") {
                    // SAFETY: the processor supports AVX2 (checked just above).
                    return unsafe { wide($($arg),*) };
                }
            }
            $body
        }
    };
}
pub(crate) use wide_simd;

wide_simd! {
/// sin and cos of every x in `xs` into `sin` and `cos` (same lengths), as [`sin_cos`]; the range check
/// is made once for the slice so that the loop vectorizes.
pub fn sin_cos_slice(xs: &[f64], sin: &mut [f64], cos: &mut [f64]) {
    assert!(sin.len() == xs.len() && cos.len() == xs.len(), "sin_cos_slice: lengths differ");
    if xs.iter().all(|x| x.abs() < 1e6) {
        for ((x, s), c) in xs.iter().zip(sin.iter_mut()).zip(cos.iter_mut()) {
            (*s, *c) = reduced_sin_cos(*x);
        }
    } else {
        for ((x, s), c) in xs.iter().zip(sin.iter_mut()).zip(cos.iter_mut()) {
            (*s, *c) = sin_cos(*x);
        }
    }
}
}

/// Advance each phase w_q by one step, w_q ← w_q r_q (complex, split into real and imaginary arrays of
/// equal length), and return Σ_q Re(c_q w_q) with the new phases. Four interleaved partial sums (lane
/// l takes q ≡ l mod 4) allow 4-wide vectors; the order of additions is the same on every processor,
/// so the result is too.
pub fn advance_and_project(wr: &mut [f64], wi: &mut [f64], rr: &[f64], ri: &[f64], cr: &[f64], ci: &[f64]) -> f64 {
    let n = wr.len();
    assert!(wi.len() == n && rr.len() == n && ri.len() == n && cr.len() == n && ci.len() == n, "advance_and_project: lengths differ");
    let full = n - n % 4;
    let mut acc = [0.0f64; 4];
    #[cfg(target_arch = "x86_64")]
    let vectorized = std::arch::is_x86_feature_detected!("avx");
    #[cfg(not(target_arch = "x86_64"))]
    let vectorized = false;
    if vectorized {
        #[cfg(target_arch = "x86_64")]
        // SAFETY: AVX is available (checked above) and every slice holds at least `full` elements.
        unsafe {
            acc = advance_and_project_avx(wr.as_mut_ptr(), wi.as_mut_ptr(), rr.as_ptr(), ri.as_ptr(), cr.as_ptr(), ci.as_ptr(), full);
        }
    } else {
        for base in (0..full).step_by(4) {
            for (l, a) in acc.iter_mut().enumerate() {
                *a += advance_one(wr, wi, rr, ri, cr, ci, base + l);
            }
        }
    }
    for q in full..n {
        acc[q - full] += advance_one(wr, wi, rr, ri, cr, ci, q);
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3])
}

/// One element of [`advance_and_project`]: advance w_q, return Re(c_q w_q).
#[inline(always)]
fn advance_one(wr: &mut [f64], wi: &mut [f64], rr: &[f64], ri: &[f64], cr: &[f64], ci: &[f64], q: usize) -> f64 {
    let (a, b) = (wr[q], wi[q]);
    let (x, y) = (a * rr[q] - b * ri[q], a * ri[q] + b * rr[q]);
    wr[q] = x;
    wi[q] = y;
    cr[q] * x - ci[q] * y
}

/// The first `full` (a multiple of 4) elements of [`advance_and_project`] with 4-wide AVX vectors: the
/// same operations in the same order as the portable loop, lane by lane.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
unsafe fn advance_and_project_avx(wr: *mut f64, wi: *mut f64, rr: *const f64, ri: *const f64, cr: *const f64, ci: *const f64, full: usize) -> [f64; 4] {
    use std::arch::x86_64::*;
    let mut acc = _mm256_setzero_pd();
    for q in (0..full).step_by(4) {
        // SAFETY: q + 3 < full, within every slice (the caller's contract).
        unsafe {
            let (a, b) = (_mm256_loadu_pd(wr.add(q)), _mm256_loadu_pd(wi.add(q)));
            let (c, s) = (_mm256_loadu_pd(rr.add(q)), _mm256_loadu_pd(ri.add(q)));
            let x = _mm256_sub_pd(_mm256_mul_pd(a, c), _mm256_mul_pd(b, s));
            let y = _mm256_add_pd(_mm256_mul_pd(a, s), _mm256_mul_pd(b, c));
            _mm256_storeu_pd(wr.add(q), x);
            _mm256_storeu_pd(wi.add(q), y);
            let term = _mm256_sub_pd(_mm256_mul_pd(_mm256_loadu_pd(cr.add(q)), x), _mm256_mul_pd(_mm256_loadu_pd(ci.add(q)), y));
            acc = _mm256_add_pd(acc, term);
        }
    }
    let mut out = [0.0; 4];
    // SAFETY: `out` holds four f64.
    unsafe { _mm256_storeu_pd(out.as_mut_ptr(), acc) };
    out
}

/// Round to the nearest integer (ties to even) for |y| < 2⁵¹, without a library call.
#[inline(always)]
fn round_near(y: f64) -> f64 {
    const SHIFT: f64 = 6_755_399_441_055_744.0; // 2⁵² + 2⁵¹
    (y + SHIFT) - SHIFT
}

/// The branch-free kernel of [`sin_cos`] for |x| < 1e6.
#[inline(always)]
fn reduced_sin_cos(x: f64) -> (f64, f64) {
    let k = round_near(x * std::f64::consts::FRAC_2_PI);
    let r = (x - k * PIO2_HI) - k * PIO2_LO;
    let z = r * r;
    let mut ps = SIN_TAYLOR[6];
    for c in SIN_TAYLOR[..6].iter().rev() {
        ps = ps * z + c;
    }
    let mut pc = COS_TAYLOR[7];
    for c in COS_TAYLOR[..7].iter().rev() {
        pc = pc * z + c;
    }
    let s = r + r * z * ps;
    let c = 1.0 + z * pc;
    let q = k as i64;
    let (a, b) = if q & 1 == 0 { (s, c) } else { (c, s) };
    let sin = if q & 2 == 0 { a } else { -a };
    let cos = if (q + 1) & 2 == 0 { b } else { -b };
    (sin, cos)
}

/// Local maximum of sense·f near t0 by Newton steps on f' (`d(t)` gives f, f', f''), staying inside
/// [lo, hi]; returns (t, sense·f(t)), or None if the function is not concave along the way, a step
/// leaves the bracket or 12 steps do not converge to 1e-10 ps.
pub fn newton_max(d: impl Fn(f64) -> (f64, f64, f64), sense: f64, t0: f64, lo: f64, hi: f64) -> Option<(f64, f64)> {
    let mut t = t0;
    for _ in 0..12 {
        let (_, d1, d2) = d(t);
        let (g1, g2) = (sense * d1, sense * d2);
        if g2 >= 0.0 || !g1.is_finite() {
            return None;
        }
        let step = -g1 / g2;
        t += step;
        if !(lo..=hi).contains(&t) {
            return None;
        }
        if step.abs() < 1e-10 {
            return Some((t, sense * d(t).0));
        }
    }
    None
}

/// Maximum of a unimodal-ish f on [a, b] by golden-section search to tolerance `tol` (same unit as t).
pub fn golden_max(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, tol: f64) -> (f64, f64) {
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut fc, mut fd) = (f(c), f(d));
    while (b - a).abs() > tol {
        if fc > fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = f(d);
        }
    }
    let t = 0.5 * (a + b);
    (t, f(t))
}

/// A symmetric matrix (between eigenstates, say) stored as dense sub-blocks (row start, column start, block);
/// both (a, b) and (b, a) blocks are present.
#[derive(Debug, Clone)]
pub struct Banded {
    /// Dimension of the full matrix.
    pub size: usize,
    /// (first row, first column, values) of each stored block.
    pub blocks: Vec<(usize, usize, DMatrix<f64>)>,
}

impl Banded {
    /// A dense matrix as one block.
    pub fn dense(m: DMatrix<f64>) -> Banded {
        Banded { size: m.nrows(), blocks: vec![(0, 0, m)] }
    }

    /// The full dense matrix.
    pub fn to_dense(&self) -> DMatrix<f64> {
        let mut out = DMatrix::zeros(self.size, self.size);
        for (r, c, b) in &self.blocks {
            out.view_mut((*r, *c), b.shape()).copy_from(b);
        }
        out
    }

    /// Element (r, c) (zero outside the stored blocks).
    pub fn get(&self, r: usize, c: usize) -> f64 {
        for (r0, c0, b) in &self.blocks {
            if r >= *r0 && r < r0 + b.nrows() && c >= *c0 && c < c0 + b.ncols() {
                return b[(r - r0, c - c0)];
            }
        }
        0.0
    }
}

/// Eigenvalues ascending and eigenvectors with deterministic signs (largest-magnitude component positive).
pub fn sorted_eigen(h: DMatrix<f64>) -> (Vec<f64>, DMatrix<f64>) {
    let n = h.nrows();
    let eig = SymmetricEigen::new(h);
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
    let mut vecs = DMatrix::zeros(n, n);
    for (c, &i) in order.iter().enumerate() {
        let col = eig.eigenvectors.column(i);
        let mut big = 0usize;
        for r in 0..n {
            if col[r].abs() > col[big].abs() + 1e-12 {
                big = r;
            }
        }
        let sign = if col[big] < 0.0 { -1.0 } else { 1.0 };
        for r in 0..n {
            vecs[(r, c)] = sign * col[r];
        }
    }
    (order.iter().map(|&i| eig.eigenvalues[i]).collect(), vecs)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn phase_projection_matches_complex_arithmetic() {
        // Reference: num-complex multiplication and a plain sum, for lengths that exercise the tail.
        use num_complex::Complex64;
        for n in [0usize, 1, 3, 4, 7, 33] {
            let w: Vec<Complex64> = (0..n).map(|q| Complex64::from_polar(1.0, 0.3 * q as f64)).collect();
            let r: Vec<Complex64> = (0..n).map(|q| Complex64::from_polar(1.0, -0.17 * q as f64 + 0.05)).collect();
            let c: Vec<Complex64> = (0..n).map(|q| Complex64::new(0.1 * q as f64 - 1.0, 0.7 - 0.03 * q as f64)).collect();
            let (mut wr, mut wi): (Vec<f64>, Vec<f64>) = w.iter().map(|z| (z.re, z.im)).unzip();
            let (rr, ri): (Vec<f64>, Vec<f64>) = r.iter().map(|z| (z.re, z.im)).unzip();
            let (cr, ci): (Vec<f64>, Vec<f64>) = c.iter().map(|z| (z.re, z.im)).unzip();
            let got = advance_and_project(&mut wr, &mut wi, &rr, &ri, &cr, &ci);
            let want: f64 = (0..n).map(|q| (c[q] * w[q] * r[q]).re).sum();
            assert!((got - want).abs() < 1e-13, "n = {n}: {got} vs {want}");
            for q in 0..n {
                let z = w[q] * r[q];
                assert!((wr[q] - z.re).abs() < 1e-15 && (wi[q] - z.im).abs() < 1e-15);
            }
        }
    }

    #[test]
    fn strided_products_match_nalgebra() {
        // Reference: nalgebra's dense product of explicit (copied) transposes.
        use nalgebra::DMatrix;
        let a = DMatrix::from_fn(5, 3, |i, j| (i as f64 + 1.0) * 0.7 - j as f64 * 1.3);
        let b = DMatrix::from_fn(5, 4, |i, j| ((i * 4 + j) as f64).sin());
        // C (3 × 4) = Aᵀ B, reading Aᵀ in place through swapped strides, into a transposed C (4 × 3 storage).
        let mut c = vec![0.0; 2 + 12];
        let at = Strided { data: a.as_slice(), offset: 0, shape: (3, 5), strides: (5, 1) };
        let bv = Strided { data: b.as_slice(), offset: 0, shape: (5, 4), strides: (1, 5) };
        gemm_strided(at, bv, &mut c, 2, (4, 1));
        let want = a.transpose() * &b;
        for i in 0..3 {
            for j in 0..4 {
                assert!((c[2 + i * 4 + j] - want[(i, j)]).abs() < 1e-13);
            }
        }
        assert_eq!(&c[..2], &[0.0, 0.0]);
    }

    #[test]
    #[should_panic(expected = "outside its slice")]
    fn strided_products_refuse_views_beyond_their_slices() {
        let data = [1.0; 6];
        let a = Strided { data: &data, offset: 1, shape: (2, 3), strides: (1, 2) };
        let mut c = [0.0; 4];
        gemm_strided(a, Strided { data: &data, offset: 0, shape: (3, 2), strides: (1, 3) }, &mut c, 0, (1, 2));
    }

    #[test]
    fn split_of_half_pi_is_exact_and_short() {
        // The high part must have at most 33 significant bits so that k·PIO2_HI is exact, and the two
        // parts must add up to π/2 in f64 (common practice for Cody–Waite reduction).
        let bits = PIO2_HI.to_bits() & ((1u64 << 52) - 1);
        assert_eq!(bits & ((1u64 << (52 - 32)) - 1), 0, "PIO2_HI has more than 33 significant bits");
        assert_eq!(PIO2_HI + PIO2_LO, std::f64::consts::FRAC_PI_2);
    }

    #[test]
    fn agrees_with_the_standard_library() {
        // Reference: Rust's f64::sin_cos (the platform libm, correctly reduced for any argument).
        let mut worst: f64 = 0.0;
        let mut x: f64 = 0.1234567;
        for i in 0..200_000 {
            // Arguments spread over 1e-8 .. 1e5 in magnitude, both signs, plus multiples of π/4.
            x = (x * 1.618_033_988_749_895 + 0.377).fract();
            let scale = 10f64.powf(-8.0 + 13.0 * (i as f64 / 200_000.0));
            for arg in [x * scale, -x * scale, (i % 4000) as f64 * std::f64::consts::FRAC_PI_4] {
                let (s, c) = sin_cos(arg);
                let (s0, c0) = arg.sin_cos();
                worst = worst.max((s - s0).abs()).max((c - c0).abs());
            }
        }
        assert!(worst < 4e-16, "max deviation from std sin_cos {worst:e}");
        // The slice form agrees with the scalar form, in and beyond the fast range.
        let xs: Vec<f64> = (0..1000).map(|i| (i as f64 - 500.0) * 37.3).chain([3e6]).collect();
        let (mut s, mut c) = (vec![0.0; xs.len()], vec![0.0; xs.len()]);
        sin_cos_slice(&xs, &mut s, &mut c);
        assert!(xs.iter().zip(s.iter().zip(&c)).all(|(x, (s, c))| sin_cos(*x) == (*s, *c)));
        // Tiny arguments keep full relative accuracy.
        assert_eq!(sin_cos(1e-300).0, 1e-300);
        assert_eq!(sin_cos(2e6), 2e6f64.sin_cos());
        assert!(sin_cos(f64::NAN).0.is_nan());
    }
}

/// A read-only matrix inside a slice: element (i, j) is `data[offset + i·row_stride + j·col_stride]`.
#[derive(Debug, Clone, Copy)]
pub struct Strided<'a> {
    /// The storage.
    pub data: &'a [f64],
    /// Index of element (0, 0).
    pub offset: usize,
    /// Rows and columns.
    pub shape: (usize, usize),
    /// Steps between rows and between columns.
    pub strides: (usize, usize),
}

impl Strided<'_> {
    /// True if every element lies inside `len` entries.
    fn fits(offset: usize, shape: (usize, usize), strides: (usize, usize), len: usize) -> bool {
        shape.0 == 0 || shape.1 == 0 || offset + (shape.0 - 1) * strides.0 + (shape.1 - 1) * strides.1 < len
    }
}

/// C ← A·B, with C an `a.shape.0` × `b.shape.1` matrix in `c` at `c_offset` with strides `c_strides`
/// (any layout, including transposed views, without copies). Panics if the shapes do not chain or a
/// matrix does not fit in its slice (programming errors).
pub fn gemm_strided(a: Strided, b: Strided, c: &mut [f64], c_offset: usize, c_strides: (usize, usize)) {
    let (m, k) = a.shape;
    let n = b.shape.1;
    assert_eq!(b.shape.0, k, "gemm_strided: inner dimensions differ");
    assert!(Strided::fits(a.offset, a.shape, a.strides, a.data.len()), "gemm_strided: A outside its slice");
    assert!(Strided::fits(b.offset, b.shape, b.strides, b.data.len()), "gemm_strided: B outside its slice");
    assert!(Strided::fits(c_offset, (m, n), c_strides, c.len()), "gemm_strided: C outside its slice");
    if m == 0 || n == 0 {
        return;
    }
    // SAFETY: all three matrices lie inside their slices (checked above); C does not alias A or B
    // (it is borrowed mutably while they are borrowed shared).
    unsafe {
        matrixmultiply::dgemm(
            m,
            k,
            n,
            1.0,
            a.data.as_ptr().add(a.offset),
            a.strides.0 as isize,
            a.strides.1 as isize,
            b.data.as_ptr().add(b.offset),
            b.strides.0 as isize,
            b.strides.1 as isize,
            0.0,
            c.as_mut_ptr().add(c_offset),
            c_strides.0 as isize,
            c_strides.1 as isize,
        );
    }
}

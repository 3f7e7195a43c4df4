//! Dense kernels of the stepping loop on plain slices. The matrices are small (nz is
//! tens), so what matters is that the loops vectorise and carry no bounds checks or
//! strides; nalgebra's general kernels do neither for dynamically sized storage.

/// Defines `fn $name(args) = $body;` as a call of `$body` (an `#[inline(always)]`
/// function of the same arguments) compiled for AVX where the processor has it,
/// and as written elsewhere. The loops then run four lanes wide, each multiply and add
/// still separate (no fused multiply–add), so the result is the same bit for bit on
/// every x86-64 processor.
macro_rules! with_avx {
    ($(#[$attr:meta])* $vis:vis fn $name:ident($($arg:ident: $ty:ty),* $(,)?) $(-> $ret:ty)? = $body:ident;) => {
        $(#[$attr])*
        $vis fn $name($($arg: $ty),*) $(-> $ret)? {
            #[cfg(target_arch = "x86_64")]
            {
                /// `$body` compiled for AVX.
                ///
                /// # Safety
                /// The processor must support AVX.
                #[target_feature(enable = "avx")]
                unsafe fn avx($($arg: $ty),*) $(-> $ret)? {
                    $body($($arg),*)
                }
                if std::arch::is_x86_feature_detected!("avx") {
                    // SAFETY: the processor has just been found to support AVX, the
                    // only requirement of `avx`.
                    return unsafe { avx($($arg),*) };
                }
            }
            $body($($arg),*)
        }
    };
}
pub(crate) use with_avx;

/// y = the first `y.len()` rows of A·x, for A stored column-major with leading
/// dimension `lda` (rows per column) and `x.len()` columns. Columns are added in order,
/// so the result does not depend on the vector width. Rows go in blocks of 8
/// and 4 held in registers across all columns, so y is written once.
#[inline]
pub(crate) fn matvec_rows(a: &[f64], lda: usize, x: &[f64], y: &mut [f64]) {
    y.fill(0.0);
    accumulate(a, lda, x, y);
}

/// y = b + the first `y.len()` rows of A·x (A as in [`matvec_rows`]): b first, then
/// the columns in order.
#[inline]
pub(crate) fn matvec_add(a: &[f64], lda: usize, x: &[f64], b: &[f64], y: &mut [f64]) {
    y.copy_from_slice(b);
    accumulate(a, lda, x, y);
}

with_avx! {
    /// y += the first `y.len()` rows of A·x, in blocks of 8 and 4 rows held in
    /// registers across all columns, so y is read and written once; each row adds its
    /// products one column after another.
    #[inline]
    fn accumulate(a: &[f64], lda: usize, x: &[f64], y: &mut [f64]) = accumulate_any;
}

/// The loops of [`accumulate`], for whatever instruction set the caller has.
#[inline(always)]
fn accumulate_any(a: &[f64], lda: usize, x: &[f64], y: &mut [f64]) {
    let n = y.len();
    debug_assert!(n <= lda && a.len() >= lda * x.len());
    let mut r = 0;
    while r + 8 <= n {
        let init: [f64; 8] = y[r..r + 8].try_into().expect("eight rows");
        y[r..r + 8].copy_from_slice(&block(a, lda, r, x, init));
        r += 8;
    }
    if r + 4 <= n {
        let init: [f64; 4] = y[r..r + 4].try_into().expect("four rows");
        y[r..r + 4].copy_from_slice(&block(a, lda, r, x, init));
        r += 4;
    }
    for (i, yi) in y.iter_mut().enumerate().skip(r) {
        for (column, &xj) in a.chunks_exact(lda).zip(x) {
            *yi += column[i] * xj;
        }
    }
}

/// out = A·B: A column-major with leading dimension `lda` (its first `out_rows` rows),
/// B column-major with as many rows `k` as A has columns, out column-major `out_rows` ×
/// (B's columns). Each entry is the sum [`matvec_rows`] forms (the columns of A in
/// order, from zero), so a product is the same bits as column by column.
pub(crate) fn matmul(a: &[f64], lda: usize, b: &[f64], k: usize, out: &mut [f64], out_rows: usize) {
    let cols = b.len() / k;
    product(
        Operand {
            a,
            lda,
            rows: out_rows,
            inner: k,
        },
        b,
        k,
        cols,
        out,
        out_rows,
    );
}

/// The first `rows` rows and `inner` columns of a column-major matrix of leading
/// dimension `lda`.
#[derive(Clone, Copy)]
pub(crate) struct Operand<'a> {
    pub a: &'a [f64],
    pub lda: usize,
    pub rows: usize,
    pub inner: usize,
}

/// out = A·B for B a propagator or one less the identity (n × n, `a.inner` = n, its
/// first `nx` states dynamic): no state feeds the sources, so B's rows of u are zero in
/// its columns of x, and out's columns of x (their first `rows_x` rows) take A's columns
/// of x alone; its columns of u (`a.rows` rows) take all of A. The same sums in the
/// same order as the full product less terms that are exactly zero.
pub(crate) fn times_fed(
    a: Operand<'_>,
    rows_x: usize,
    b: &[f64],
    nx: usize,
    out: &mut [f64],
    ldo: usize,
) {
    let n = a.inner;
    let (x_part, u_part) = out.split_at_mut(nx * ldo);
    let states = Operand {
        rows: rows_x,
        inner: nx,
        ..a
    };
    product(states, b, n, nx, x_part, ldo);
    product(a, &b[nx * n..], n, n - nx, u_part, ldo);
}

with_avx! {
    /// Columns j < `cols` of out (leading dimension `ldo`) = A·(column j of x, leading
    /// dimension `ldx`, its first `a.inner` entries), each entry the sum
    /// [`matvec_rows`] forms. Four columns go together, so each column of A is loaded
    /// once for four products and four independent sums hide the latency of the adds
    /// that a single matrix–vector product waits on.
    pub(crate) fn product(
        a: Operand<'_>,
        x: &[f64],
        ldx: usize,
        cols: usize,
        out: &mut [f64],
        ldo: usize,
    ) = product_any;
}

#[inline(always)]
fn product_any(a: Operand<'_>, x: &[f64], ldx: usize, cols: usize, out: &mut [f64], ldo: usize) {
    let mut j = 0;
    while j + 4 <= cols {
        columns::<4>(a, x, ldx, j, out, ldo);
        j += 4;
    }
    // The last one to three columns together too: alone, a column waits on its adds.
    match cols - j {
        3 => columns::<3>(a, x, ldx, j, out, ldo),
        2 => columns::<2>(a, x, ldx, j, out, ldo),
        1 => columns::<1>(a, x, ldx, j, out, ldo),
        _ => {}
    }
}

/// Columns j0..j0+C of [`product`], in row blocks of 8 and 4, then row by row.
#[inline(always)]
fn columns<const C: usize>(
    a: Operand<'_>,
    x: &[f64],
    ldx: usize,
    j0: usize,
    out: &mut [f64],
    ldo: usize,
) {
    let xs: [&[f64]; C] = std::array::from_fn(|c| &x[(j0 + c) * ldx..(j0 + c) * ldx + a.inner]);
    let mut r = 0;
    while r + 8 <= a.rows {
        let sums = panel::<8, C>(a, r, &xs);
        for (c, sum) in sums.iter().enumerate() {
            out[(j0 + c) * ldo + r..(j0 + c) * ldo + r + 8].copy_from_slice(sum);
        }
        r += 8;
    }
    if r + 4 <= a.rows {
        let sums = panel::<4, C>(a, r, &xs);
        for (c, sum) in sums.iter().enumerate() {
            out[(j0 + c) * ldo + r..(j0 + c) * ldo + r + 4].copy_from_slice(sum);
        }
        r += 4;
    }
    for i in r..a.rows {
        // The C sums of a row side by side, so they too run independently.
        let mut sums = [0.0f64; C];
        for k in 0..a.inner {
            let a_ik = a.a[k * a.lda + i];
            for (sum, xc) in sums.iter_mut().zip(&xs) {
                *sum += a_ik * xc[k];
            }
        }
        for (c, sum) in sums.iter().enumerate() {
            out[(j0 + c) * ldo + i] = *sum;
        }
    }
}

/// Rows r..r+B of A times each of C vectors, the columns of A in order.
#[inline(always)]
fn panel<const B: usize, const C: usize>(
    a: Operand<'_>,
    r: usize,
    xs: &[&[f64]; C],
) -> [[f64; B]; C] {
    let mut acc = [[0.0f64; B]; C];
    for k in 0..a.inner {
        let start = k * a.lda + r;
        let rows: &[f64; B] = a.a[start..start + B]
            .try_into()
            .expect("block within column");
        for (acc_c, xc) in acc.iter_mut().zip(xs) {
            let v = xc[k];
            for (acc_i, &a_i) in acc_c.iter_mut().zip(rows) {
                *acc_i += a_i * v;
            }
        }
    }
    acc
}

with_avx! {
    /// s += z·zᵀ for s column-major, z.len() × z.len().
    #[inline]
    pub(crate) fn add_outer(z: &[f64], s: &mut [f64]) = add_outer_any;
}

#[inline(always)]
fn add_outer_any(z: &[f64], s: &mut [f64]) {
    for (column, &zj) in s.chunks_exact_mut(z.len()).zip(z) {
        for (sij, &zi) in column.iter_mut().zip(z) {
            *sij += zi * zj;
        }
    }
}

/// Rows r..r+B of A·x added to `acc`, columns in order.
#[inline(always)]
fn block<const B: usize>(a: &[f64], lda: usize, r: usize, x: &[f64], init: [f64; B]) -> [f64; B] {
    let mut acc = init;
    for (column, &xj) in a.chunks_exact(lda).zip(x) {
        let rows: &[f64; B] = column[r..r + B].try_into().expect("block within column");
        for (acc_i, &a_i) in acc.iter_mut().zip(rows) {
            *acc_i += a_i * xj;
        }
    }
    acc
}

/// Σ_k a[k·stride]·x[k]: a row of a column-major matrix (starting at `a[0]`) times x,
/// in the order of [`pair_dot`].
#[inline]
pub(crate) fn strided_dot(a: &[f64], stride: usize, x: &[f64]) -> f64 {
    let mut acc = [0.0f64; 2];
    let pairs = x.chunks_exact(2);
    let rest = pairs.remainder();
    let mut k = 0;
    for pair in pairs {
        acc[0] += a[k] * pair[0];
        acc[1] += a[k + stride] * pair[1];
        k += 2 * stride;
    }
    let mut sum = acc[0] + acc[1];
    if let Some(&last) = rest.first() {
        sum += a[k] * last;
    }
    sum
}

/// a·x over the shorter of the two, in two interleaved partial sums (even and odd
/// terms), then the last term of an odd length: the sums of [`strided_dot`] on a
/// row stored contiguously.
#[inline]
pub(crate) fn pair_dot(a: &[f64], x: &[f64]) -> f64 {
    pair_dot_any(a, x)
}

#[inline(always)]
fn pair_dot_any(a: &[f64], x: &[f64]) -> f64 {
    let (ca, cx) = (a.chunks_exact(2), x.chunks_exact(2));
    let (ra, rx) = (ca.remainder(), cx.remainder());
    let mut acc = [0.0f64; 2];
    for (p, q) in ca.zip(cx) {
        acc[0] += p[0] * q[0];
        acc[1] += p[1] * q[1];
    }
    let mut sum = acc[0] + acc[1];
    if let (Some(&p), Some(&q)) = (ra.first(), rx.first()) {
        sum += p * q;
    }
    sum
}

/// a·b over the shorter of the two, in four interleaved partial sums.
#[inline]
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    dot_any(a, b)
}

with_avx! {
    /// out[k] = [`dot`] of row `first + k` of `rows_t` (rows of `n`, one after
    /// another) with z, for each k in `list`: a trace point's values in one call, so
    /// the loop runs four lanes wide where the processor can.
    pub(crate) fn dots_listed(
        rows_t: &[f64],
        n: usize,
        first: usize,
        list: &[usize],
        z: &[f64],
        out: &mut [f64],
    ) = dots_listed_any;
}

#[inline(always)]
fn dots_listed_any(
    rows_t: &[f64],
    n: usize,
    first: usize,
    list: &[usize],
    z: &[f64],
    out: &mut [f64],
) {
    for &k in list {
        let r = first + k;
        out[k] = dot_any(&rows_t[r * n..(r + 1) * n], z);
    }
}

with_avx! {
    /// out[k] = [`pair_dot`] of row `first + k` of `rows_t` with z, for each k in
    /// `list` (as [`dots_listed`]).
    pub(crate) fn pair_dots_listed(
        rows_t: &[f64],
        n: usize,
        first: usize,
        list: &[usize],
        z: &[f64],
        out: &mut [f64],
    ) = pair_dots_listed_any;
}

#[inline(always)]
fn pair_dots_listed_any(
    rows_t: &[f64],
    n: usize,
    first: usize,
    list: &[usize],
    z: &[f64],
    out: &mut [f64],
) {
    for &k in list {
        let r = first + k;
        out[k] = pair_dot_any(&rows_t[r * n..(r + 1) * n], z);
    }
}

#[inline(always)]
fn dot_any(a: &[f64], b: &[f64]) -> f64 {
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    let mut acc = [0.0f64; 4];
    for (x, y) in ca.zip(cb) {
        acc[0] += x[0] * y[0];
        acc[1] += x[1] * y[1];
        acc[2] += x[2] * y[2];
        acc[3] += x[3] * y[3];
    }
    let mut sum = (acc[0] + acc[2]) + (acc[1] + acc[3]);
    for (x, y) in ra.iter().zip(rb) {
        sum += x * y;
    }
    sum
}

/// Whether every entry is finite (0·v is 0 for a finite v, NaN for ±∞ and NaN; the
/// partial sums vectorise where a short-circuiting test would not).
#[inline]
pub(crate) fn all_finite(x: &[f64]) -> bool {
    let chunks = x.chunks_exact(4);
    let rest = chunks.remainder();
    let mut acc = [0.0f64; 4];
    for c in chunks {
        for (a, &v) in acc.iter_mut().zip(c) {
            *a += v * 0.0;
        }
    }
    let tail: f64 = rest.iter().map(|&v| v * 0.0).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail == 0.0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_product_is_the_same_bits_as_column_by_column() {
        // Columns side by side must not change a sum's order: inexact values (so a
        // different order would show in the last bits), 23 rows (blocks of 8 and 4 and a
        // remainder of 3), and 1 to 9 columns (blocks of four and each remainder).
        let (rows, lda, inner) = (23, 25, 11);
        let value = |i: usize| ((i * 7919) % 1009) as f64 / 97.0 - 5.0;
        let a: Vec<f64> = (0..lda * inner).map(value).collect();
        for cols in 1..=9 {
            let x: Vec<f64> = (0..13 * cols)
                .map(|i| value(i + 31).sqrt().max(-0.3))
                .collect();
            let mut out = vec![f64::NAN; lda * cols];
            let op = Operand {
                a: &a,
                lda,
                rows,
                inner,
            };
            product(op, &x, 13, cols, &mut out, lda);
            for j in 0..cols {
                let mut column = vec![0.0; rows];
                matvec_rows(&a, lda, &x[j * 13..j * 13 + inner], &mut column);
                assert_eq!(&out[j * lda..j * lda + rows], column.as_slice());
                assert!(out[j * lda + rows..(j + 1) * lda]
                    .iter()
                    .all(|v| v.is_nan()));
            }
        }
    }

    #[test]
    fn a_row_stored_contiguously_gives_the_bits_of_its_strided_reading() {
        // A slope read from the transposed copy must equal the one read off the
        // column-major matrix bit for bit, so inexact values (a different summation
        // order would show in the last bits), and odd and even lengths.
        let value = |i: usize| ((i * 7919) % 1009) as f64 / 97.0 - 5.0;
        for (rows, cols) in [(9, 16), (5, 7), (3, 1)] {
            let a = nalgebra::DMatrix::from_fn(rows, cols, |i, j| value(i * 31 + j));
            let x: Vec<f64> = (0..cols).map(|k| value(k + 500).sin()).collect();
            let a_t = a.transpose();
            for i in 0..rows {
                let strided = strided_dot(&a.as_slice()[i..], rows, &x);
                let contiguous = pair_dot(&a_t.as_slice()[i * cols..(i + 1) * cols], &x);
                assert_eq!(
                    contiguous.to_bits(),
                    strided.to_bits(),
                    "row {i} of {rows}×{cols}"
                );
            }
        }
    }

    #[test]
    fn kernels_agree_with_nalgebra() {
        // Products of small integers are exact in f64, so any summation order must give
        // exactly nalgebra's result.
        let (r, c) = (7, 5);
        let a = nalgebra::DMatrix::from_fn(r, c, |i, j| (i as f64) - 2.0 * (j as f64) + 1.0);
        let x = nalgebra::DVector::from_fn(c, |i, _| (i as f64) * 3.0 - 4.0);
        let mut y = vec![0.0; r];
        matvec_rows(a.as_slice(), r, x.as_slice(), &mut y);
        assert_eq!(y.as_slice(), (&a * &x).as_slice());
        let b = nalgebra::DVector::from_fn(c, |i, _| 1.0 - i as f64);
        assert_eq!(dot(x.as_slice(), b.as_slice()), x.dot(&b));
        for rows in [3, 4, 7] {
            let mut top = vec![0.0; rows];
            matvec_rows(a.as_slice(), r, x.as_slice(), &mut top);
            assert_eq!(top.as_slice(), (&a * &x).rows(0, rows).as_slice());
        }
        let tall = nalgebra::DMatrix::from_fn(13, c, |i, j| (i * j) as f64 - 5.0);
        let mut y = vec![0.0; 13];
        matvec_rows(tall.as_slice(), 13, x.as_slice(), &mut y);
        assert_eq!(y.as_slice(), (&tall * &x).as_slice());
        let b: Vec<f64> = (0..13).map(|i| i as f64 * 0.5).collect();
        let mut with_b = vec![0.0; 13];
        matvec_add(tall.as_slice(), 13, x.as_slice(), &b, &mut with_b);
        for i in 0..13 {
            assert_eq!(with_b[i], y[i] + b[i]);
        }
        for i in 0..r {
            let row = strided_dot(&a.as_slice()[i..], r, x.as_slice());
            assert_eq!(row, a.row(i).transpose().dot(&x));
        }
        let mut outer = vec![1.0; 4];
        add_outer(&[1.0, -2.0], &mut outer);
        assert_eq!(outer, vec![2.0, -1.0, -1.0, 5.0]);
        let mut v = vec![1.0, -2.0, 3.0, 1e300, 5.0, 6.0, 7.0];
        assert!(all_finite(&v));
        for bad in [f64::INFINITY, f64::NEG_INFINITY, f64::NAN] {
            for k in [0, 6] {
                let keep = v[k];
                v[k] = bad;
                assert!(!all_finite(&v));
                v[k] = keep;
            }
        }
    }
}

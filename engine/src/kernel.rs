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

with_avx! {
    /// y += the first `y.len()` rows of A·x, in blocks of 8 and 4 rows held in
    /// registers across all columns, so y is read and written once; each row adds its
    /// products one column after another.
    #[inline]
    fn accumulate(a: &[f64], lda: usize, x: &[f64], y: &mut [f64]) = accumulate_any;
}

with_avx! {
    /// y = b + the first `y.len()` rows of A·x (A as in [`matvec_rows`]): b first, then
    /// the columns in order, as [`accumulate`] onto b (b is read where y's sums start,
    /// not copied into y first).
    #[inline]
    pub(crate) fn matvec_add(a: &[f64], lda: usize, x: &[f64], b: &[f64], y: &mut [f64]) = matvec_add_any;
}

#[inline(always)]
fn accumulate_any(a: &[f64], lda: usize, x: &[f64], y: &mut [f64]) {
    rows_any(a, lda, x, None, y);
}

#[inline(always)]
fn matvec_add_any(a: &[f64], lda: usize, x: &[f64], b: &[f64], y: &mut [f64]) {
    rows_any(a, lda, x, Some(b), y);
}

/// The loops of [`accumulate`] and [`matvec_add`], for whatever instruction set the
/// caller has: each row starts from b's entry, or y's own without b.
#[inline(always)]
fn rows_any(a: &[f64], lda: usize, x: &[f64], b: Option<&[f64]>, y: &mut [f64]) {
    let n = y.len();
    debug_assert!(n <= lda && a.len() >= lda * x.len() && b.is_none_or(|b| b.len() >= n));
    let mut r = 0;
    while r + 8 <= n {
        let init: [f64; 8] = b.unwrap_or(y)[r..r + 8].try_into().expect("eight rows");
        y[r..r + 8].copy_from_slice(&block(a, lda, r, x, init));
        r += 8;
    }
    if r + 4 <= n {
        let init: [f64; 4] = b.unwrap_or(y)[r..r + 4].try_into().expect("four rows");
        y[r..r + 4].copy_from_slice(&block(a, lda, r, x, init));
        r += 4;
    }
    for i in r..n {
        let mut yi = b.map_or(y[i], |b| b[i]);
        for (column, &xj) in a.chunks_exact(lda).zip(x) {
            yi += column[i] * xj;
        }
        y[i] = yi;
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

with_avx! {
    /// out[i] = row i of a block of rows over x stored four rows at a time (see
    /// [`phased_block`]), for the first `out.len()` rows, each row summed as [`dot`]
    /// sums it: the same bits, four rows to a register.
    pub(crate) fn dots_block(a: &[f64], x: &[f64], out: &mut [f64]) = dots_block_any;
}

with_avx! {
    /// As [`dots_block`], each row summed as [`pair_dot`] sums it.
    pub(crate) fn pair_dots_block(a: &[f64], x: &[f64], out: &mut [f64]) = pair_dots_block_any;
}

/// Rows over x (each `n` long) laid out for [`dots_block`] and [`pair_dots_block`]:
/// four rows at a time, group g holding column c's entries of rows 4g..4g+4 at 4c,
/// zeros past the last row.
pub(crate) fn rows_block<'a>(rows: impl ExactSizeIterator<Item = &'a [f64]>, n: usize) -> Vec<f64> {
    let mut block = vec![0.0; rows.len().div_ceil(4) * 4 * n];
    for (i, row) in rows.enumerate() {
        for (c, &v) in row[..n].iter().enumerate() {
            block[(i / 4) * 4 * n + 4 * c + i % 4] = v;
        }
    }
    block
}

#[inline(always)]
fn dots_block_any(a: &[f64], x: &[f64], out: &mut [f64]) {
    phased_block::<4, 16>(a, x, out, |p| (p[0] + p[2]) + (p[1] + p[3]));
}

#[inline(always)]
fn pair_dots_block_any(a: &[f64], x: &[f64], out: &mut [f64]) {
    phased_block::<2, 8>(a, x, out, |p| p[0] + p[1]);
}

/// Rows over x in groups of four as [`rows_block`] lays them out, each group
/// `4·x.len()` values. Each row is summed as a dot
/// product of `P` interleaved partial sums (column c into sum c mod P) joined by
/// `join`, then the columns past the last whole group of P added in order: row by row
/// the bits of [`dot_any`] (P = 4) and [`pair_dot_any`] (P = 2). `W` = 4·P.
#[inline(always)]
fn phased_block<const P: usize, const W: usize>(
    a: &[f64],
    x: &[f64],
    out: &mut [f64],
    join: impl Fn([f64; P]) -> f64,
) {
    debug_assert!(W == 4 * P && a.len() >= out.len().div_ceil(4) * 4 * x.len());
    for (group, out4) in a.chunks_exact(4 * x.len()).zip(out.chunks_mut(4)) {
        let mut acc = [[0.0f64; 4]; P];
        let columns = group.chunks_exact(W);
        let (rest, x_rest) = (columns.remainder(), x.chunks_exact(P).remainder());
        for (cols, xs) in columns.zip(x.chunks_exact(P)) {
            for (acc_p, (col, &xp)) in acc.iter_mut().zip(cols.chunks_exact(4).zip(xs)) {
                for (s, &v) in acc_p.iter_mut().zip(col) {
                    *s += v * xp;
                }
            }
        }
        // Each lane is one row, so joining and adding the rest lane-wise keeps every
        // row's order.
        let mut sum: [f64; 4] = std::array::from_fn(|i| join(std::array::from_fn(|p| acc[p][i])));
        for (col, &xc) in rest.chunks_exact(4).zip(x_rest) {
            for (s, &v) in sum.iter_mut().zip(col) {
                *s += v * xc;
            }
        }
        for (o, s) in out4.iter_mut().zip(sum) {
            *o = s;
        }
    }
}

/// a·b over the shorter of the two, in four interleaved partial sums.
#[inline]
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    dot_any(a, b)
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
mod tests;

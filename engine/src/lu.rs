//! Dense LU factorisation with partial pivoting, solving the nodal equations of each
//! topology in place.
//!
//! The nodal matrix of a converter is mostly zeros (each element touches two or three
//! unknowns), so the elimination skips every column whose entry in the pivot row is
//! zero and every right-hand side whose entry is: what a sparse solver saves, at the
//! price of a test per column, on a matrix small enough to stay dense. Gaussian
//! elimination with partial pivoting, row interchanges chosen by the largest magnitude
//! in the pivot column (Golub & Van Loan, *Matrix Computations*, 4th ed., §3.4,
//! Algorithm 3.4.1), then forward and back substitution (§3.1).

crate::kernel::with_avx! {
    /// Solves A·X = B in place for A n × n and B n × `nrhs`, both column-major: B is
    /// overwritten by X and A by its factors. False when A is singular (a zero pivot).
    pub(crate) fn solve_in_place(a: &mut [f64], n: usize, b: &mut [f64], nrhs: usize) -> bool = solve_any;
}

#[inline(always)]
fn solve_any(a: &mut [f64], n: usize, b: &mut [f64], nrhs: usize) -> bool {
    debug_assert_eq!(a.len(), n * n);
    debug_assert_eq!(b.len(), n * nrhs);
    for k in 0..n {
        // The first row of the largest magnitude, found as the largest first (four
        // independent maxima, where a running argmax waits on each comparison).
        let below = &a[k * n + k..(k + 1) * n];
        let largest = max_abs(below);
        let p = k + below.iter().position(|v| v.abs() == largest).unwrap_or(0);
        let pivot = a[k * n + p];
        if pivot == 0.0 || !pivot.is_finite() {
            return false;
        }
        if p != k {
            swap_rows(a, n, n, k, p);
            swap_rows(b, n, nrhs, k, p);
        }
        // Multipliers l_ik = a_ik / a_kk below the pivot, kept in place of the zeros.
        for v in &mut a[k * n + k + 1..(k + 1) * n] {
            *v /= pivot;
        }
        let (head, tail) = a.split_at_mut((k + 1) * n);
        let l = &head[k * n + k + 1..];
        for column in tail.chunks_exact_mut(n) {
            eliminate(column, k, l);
        }
        for column in b.chunks_exact_mut(n) {
            eliminate(column, k, l);
        }
    }
    for column in b.chunks_exact_mut(n) {
        for k in (0..n).rev() {
            let x = column[k] / a[k * n + k];
            column[k] = x;
            if x != 0.0 {
                for (v, u) in column[..k].iter_mut().zip(&a[k * n..k * n + k]) {
                    *v -= u * x;
                }
            }
        }
    }
    true
}

/// The largest |v| over `values` (0 when empty; NaN entries are passed over, as the
/// comparison `>` of a running maximum passes them over).
#[inline(always)]
fn max_abs(values: &[f64]) -> f64 {
    let chunks = values.chunks_exact(4);
    let rest = chunks.remainder();
    let mut m = [0.0f64; 4];
    for c in chunks {
        for (mi, &v) in m.iter_mut().zip(c) {
            *mi = mi.max(v.abs());
        }
    }
    let tail = rest.iter().fold(0.0f64, |acc, &v| acc.max(v.abs()));
    m[0].max(m[1]).max(m[2].max(m[3])).max(tail)
}

/// column[i] −= l_i·column[k] below row k, skipped when column[k] is zero.
#[inline(always)]
fn eliminate(column: &mut [f64], k: usize, l: &[f64]) {
    let x = column[k];
    if x != 0.0 {
        for (v, m) in column[k + 1..].iter_mut().zip(l) {
            *v -= m * x;
        }
    }
}

#[inline(always)]
fn swap_rows(a: &mut [f64], n: usize, columns: usize, i: usize, j: usize) {
    for c in 0..columns {
        a.swap(c * n + i, c * n + j);
    }
}

#[cfg(test)]
mod tests {
    use nalgebra::DMatrix;

    use super::solve_in_place;

    #[test]
    fn solves_a_pivoting_system_as_the_reference_lu_does() {
        // A matrix that needs row interchanges (zero leading pivot) and has structural
        // zeros, against nalgebra's LU with partial pivoting (a general-purpose
        // reference library): the same solution to 1e-14 relative.
        let n = 7;
        let a = DMatrix::from_fn(n, n, |i, j| match (i + 2 * j) % 5 {
            0 if i == 0 && j == 0 => 0.0,
            0 | 3 => 0.0,
            r => (r as f64) * (1.0 + i as f64) - j as f64 * 0.5 + if i == j { 9.0 } else { 0.0 },
        });
        let b = DMatrix::from_fn(n, 3, |i, j| (i as f64 - 2.0) * (j as f64 + 1.0));
        let expected = a.clone().lu().solve(&b).expect("regular");
        let (mut a2, mut x) = (a.clone(), b.clone());
        assert!(solve_in_place(a2.as_mut_slice(), n, x.as_mut_slice(), 3));
        let rel = (&x - &expected).norm() / expected.norm();
        assert!(rel < 1e-14, "relative difference {rel:e}");
        let residual = (&a * &x - &b).norm() / b.norm();
        assert!(residual < 1e-14, "residual {residual:e}");
    }

    #[test]
    fn a_singular_matrix_is_refused() {
        let mut a = vec![1.0, 2.0, 2.0, 4.0];
        let mut b = vec![1.0, 1.0];
        assert!(!solve_in_place(&mut a, 2, &mut b, 1));
    }
}

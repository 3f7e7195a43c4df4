//! Kernel checks: the same bits whatever the blocking, and agreement with nalgebra.

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

#[test]
fn block_rows_give_the_bits_of_their_dots_row_by_row() {
    // A trace point's values and slopes read from a gathered block must be the bits of
    // the row-by-row dots they replace: inexact values (another order would show in
    // the last bits), 1 to 9 columns (whole groups of four and two and every
    // remainder), and row counts that do and do not fill a register.
    let value = |i: usize| ((i * 7919) % 1009) as f64 / 97.0 - 5.0;
    for cols in 1..=9 {
        for rows in [1usize, 3, 4, 5, 8, 11] {
            let row = |i: usize| -> Vec<f64> { (0..cols).map(|c| value(i * 37 + c)).collect() };
            let all: Vec<Vec<f64>> = (0..rows).map(row).collect();
            let block = rows_block(all.iter().map(Vec::as_slice), cols);
            let x: Vec<f64> = (0..cols).map(|k| value(k + 500).sin()).collect();
            let (mut four, mut two) = (vec![f64::NAN; rows], vec![f64::NAN; rows]);
            dots_block(&block, &x, &mut four);
            pair_dots_block(&block, &x, &mut two);
            for i in 0..rows {
                let r = row(i);
                assert_eq!(
                    four[i].to_bits(),
                    dot(&r, &x).to_bits(),
                    "{rows}×{cols} row {i}"
                );
                assert_eq!(
                    two[i].to_bits(),
                    pair_dot(&r, &x).to_bits(),
                    "{rows}×{cols} row {i}"
                );
            }
        }
    }
}

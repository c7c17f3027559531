//! The small dense solve the local polynomial fits need.

/// Solves the N×N system `a·x = b` by Gaussian elimination with partial pivoting; `None` when a pivot
/// is negligible against the matrix's largest entry (the points do not determine the polynomial).
pub(crate) fn solve<const N: usize>(mut a: [[f64; N]; N], mut b: [f64; N]) -> Option<[f64; N]> {
    let norm = a.iter().flatten().fold(0.0_f64, |s, v| s.max(v.abs()));
    if !(norm > 0.0 && norm.is_finite()) {
        return None;
    }
    for col in 0..N {
        let pivot = (col..N).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[pivot][col].is_nan() || a[pivot][col].abs() <= 1e-13 * norm {
            return None;
        }
        a.swap(col, pivot);
        b.swap(col, pivot);
        let (head, tail) = a.split_at_mut(col + 1);
        let pivot_row = &head[col];
        for (r, row) in tail.iter_mut().enumerate() {
            let f = row[col] / pivot_row[col];
            for (x, p) in row[col..].iter_mut().zip(&pivot_row[col..]) {
                *x -= f * p;
            }
            b[col + 1 + r] -= f * b[col];
        }
    }
    let mut x = [0.0; N];
    for row in (0..N).rev() {
        let s: f64 = (row + 1..N).map(|k| a[row][k] * x[k]).sum();
        x[row] = (b[row] - s) / a[row][row];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// The normal equations of a least-squares polynomial of degree N − 1 in `u`, with weights `w`:
/// accumulates one point.
pub(crate) fn accumulate<const N: usize>(
    m: &mut [[f64; N]; N],
    t: &mut [f64; N],
    u: f64,
    y: f64,
    w: f64,
) {
    let mut pow = [0.0; N];
    let mut p = 1.0;
    for v in pow.iter_mut() {
        *v = p;
        p *= u;
    }
    for i in 0..N {
        t[i] += w * pow[i] * y;
        for j in 0..N {
            m[i][j] += w * pow[i] * pow[j];
        }
    }
}

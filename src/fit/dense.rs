//! Dense kernels shared by the linear fit, Levenberg–Marquardt and the covariance:
//! Householder QR in place, the damped triangular solve, column scaling and the rank test.
//!
//! Everything here works on caller-owned buffers so that the nonlinear inner loop does not
//! allocate. Sources (from memory): Golub & Van Loan, *Matrix Computations*, 3rd ed., §5.1
//! (Householder vectors) and §5.3 (least squares by QR); Moré, Garbow & Hillstrom, *User guide
//! for MINPACK-1*, ANL-80-74 (1980), routine `qrsolv` for the damped solve.

use nalgebra::DMatrix;

use crate::vector::vectorized;

/// Lane sums as computed, behind an optimization barrier: without it the optimizer
/// vectorizes the combination (s₀ + s₁) + (s₂ + s₃) and lays out the loop for that, two lanes
/// wide with shuffles, instead of the loop's four lanes. No effect on any value.
#[inline(always)]
fn lanes<T>(sums: T) -> T {
    std::hint::black_box(sums)
}

/// Euclidean norm of `x`. One pass of plain sums of squares; when that overflows or falls
/// into the range where squares underflow, a second pass scales by the largest entry (the
/// idea of LAPACK's `dnrm2`, from memory).
pub(crate) fn norm2(x: &[f64]) -> f64 {
    vectorized(
        x.len(),
        #[inline(always)]
        || norm2_kernel(x),
    )
}

/// The body of [`norm2`], for use inside other vector kernels.
#[inline(always)]
fn norm2_kernel(x: &[f64]) -> f64 {
    let sum = dot_kernel(x, x);
    if sum.is_finite() && sum > 1e-280 {
        return sum.sqrt();
    }
    let scale = x.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return scale;
    }
    let inv = 1.0 / scale;
    let sum: f64 = x.iter().map(|v| (v * inv) * (v * inv)).sum();
    scale * sum.sqrt()
}

/// Σ aᵢ·bᵢ over the common length, with four partial sums (lets the compiler keep several
/// multiply-adds in flight; the summation order differs from a plain loop only by rounding):
/// lane k sums the products of rows 4m + k of the whole blocks of four, the n mod 4 rows left
/// over are summed in order, and the result is (s₀ + s₁) + (s₂ + s₃) + tail.
#[cfg(test)]
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    vectorized(
        a.len(),
        #[inline(always)]
        || dot_kernel(a, b),
    )
}

/// The body of [`dot`], for use inside other vector kernels.
#[inline(always)]
pub(crate) fn dot_kernel(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let whole = n - n % 4;
    let (a, b) = (&a[..n], &b[..n]);
    let acc = lanes(dot_blocks(&a[..whole], &b[..whole]));
    let tail: f64 = a[whole..].iter().zip(&b[whole..]).map(|(x, y)| x * y).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// The four lane sums of [`dot`] over the whole blocks of four.
#[inline(always)]
fn dot_blocks(a: &[f64], b: &[f64]) -> [f64; 4] {
    let mut acc = [0.0_f64; 4];
    for (x, y) in a.chunks_exact(4).zip(b.chunks_exact(4)) {
        for k in 0..4 {
            acc[k] += x[k] * y[k];
        }
    }
    acc
}

/// q = c ⊙ s (a Jacobian column weighted by √w; `s` None for unit weights, where q = c)
/// written into `q`, with qᵀe and ‖q‖ in the same pass: the values of [`dot`]`(q, e)` and
/// [`norm2`]`(q)` to the last bit (the same four partial sums in the same order), without
/// reading q back twice.
pub(crate) fn weighted_column(
    c: &[f64],
    s: Option<&[f64]>,
    e: &[f64],
    q: &mut [f64],
) -> (f64, f64) {
    let n = c.len().min(e.len()).min(q.len());
    let n = s.map_or(n, |s| n.min(s.len()));
    let (c, q) = (&c[..n], &mut q[..n]);
    let (g, sum) = match s {
        Some(s) => weighted_sums::<false>(c, s, e, Some(q)),
        None => weighted_sums::<true>(c, c, e, Some(q)),
    };
    (g, column_norm(sum, c, s))
}

/// qᵀe and ‖q‖ for q = c ⊙ s without writing q; the same bits as [`weighted_column`] (the
/// tests' reference for the streaming QR's column sums).
#[cfg(test)]
pub(crate) fn weighted_column_sums(c: &[f64], s: Option<&[f64]>, e: &[f64]) -> (f64, f64) {
    let (g, sum) = match s {
        Some(s) => weighted_sums::<false>(c, s, e, None),
        None => weighted_sums::<true>(c, c, e, None),
    };
    (g, column_norm(sum, c, s))
}

/// ‖q‖ from its plain sum of squares `sum`, as [`norm2`] takes it: when that is tiny or huge,
/// the scaled norm of the weighted column, formed again (rare).
pub(crate) fn column_norm(sum: f64, c: &[f64], s: Option<&[f64]>) -> f64 {
    if sum.is_finite() && sum > 1e-280 {
        return sum.sqrt();
    }
    let q: Vec<f64> = match s {
        Some(s) => c.iter().zip(s).map(|(c, s)| c * s).collect(),
        None => c.to_vec(),
    };
    norm2(&q)
}

/// The pass behind [`weighted_column`] and [`weighted_column_sums`]: qᵢ = cᵢ·sᵢ over the
/// common length (qᵢ = cᵢ when `UNIT`, `s` then unread: 1·x = x exactly), written to `q`
/// when given. Returns qᵀe and Σ qᵢ², each with the four partial sums of [`dot`].
#[inline(always)]
fn weighted_sums<const UNIT: bool>(
    c: &[f64],
    s: &[f64],
    e: &[f64],
    q: Option<&mut [f64]>,
) -> (f64, f64) {
    let n = c.len().min(s.len()).min(e.len());
    let whole = n - n % 4;
    let (c, s, e) = (&c[..n], &s[..n], &e[..n]);
    let weigh = |c: f64, s: f64| if UNIT { c } else { c * s };
    let (q_blocks, mut q_rest) = match q {
        Some(q) => {
            let (body, rest) = q[..n].split_at_mut(whole);
            (Some(body), Some(rest))
        }
        None => (None, None),
    };
    let (g, ss) = vectorized(
        n,
        #[inline(always)]
        || weighted_blocks::<UNIT>(&c[..whole], &s[..whole], &e[..whole], q_blocks),
    );
    let (mut gt, mut st) = (0.0, 0.0);
    for i in whole..n {
        let v = weigh(c[i], s[i]);
        if let Some(rest) = q_rest.as_deref_mut() {
            rest[i - whole] = v;
        }
        gt += v * e[i];
        st += v * v;
    }
    let g = (g[0] + g[1]) + (g[2] + g[3]) + gt;
    let sum = (ss[0] + ss[1]) + (ss[2] + ss[3]) + st;
    (g, sum)
}

/// The lane sums of [`weighted_sums`] over whole blocks of four rows.
#[inline(always)]
fn weighted_blocks<const UNIT: bool>(
    c: &[f64],
    s: &[f64],
    e: &[f64],
    q: Option<&mut [f64]>,
) -> ([f64; 4], [f64; 4]) {
    let mut g = [0.0_f64; 4];
    let mut ss = [0.0_f64; 4];
    let blocks = c
        .chunks_exact(4)
        .zip(s.chunks_exact(4))
        .zip(e.chunks_exact(4));
    match q {
        Some(q) => {
            for (((x, w), y), d) in blocks.zip(q.chunks_exact_mut(4)) {
                d.copy_from_slice(&weighted_block::<UNIT>(x, w, y, &mut g, &mut ss));
            }
        }
        None => {
            for ((x, w), y) in blocks {
                weighted_block::<UNIT>(x, w, y, &mut g, &mut ss);
            }
        }
    }
    (g, ss)
}

/// One block of four rows of [`weighted_blocks`]: returns the q values.
#[inline(always)]
fn weighted_block<const UNIT: bool>(
    x: &[f64],
    w: &[f64],
    y: &[f64],
    g: &mut [f64; 4],
    ss: &mut [f64; 4],
) -> [f64; 4] {
    let v: [f64; 4] = std::array::from_fn(|k| if UNIT { x[k] } else { x[k] * w[k] });
    for k in 0..4 {
        g[k] += v[k] * y[k];
    }
    for k in 0..4 {
        ss[k] += v[k] * v[k];
    }
    v
}

/// Rows per block of [`streaming_qr`]: the (p + block) × (p + 1) buffer stays in the L1/L2
/// cache for the few parameters of calibration models (common practice, not tuned).
const QR_BLOCK: usize = 256;

/// R and z = (Qᵀb)[0..p] of the QR factorization of A = J ⊙ √w (J column-major n × p in
/// `jac`, n = `jac.len()`/p, row i scaled by `s[i]`, columns with `zero[j]` taken as 0),
/// without storing A or Q.
///
/// Parallel TSQR (Demmel, Grigori, Hoemmen & Langou, "Communication-optimal parallel and
/// sequential QR and LU factorizations", SIAM J. Sci. Comput. 34(1), 2012) over the fixed
/// blocks of [`super::rows`]: each block's rows are taken [`QR_BLOCK`] at a time, stacked
/// under the block's [R | z] so far and reduced by Householder reflections (as in
/// [`householder_qr_in_place`]); the blocks' triangles are then stacked and reduced the same
/// way, in block order. Backward stable like one Householder QR of [A | b], whose R and first
/// p entries of Qᵀb it gives up to the signs of R's rows (each row's sign carried by z's
/// entry); the same bits with any number of threads. R goes to the upper triangle of the
/// p × p `r` (zeros below), z to `z[..p]`; without `b` (R alone, as for the covariance) `z`
/// is not written.
///
/// With `sums` (and `b`), the same pass also gives each column's qⱼᵀb and Σᵢ qⱼᵢ² for
/// qⱼ = column j of A (zero columns included, as unweighted J): into
/// `sums[j] = (qⱼᵀb, Σ qⱼᵢ²)`, each the block sums of [`weighted_column_sums`]'s four-lane
/// kernel added in block order.
/// `unit`: every s[i] is 1, and `s` is not read (the multiplications by 1 are left out,
/// 1·x = x exactly).
///
/// Returns whether every entry of A is finite (checked on each piece while it is in cache;
/// the solver's model already guarantees it, the covariance relies on it).
#[allow(clippy::too_many_arguments)]
pub(crate) fn streaming_qr(
    jac: &[f64],
    s: &[f64],
    unit: bool,
    zero: &[bool],
    b: Option<&[f64]>,
    sums: Option<&mut [(f64, f64)]>,
    r: &mut DMatrix<f64>,
    z: &mut [f64],
) -> bool {
    let p = r.ncols();
    let n = jac.len() / p.max(1);
    let sums = sums.filter(|_| b.is_some());
    let want_sums = sums.is_some();
    let parts = super::rows::map(n, |rows| {
        vectorized(
            rows.len(),
            #[inline(always)]
            || block_triangle(jac, n, rows, s, unit, zero, b, want_sums, p),
        )
    });
    if let Some(sums) = sums {
        sums[..p].fill((0.0, 0.0));
        for part in &parts {
            for (acc, add) in sums.iter_mut().zip(&part.sums) {
                acc.0 += add.0;
                acc.1 += add.1;
            }
        }
    }
    // The blocks' triangles, stacked two at a time: rows 0..p the running [R | z], rows
    // p..2p the next block's.
    let ncols = p + usize::from(b.is_some());
    let ld = 2 * p;
    let mut work = vec![0.0; ld * ncols];
    for (k, part) in parts.iter().enumerate() {
        let base = if k == 0 { 0 } else { p };
        for j in 0..ncols {
            work[j * ld + base..j * ld + base + p].copy_from_slice(&part.tri[j * p..(j + 1) * p]);
        }
        if k > 0 {
            vectorized(
                ld,
                #[inline(always)]
                || reduce_stacked(&mut work, ld, p, ncols, ld),
            );
        }
    }
    for j in 0..p {
        for i in 0..p {
            r[(i, j)] = if i <= j { work[j * ld + i] } else { 0.0 };
        }
    }
    if b.is_some() {
        z[..p].copy_from_slice(&work[p * ld..p * ld + p]);
    }
    parts.iter().all(|part| part.finite)
}

/// One block's share of [`streaming_qr`].
struct BlockTriangle {
    /// [R | z] (or R alone, without b) of the block's rows, p × (p + 1) (or p × p)
    /// column-major, leading dimension p.
    tri: Vec<f64>,
    /// (qⱼᵀb, Σ qⱼᵢ²) over the block's rows, when asked for.
    sums: Vec<(f64, f64)>,
    /// Every entry of the block's rows of A is finite.
    finite: bool,
}

/// [R | z] of the rows `rows` of A = J ⊙ √w and b (sequential TSQR over [`QR_BLOCK`]-row
/// pieces), and with `want_sums` the column sums of [`streaming_qr`] over those rows.
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn block_triangle(
    jac: &[f64],
    n: usize,
    rows: std::ops::Range<usize>,
    s: &[f64],
    unit: bool,
    zero: &[bool],
    b: Option<&[f64]>,
    want_sums: bool,
    p: usize,
) -> BlockTriangle {
    let mut sums = Vec::new();
    if want_sums && let Some(b) = b {
        let br = &b[rows.clone()];
        for j in 0..p {
            let c = &jac[j * n + rows.start..j * n + rows.end];
            sums.push(if unit {
                weighted_sums::<true>(c, c, br, None)
            } else {
                weighted_sums::<false>(c, &s[rows.clone()], br, None)
            });
        }
    }
    let ncols = p + usize::from(b.is_some());
    let ld = p + QR_BLOCK;
    let mut work = vec![0.0; ld * ncols];
    let mut finite = true;
    let mut lo = rows.start;
    while lo < rows.end {
        let len = QR_BLOCK.min(rows.end - lo);
        let m = p + len;
        for j in 0..p {
            let dest = &mut work[j * ld + p..j * ld + m];
            let src = &jac[j * n + lo..j * n + lo + len];
            if zero.get(j).copied().unwrap_or(false) {
                dest.fill(0.0);
            } else if unit {
                dest.copy_from_slice(src);
            } else {
                for ((d, c), w) in dest.iter_mut().zip(src).zip(&s[lo..lo + len]) {
                    *d = c * w;
                }
            }
            finite &= crate::vector::all_finite(dest);
        }
        if let Some(b) = b {
            work[p * ld + p..p * ld + m].copy_from_slice(&b[lo..lo + len]);
        }
        reduce_stacked(&mut work, ld, p, ncols, m);
        lo += len;
    }
    let mut tri = vec![0.0; p * ncols];
    for j in 0..ncols {
        for i in 0..p {
            // Below the diagonal of R the block's reduction leaves zeros.
            tri[j * p + i] = work[j * ld + i];
        }
    }
    BlockTriangle { tri, sums, finite }
}

/// One step of the blocked QR: the column-major block in `work` (leading dimension `ld`,
/// `ncols` ≥ p columns; rows 0..p the triangle so far, rows p..m the next rows) is reduced by
/// Householder reflections of its first p columns (β = −sign(x₀)·‖x‖, as in
/// [`householder_qr_in_place`]), each applied to the columns after it. Rows 0..p then hold
/// the new triangle (and, in the columns past p, the first p entries of their reflection),
/// with zeros below its diagonal; rows p..m hold what is left of the reflections, to be
/// overwritten by the next block's rows (whatever is read of them next is written first).
#[inline(always)]
pub(crate) fn reduce_stacked(work: &mut [f64], ld: usize, p: usize, ncols: usize, m: usize) {
    for j in 0..p {
        let (left, right) = work.split_at_mut((j + 1) * ld);
        let x = &mut left[j * ld + j..j * ld + m];
        let alpha = x[0];
        let tail_norm = norm2_kernel(&x[1..]);
        if tail_norm == 0.0 {
            continue;
        }
        let beta = -alpha.signum() * alpha.hypot(tail_norm);
        let tau = (beta - alpha) / beta;
        let inv = 1.0 / (alpha - beta);
        for v in &mut x[1..] {
            *v *= inv;
        }
        x[0] = beta;
        let v = &x[1..];
        for k in 0..(ncols - j - 1) {
            reflect(tau, v, &mut right[k * ld + j..k * ld + m]);
        }
        // The triangle's rows below the diagonal start the next block at zero; rows p..m are
        // overwritten by the next block (clearing them all cost a memset of the whole block).
        x[1..p - j].fill(0.0);
    }
}

/// y ← y − α·x over the common length.
#[inline(always)]
fn sub_scaled(y: &mut [f64], alpha: f64, x: &[f64]) {
    for (yi, xi) in y.iter_mut().zip(x) {
        *yi -= alpha * xi;
    }
}

/// c ← H·c for the Householder reflection H = I − τ·u·uᵀ with u = (1, v): with
/// t = τ·(c₀ + vᵀc₁‥), c₀ ← c₀ − t and c₁‥ ← c₁‥ − t·v.
#[inline(always)]
fn reflect(tau: f64, v: &[f64], c: &mut [f64]) {
    if let Some((c0, rest)) = c.split_first_mut() {
        let t = tau * (*c0 + dot_kernel(v, rest));
        *c0 -= t;
        sub_scaled(rest, t, v);
    }
}

/// Householder QR of the `n × p` matrix `a` (n ≥ p) in place, LAPACK `dgeqr2` layout:
/// on return the upper triangle of the first `p` rows holds R, the part below the diagonal of
/// column j holds the Householder vector vⱼ (with implicit vⱼ[j] = 1), and `tau[j]` its factor,
/// so that Hⱼ = I − τⱼ·vⱼ·vⱼᵀ and Qᵀ = H_{p−1}···H₀.
///
/// Each vⱼ maps the column x to (β, 0, …, 0) with β = −sign(x₀)·‖x‖, which avoids
/// cancellation (Golub & Van Loan §5.1.2, from memory). A column already zero below the
/// diagonal gets τ = 0 (H = I).
pub(crate) fn householder_qr_in_place(a: &mut DMatrix<f64>, tau: &mut [f64]) {
    vectorized(
        a.nrows(),
        #[inline(always)]
        || householder_qr_kernel(a, tau, None),
    );
}

/// [`householder_qr_in_place`] and b ← Qᵀ·b in the same pass: each reflection is applied to
/// b with the columns it is applied to, so b gets the bits [`apply_qt`] would give it after
/// the factorization (the same reflections in the same order, the same arithmetic).
pub(crate) fn householder_qr_with_qtb(a: &mut DMatrix<f64>, tau: &mut [f64], b: &mut [f64]) {
    vectorized(
        a.nrows(),
        #[inline(always)]
        || householder_qr_kernel(a, tau, Some(b)),
    );
}

#[inline(always)]
fn householder_qr_kernel(a: &mut DMatrix<f64>, tau: &mut [f64], mut b: Option<&mut [f64]>) {
    let (n, p) = a.shape();
    debug_assert!(n >= p && tau.len() >= p);
    debug_assert!(b.as_ref().is_none_or(|b| b.len() == n));
    for j in 0..p {
        let alpha = a[(j, j)];
        let tail_norm = {
            let col = a.column(j);
            norm2_kernel(&col.as_slice()[j + 1..])
        };
        if tail_norm == 0.0 {
            tau[j] = 0.0;
            continue;
        }
        let beta = -alpha.signum() * alpha.hypot(tail_norm);
        let t = (beta - alpha) / beta;
        let inv = 1.0 / (alpha - beta);
        {
            let mut col = a.column_mut(j);
            let s = col.as_mut_slice();
            for v in &mut s[j + 1..] {
                *v *= inv;
            }
            s[j] = beta;
        }
        tau[j] = t;
        // Apply Hⱼ to the remaining columns (and b), up to four at a time.
        let (left, right) = a.as_mut_slice().split_at_mut((j + 1) * n);
        let v = &left[j * n + j + 1..(j + 1) * n];
        let extra = b.as_deref_mut().map(|b| &mut b[j..n]);
        let mut cols = right.chunks_exact_mut(n).map(|c| &mut c[j..n]).chain(extra);
        loop {
            match (cols.next(), cols.next(), cols.next(), cols.next()) {
                (Some(c0), Some(c1), Some(c2), Some(c3)) => reflect_many(t, v, [c0, c1, c2, c3]),
                (Some(c0), Some(c1), Some(c2), None) => reflect_many(t, v, [c0, c1, c2]),
                (Some(c0), Some(c1), None, _) => reflect_many(t, v, [c0, c1]),
                (Some(c0), None, _, _) => reflect_many(t, v, [c0]),
                (None, _, _, _) => break,
            }
        }
    }
}

/// [`reflect`] on `M` columns at once: the same arithmetic for each column (the four lane
/// sums of [`dot_kernel`], its tail and its combination, then the update), so the same bits,
/// with the columns' sums in flight together rather than one column's after the other's.
#[inline(always)]
fn reflect_many<const M: usize>(tau: f64, v: &[f64], cs: [&mut [f64]; M]) {
    let len = v.len();
    let (blocks, tail) = v.as_chunks::<4>();
    let whole = blocks.len() * 4;
    let mut acc = [[0.0_f64; 4]; M];
    {
        let ys: [&[[f64; 4]]; M] = std::array::from_fn(|c| {
            let (yb, _) = cs[c][1..1 + len].as_chunks::<4>();
            &yb[..blocks.len()]
        });
        for (i, x) in blocks.iter().enumerate() {
            for c in 0..M {
                let y = &ys[c][i];
                for k in 0..4 {
                    acc[c][k] += x[k] * y[k];
                }
            }
        }
    }
    let acc = lanes(acc);
    for (c, col) in cs.into_iter().enumerate() {
        // Each column runs from the diagonal down: its first entry, then v's rows.
        let Some((c0, rest)) = col.split_first_mut() else {
            continue;
        };
        let rest = &mut rest[..len];
        let t_sum: f64 = tail.iter().zip(&rest[whole..]).map(|(x, y)| x * y).sum();
        let d = (acc[c][0] + acc[c][1]) + (acc[c][2] + acc[c][3]) + t_sum;
        let t = tau * (*c0 + d);
        *c0 -= t;
        sub_scaled(rest, t, v);
    }
}

/// b ← Qᵀ·b for a factorization from [`householder_qr_in_place`].
pub(crate) fn apply_qt(qr: &DMatrix<f64>, tau: &[f64], b: &mut [f64]) {
    let (n, p) = qr.shape();
    vectorized(
        n,
        #[inline(always)]
        || {
            for j in 0..p {
                if tau[j] != 0.0 {
                    reflect(
                        tau[j],
                        &qr.as_slice()[j * n + j + 1..(j + 1) * n],
                        &mut b[j..n],
                    );
                }
            }
        },
    );
}

/// b ← Q·b for a factorization from [`householder_qr_in_place`] (Q = H₀·H₁···H_{p−1}).
pub(crate) fn apply_q(qr: &DMatrix<f64>, tau: &[f64], b: &mut [f64]) {
    let (n, p) = qr.shape();
    for j in (0..p).rev() {
        if tau[j] == 0.0 {
            continue;
        }
        let v = &qr.as_slice()[j * n..(j + 1) * n];
        let mut s = b[j];
        for i in j + 1..n {
            s += v[i] * b[i];
        }
        s *= tau[j];
        b[j] -= s;
        for i in j + 1..n {
            b[i] -= s * v[i];
        }
    }
}

/// Solve Rᵀ·x = b by forward substitution (R as in [`solve_upper`]).
pub(crate) fn solve_upper_transposed(r: &DMatrix<f64>, b: &[f64], x: &mut [f64]) -> bool {
    let p = r.ncols();
    for i in 0..p {
        let mut s = b[i];
        for k in 0..i {
            s -= r[(k, i)] * x[k];
        }
        let d = r[(i, i)];
        if d == 0.0 {
            return false;
        }
        x[i] = s / d;
    }
    true
}

/// Solve R·x = b by back substitution, R the upper triangle of the first p rows of `r`.
/// Returns false (x untouched past the failure) when a diagonal entry is zero.
pub(crate) fn solve_upper(r: &DMatrix<f64>, b: &[f64], x: &mut [f64]) -> bool {
    let p = r.ncols();
    for i in (0..p).rev() {
        let mut s = b[i];
        for k in i + 1..p {
            s -= r[(i, k)] * x[k];
        }
        let d = r[(i, i)];
        if d == 0.0 {
            return false;
        }
        x[i] = s / d;
    }
    true
}

/// Buffers for [`damped_solve`], allocated once per fit.
#[derive(Debug, Clone)]
pub(crate) struct DampedWork {
    /// The p × p triangle being reduced, row by row (row k at `k·p..(k + 1)·p`), so that the
    /// rotation of a row's tail runs over contiguous memory.
    s: Vec<f64>,
    sdiag: Vec<f64>,
    z: Vec<f64>,
    /// The rotations of the last [`damped_solve`] in order, (k, cos, sin), with
    /// [`NEW_ROW`] where the next √λ·D row starts; [`damped_resolve`] replays them. Sized
    /// once for the most a solve can record (p·(p + 1)/2 rotations and p markers); the first
    /// `count` entries are the last solve's.
    rotations: Vec<(usize, f64, f64)>,
    count: usize,
    /// Whether `s` holds a reduced triangle (the last solve got that far).
    reduced: bool,
}

/// Marker in [`DampedWork::rotations`]: a new extra row, whose right-hand side starts at 0.
const NEW_ROW: usize = usize::MAX;

impl DampedWork {
    pub(crate) fn new(p: usize) -> Self {
        DampedWork {
            s: vec![0.0; p * p],
            sdiag: vec![0.0; p],
            z: vec![0.0; p],
            rotations: vec![(NEW_ROW, 0.0, 0.0); p * (p + 1) / 2 + p],
            count: 0,
            reduced: false,
        }
    }
}

/// Calls `$body` with `$p` replaced by a constant for the parameter counts of typical models
/// (1 to 10), so that the compiler unrolls the short loops of the O(p²) and O(p³) kernels and
/// drops their bounds checks; other counts run the same code with `$p` as it is. The
/// arithmetic, and so every bit of the result, is the same either way.
macro_rules! with_constant_p {
    ($p:expr, $body:ident($($arg:expr),*)) => {
        match $p {
            1 => $body(1, $($arg),*),
            2 => $body(2, $($arg),*),
            3 => $body(3, $($arg),*),
            4 => $body(4, $($arg),*),
            5 => $body(5, $($arg),*),
            6 => $body(6, $($arg),*),
            7 => $body(7, $($arg),*),
            8 => $body(8, $($arg),*),
            9 => $body(9, $($arg),*),
            10 => $body(10, $($arg),*),
            p => $body(p, $($arg),*),
        }
    };
}

/// Solve the damped least-squares problem
/// `min ‖[R; √λ·D]·x − [qtb; 0]‖` for upper-triangular R (the first p rows of `qr`),
/// diagonal D = `diag` and the first p entries of Qᵀb in `qtb`.
///
/// With J = Q·R this is exactly the least-squares solution of the augmented system
/// `[J; √λ·D]·x ≈ [b; 0]`, i.e. the Levenberg–Marquardt step, obtained by orthogonal
/// transformations only (never by forming JᵀJ + λ·DᵀD). The √λ·D rows are eliminated
/// against R by Givens rotations, as in MINPACK's `qrsolv` (Moré, Garbow & Hillstrom,
/// ANL-80-74, from memory). Returns false when the reduced triangle is singular
/// (only possible for λ = 0 and rank-deficient R).
pub(crate) fn damped_solve(
    qr: &DMatrix<f64>,
    diag: &[f64],
    lambda: f64,
    qtb: &[f64],
    work: &mut DampedWork,
    x: &mut [f64],
) -> bool {
    with_constant_p!(qr.ncols(), damped_solve_p(qr, diag, lambda, qtb, work, x))
}

/// The body of [`damped_solve`] for p = `qr.ncols()`, given as `p` so that it can be a
/// constant.
#[inline(always)]
fn damped_solve_p(
    p: usize,
    qr: &DMatrix<f64>,
    diag: &[f64],
    lambda: f64,
    qtb: &[f64],
    work: &mut DampedWork,
    x: &mut [f64],
) -> bool {
    let n = qr.nrows();
    let q = &qr.as_slice()[..n * p];
    let sqrt_lambda = lambda.sqrt();
    let s = &mut work.s[..p * p];
    // The upper triangle of R, row-major: s[k·p + i] = R[k, i] (column-major qr: i·n + k).
    for (k, row) in s.chunks_exact_mut(p).enumerate() {
        for (i, v) in row.iter_mut().enumerate() {
            *v = if k <= i { q[i * n + k] } else { 0.0 };
        }
    }
    let (z, sdiag) = (&mut work.z[..p], &mut work.sdiag[..p]);
    let diag = &diag[..p];
    let rotations = &mut work.rotations[..p * (p + 1) / 2 + p];
    let mut count = 0;
    z.copy_from_slice(&qtb[..p]);
    for j in 0..p {
        let dj = sqrt_lambda * diag[j];
        if dj == 0.0 {
            continue;
        }
        sdiag[j..].fill(0.0);
        sdiag[j] = dj;
        // The extra row starts with right-hand side 0.
        let mut qtbpj = 0.0;
        rotations[count] = (NEW_ROW, 0.0, 0.0);
        count += 1;
        for k in j..p {
            let sk = sdiag[k];
            if sk == 0.0 {
                continue;
            }
            let row = &mut s[k * p..(k + 1) * p];
            let rkk = row[k];
            let (cos, sin) = givens(rkk, sk);
            rotations[count] = (k, cos, sin);
            count += 1;
            row[k] = cos * rkk + sin * sk;
            let zk = z[k];
            z[k] = cos * zk + sin * qtbpj;
            qtbpj = -sin * zk + cos * qtbpj;
            for (ski, di) in row[k + 1..].iter_mut().zip(&mut sdiag[k + 1..]) {
                let (a, b) = (*ski, *di);
                *ski = cos * a + sin * b;
                *di = -sin * a + cos * b;
            }
        }
    }
    work.count = count;
    work.reduced = true;
    back_substitute(p, &work.s[..p * p], &work.z[..p], &mut x[..p])
}

/// [`damped_solve`] again with the same R, D and λ and a new right-hand side `qtb`: the
/// rotations depend on R, D and λ only, so replaying the stored ones on `qtb` and solving with
/// the stored triangle gives, to the bit, what a fresh call would, for O(p²) instead of O(p³)
/// work (the geodesic acceleration solves with the step's R, D and λ). Falls back to nothing:
/// returns false if no solve has reduced the triangle yet.
pub(crate) fn damped_resolve(work: &mut DampedWork, qtb: &[f64], x: &mut [f64]) -> bool {
    if !work.reduced {
        return false;
    }
    with_constant_p!(work.z.len(), damped_resolve_p(work, qtb, x))
}

/// The body of [`damped_resolve`] for p = `work.z.len()`, given as `p` so that it can be a
/// constant.
#[inline(always)]
fn damped_resolve_p(p: usize, work: &mut DampedWork, qtb: &[f64], x: &mut [f64]) -> bool {
    let z = &mut work.z[..p];
    z.copy_from_slice(&qtb[..p]);
    let mut qtbpj = 0.0;
    for &(k, cos, sin) in &work.rotations[..work.count] {
        if k == NEW_ROW {
            qtbpj = 0.0;
            continue;
        }
        let zk = z[k];
        z[k] = cos * zk + sin * qtbpj;
        qtbpj = -sin * zk + cos * qtbpj;
    }
    back_substitute(p, &work.s[..p * p], &work.z[..p], &mut x[..p])
}

/// Solves S·x = z for the row-major upper triangle S (p × p), in the order of
/// `solve_upper`; false on a zero diagonal entry or a non-finite solution.
#[inline(always)]
fn back_substitute(p: usize, s: &[f64], z: &[f64], x: &mut [f64]) -> bool {
    let (s, z, x) = (&s[..p * p], &z[..p], &mut x[..p]);
    for i in (0..p).rev() {
        let row = &s[i * p..(i + 1) * p];
        let mut acc = z[i];
        for (r, xk) in row[i + 1..].iter().zip(&x[i + 1..]) {
            acc -= r * xk;
        }
        let d = row[i];
        if d == 0.0 {
            return false;
        }
        x[i] = acc / d;
    }
    x.iter().all(|v| v.is_finite())
}

/// Givens rotation (c, s) with c·a + s·b = r, −s·a + c·b = 0, computed without overflow.
fn givens(a: f64, b: f64) -> (f64, f64) {
    if b == 0.0 {
        (1.0, 0.0)
    } else if b.abs() > a.abs() {
        let t = a / b;
        let s = 1.0 / (1.0 + t * t).sqrt();
        (s * t, s)
    } else {
        let t = b / a;
        let c = 1.0 / (1.0 + t * t).sqrt();
        (c, c * t)
    }
}

/// Result of the rank test on a column-scaled matrix.
#[derive(Debug, Clone)]
pub(crate) enum RankCheck {
    /// Full column rank; the 2-norm condition number of the scaled matrix.
    Full { condition: f64 },
    /// Rank deficient: the (0-based) columns involved in the near-null space.
    Deficient { columns: Vec<usize>, condition: f64 },
}

/// Rank test on the column-scaled matrix A·D⁻¹ through the singular values of its R factor
/// (A = Q·R, so A and R share singular values and right singular vectors).
///
/// Tolerance (SPEC §13): σₖ ≤ max(n, p)·ε·σ_max counts as zero — the usual numerical-rank
/// threshold (Golub & Van Loan §5.5.8, from memory). The columns named as collinear are
/// those with a component of at least 0.1·max in a right singular vector of a zero σ
/// (0.1 is a common-practice reporting threshold, not from a source).
pub(crate) fn rank_check(r: &DMatrix<f64>, n: usize) -> RankCheck {
    let p = r.ncols();
    let mut upper = DMatrix::zeros(p, p);
    for j in 0..p {
        for i in 0..=j {
            upper[(i, j)] = r[(i, j)];
        }
    }
    let max_iter = 1000 * p.max(1);
    let Some(svd) = nalgebra::SVD::try_new_unordered(upper, false, true, f64::EPSILON, max_iter)
    else {
        // The SVD did not converge: report every column rather than guessing.
        return RankCheck::Deficient {
            columns: (0..p).collect(),
            condition: f64::INFINITY,
        };
    };
    let sv = &svd.singular_values;
    let smax = sv.iter().fold(0.0_f64, |m, v| m.max(*v));
    let smin = sv.iter().fold(f64::INFINITY, |m, v| m.min(*v));
    let condition = if smin > 0.0 {
        smax / smin
    } else {
        f64::INFINITY
    };
    let tol = (n.max(p) as f64) * f64::EPSILON * smax;
    let mut columns = Vec::new();
    if let Some(v_t) = svd.v_t.as_ref() {
        for (k, &s) in sv.iter().enumerate() {
            if s <= tol || smax == 0.0 {
                let row = v_t.row(k);
                let big = row.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
                for (j, v) in row.iter().enumerate() {
                    if v.abs() >= 0.1 * big && !columns.contains(&j) {
                        columns.push(j);
                    }
                }
            }
        }
    }
    if columns.is_empty() {
        RankCheck::Full { condition }
    } else {
        columns.sort_unstable();
        RankCheck::Deficient { columns, condition }
    }
}

/// (RᵀR)⁻¹ = R⁻¹·R⁻ᵀ from the upper triangle of the first p rows of `r`, computed by
/// inverting the triangle (never by inverting RᵀR). None when a diagonal entry is zero.
pub(crate) fn inverse_gram_from_r(r: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let p = r.ncols();
    // Rinv is upper triangular; column k solves R·x = e_k.
    let mut rinv = DMatrix::zeros(p, p);
    for k in 0..p {
        for i in (0..=k).rev() {
            let mut s = if i == k { 1.0 } else { 0.0 };
            for m in i + 1..=k {
                s -= r[(i, m)] * rinv[(m, k)];
            }
            let d = r[(i, i)];
            if d == 0.0 {
                return None;
            }
            rinv[(i, k)] = s / d;
        }
    }
    let mut out = DMatrix::zeros(p, p);
    for i in 0..p {
        for j in i..p {
            // (R⁻¹R⁻ᵀ)ᵢⱼ = Σₘ Rinv[i,m]·Rinv[j,m], m ≥ max(i, j) = j.
            let mut s = 0.0;
            for m in j..p {
                s += rinv[(i, m)] * rinv[(j, m)];
            }
            out[(i, j)] = s;
            out[(j, i)] = s;
        }
    }
    Some(out)
}

/// A column-scaled Householder QR of an `n × p` matrix with the rank test done:
/// A·D⁻¹ = Q·R with D = diag(‖aⱼ‖).
#[derive(Debug, Clone)]
pub(crate) struct ScaledQr {
    /// Factored A·D⁻¹ (layout of [`householder_qr_in_place`]).
    pub qr: DMatrix<f64>,
    pub tau: Vec<f64>,
    /// Column norms D.
    pub scale: Vec<f64>,
    /// 2-norm condition number of A·D⁻¹.
    pub condition: f64,
}

/// Why a scaled QR could not be used.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum ScaledQrError {
    /// Column j is zero (on every row with non-zero weight).
    ZeroColumn(usize),
    /// The listed columns are linearly dependent within the rank tolerance.
    Deficient { columns: Vec<usize>, condition: f64 },
}

/// Scale the columns of `a` to unit norm, factor by Householder QR and test the rank.
pub(crate) fn scaled_qr(mut a: DMatrix<f64>) -> Result<ScaledQr, ScaledQrError> {
    let (n, p) = a.shape();
    let scale = unit_columns(&mut a)?;
    let mut tau = vec![0.0; p];
    householder_qr_in_place(&mut a, &mut tau);
    let condition = full_rank(&a, n)?;
    Ok(ScaledQr {
        qr: a,
        tau,
        scale,
        condition,
    })
}

/// Divides each column of `m` by its 2-norm and returns the norms; a zero column is an error.
fn unit_columns(m: &mut DMatrix<f64>) -> Result<Vec<f64>, ScaledQrError> {
    let mut scale = vec![0.0; m.ncols()];
    for (j, d) in scale.iter_mut().enumerate() {
        *d = norm2(m.column(j).as_slice());
        if *d == 0.0 {
            return Err(ScaledQrError::ZeroColumn(j));
        }
        for v in m.column_mut(j).iter_mut() {
            *v /= *d;
        }
    }
    Ok(scale)
}

/// The condition number of the scaled triangle `r` of an n-row matrix, or the dependent
/// columns ([`rank_check`]).
fn full_rank(r: &DMatrix<f64>, n: usize) -> Result<f64, ScaledQrError> {
    match rank_check(r, n) {
        RankCheck::Full { condition } => Ok(condition),
        RankCheck::Deficient { columns, condition } => {
            Err(ScaledQrError::Deficient { columns, condition })
        }
    }
}

impl ScaledQr {
    /// Unscaled (AᵀA)⁻¹ = D⁻¹·R⁻¹·R⁻ᵀ·D⁻¹.
    pub(crate) fn inverse_gram(&self) -> Option<DMatrix<f64>> {
        let mut g = inverse_gram_from_r(&self.qr)?;
        unscale(&mut g, &self.scale);
        Some(g)
    }

    /// Least-squares solution of A·x ≈ b (b has n entries; used as scratch space).
    pub(crate) fn solve(&self, b: &mut [f64], x: &mut [f64]) -> bool {
        apply_qt(&self.qr, &self.tau, b);
        let p = self.qr.ncols();
        if !solve_upper(&self.qr, &b[..p], &mut x[..p]) {
            return false;
        }
        for (xj, d) in x.iter_mut().zip(&self.scale) {
            *xj /= d;
        }
        true
    }
}

/// The column-scaled triangle of a QR computed elsewhere (the blocked [`streaming_qr`] of a
/// large matrix), with the rank test done: A = Q·R and D = diag(‖aⱼ‖) give A·D⁻¹ = Q·(R·D⁻¹),
/// so R·D⁻¹ is the R factor of the scaled matrix, and ‖aⱼ‖ = ‖R·eⱼ‖ (Q has orthonormal
/// columns). No reflectors: only what the covariance needs.
#[derive(Debug, Clone)]
pub(crate) struct ScaledR {
    /// R·D⁻¹, p × p upper triangular.
    pub r: DMatrix<f64>,
    /// Column norms D.
    pub scale: Vec<f64>,
    /// 2-norm condition number of A·D⁻¹.
    pub condition: f64,
}

/// Scale the columns of the p × p upper-triangular `r` (of an n-row matrix A) to unit norm and
/// test the rank as [`scaled_qr`] does, with the same errors.
pub(crate) fn scaled_triangle(mut r: DMatrix<f64>, n: usize) -> Result<ScaledR, ScaledQrError> {
    let scale = unit_columns(&mut r)?;
    let condition = full_rank(&r, n)?;
    Ok(ScaledR {
        r,
        scale,
        condition,
    })
}

impl ScaledR {
    /// Unscaled (AᵀA)⁻¹ = D⁻¹·(R·D⁻¹)⁻¹·(R·D⁻¹)⁻ᵀ·D⁻¹, as [`ScaledQr::inverse_gram`].
    pub(crate) fn inverse_gram(&self) -> Option<DMatrix<f64>> {
        let mut g = inverse_gram_from_r(&self.r)?;
        unscale(&mut g, &self.scale);
        Some(g)
    }
}

/// gᵢⱼ ← gᵢⱼ/(dᵢ·dⱼ).
fn unscale(g: &mut DMatrix<f64>, d: &[f64]) {
    let p = g.ncols();
    for j in 0..p {
        for i in 0..p {
            g[(i, j)] /= d[i] * d[j];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A fixed linear congruential sequence (Knuth's MMIX constants): each call gives a value
    /// uniform in [0, 1) and the raw state it came from.
    fn lcg(seed: u64) -> impl FnMut() -> (f64, u64) {
        let mut state = seed;
        move || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ((state >> 11) as f64 / (1u64 << 53) as f64, state)
        }
    }

    #[test]
    fn streaming_qr_sums_are_the_column_sums_over_all_blocks() {
        // Over three blocks of fit::rows, the column sums that come with the streaming QR are
        // those of weighted_column_sums over all the rows, up to the order of the additions
        // (relative 1e-13; common practice for sums of 16,000 terms of one sign or of mixed
        // signs with a dominant total). Values from the fixed sequence above.
        let mut uniform = lcg(11);
        let mut next = || uniform().0 - 0.25;
        let (n, p) = (2 * super::super::rows::BLOCK + 3, 3);
        let jac: Vec<f64> = (0..n * p).map(|_| next()).collect();
        let sw: Vec<f64> = (0..n).map(|_| next() + 1.0).collect();
        let b: Vec<f64> = (0..n).map(|_| next()).collect();
        for unit in [false, true] {
            let ones = vec![1.0; n];
            let s = if unit { &ones } else { &sw };
            let mut sums = vec![(0.0, 0.0); p];
            let (mut r, mut z) = (DMatrix::zeros(p, p), vec![0.0; p]);
            streaming_qr(
                &jac,
                s,
                unit,
                &[false; 3],
                Some(&b),
                Some(&mut sums),
                &mut r,
                &mut z,
            );
            for j in 0..p {
                let c = &jac[j * n..(j + 1) * n];
                let (g, norm) = weighted_column_sums(c, (!unit).then_some(&sw[..]), &b);
                let close = |a: f64, b: f64| (a - b).abs() <= 1e-13 * b.abs();
                assert!(
                    close(sums[j].0, g),
                    "unit {unit} column {j}: {} vs {g}",
                    sums[j].0
                );
                assert!(
                    close(column_norm(sums[j].1, c, (!unit).then_some(&sw[..])), norm),
                    "column {j}"
                );
                // ‖R e_j‖ = ‖A e_j‖ (Q orthogonal).
                let rn = (0..p).map(|i| r[(i, j)] * r[(i, j)]).sum::<f64>().sqrt();
                assert!(
                    (rn - norm).abs() <= 1e-12 * norm,
                    "column {j}: ‖R e_j‖ {rn} vs {norm}"
                );
            }
        }
    }

    #[test]
    fn streaming_qr_gives_householders_r_and_qtb_up_to_row_signs() {
        // Matrices of 1 to 4 columns over 1, 255, 256, 257, 1,000 and 2·8,192 + 3 rows (edges
        // of the 256-row pieces, and three parallel blocks of fit::rows), values from a fixed linear congruential sequence (Knuth's MMIX constants), one
        // column zeroed; compared with householder_qr_in_place + apply_qt on the same
        // weighted matrix.
        let mut uniform = lcg(7);
        let mut next = || uniform().0 - 0.5;
        for p in 1..=4 {
            for n in [p, 255, 256, 257, 1000, 2 * super::super::rows::BLOCK + 3] {
                if n < p {
                    continue;
                }
                let jac: Vec<f64> = (0..n * p).map(|_| next()).collect();
                let sw: Vec<f64> = (0..n).map(|_| next() + 1.0).collect();
                let b: Vec<f64> = (0..n).map(|_| next()).collect();
                let mut zero = vec![false; p];
                if p == 3 {
                    zero[1] = true;
                }
                let mut a =
                    DMatrix::from_fn(
                        n,
                        p,
                        |i, j| {
                            if zero[j] { 0.0 } else { jac[j * n + i] * sw[i] }
                        },
                    );
                let mut tau = vec![0.0; p];
                householder_qr_in_place(&mut a, &mut tau);
                let mut qtb = b.clone();
                apply_qt(&a, &tau, &mut qtb);
                let mut r = DMatrix::zeros(p, p);
                let mut z = vec![0.0; p];
                streaming_qr(&jac, &sw, false, &zero, Some(&b), None, &mut r, &mut z);
                // R_s and R_h both satisfy RᵀR = AᵀA and Rᵀz = Aᵀb (R itself is unique only
                // up to row signs, and not at all where a column is zero), which is all the
                // damped solve and the predicted reduction use.
                let scale = a.iter().fold(0.0_f64, |m, v| m.max(v.abs())).max(1.0);
                let tol = 1e-12 * scale * scale * n as f64;
                let rh = DMatrix::from_fn(p, p, |i, j| if i <= j { a[(i, j)] } else { 0.0 });
                let (gh, gs) = (rh.transpose() * &rh, r.transpose() * &r);
                let zh = nalgebra::DVector::from_column_slice(&qtb[..p]);
                let zs = nalgebra::DVector::from_column_slice(&z);
                let (ch, cs) = (rh.transpose() * zh, r.transpose() * zs);
                for i in 0..p {
                    assert!((ch[i] - cs[i]).abs() <= tol, "p {p} n {n} Rᵀz[{i}]");
                    for j in 0..p {
                        assert!(
                            (gh[(i, j)] - gs[(i, j)]).abs() <= tol,
                            "p {p} n {n} RᵀR[{i},{j}]: {} vs {}",
                            gs[(i, j)],
                            gh[(i, j)]
                        );
                        if i > j {
                            assert_eq!(r[(i, j)], 0.0, "R is upper triangular");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn weighted_column_gives_dot_and_norm2_to_the_last_bit() {
        // Every length from 0 to 41 (all tail sizes), values spread over many magnitudes by a
        // fixed linear congruential sequence (Knuth's MMIX constants), and a tiny column that
        // takes norm2's scaled branch.
        let mut uniform = lcg(20_261_201);
        let mut next = || {
            let (u, bits) = uniform();
            (u - 0.5) * 10f64.powi(((bits >> 7) % 9) as i32 - 4)
        };
        for n in 0..42 {
            for tiny in [false, true] {
                let scale = if tiny { 1e-150 } else { 1.0 };
                let c: Vec<f64> = (0..n).map(|_| next() * scale).collect();
                let s: Vec<f64> = (0..n).map(|_| next().abs() + 0.1).collect();
                let e: Vec<f64> = (0..n).map(|_| next()).collect();
                let mut q = vec![0.0; n];
                let (g, norm) = weighted_column(&c, Some(&s), &e, &mut q);
                let q_ref: Vec<f64> = c.iter().zip(&s).map(|(c, s)| c * s).collect();
                assert_eq!(q, q_ref);
                assert_eq!(g.to_bits(), dot(&q_ref, &e).to_bits(), "n = {n}");
                assert_eq!(norm.to_bits(), norm2(&q_ref).to_bits(), "n = {n}");
                let sums = weighted_column_sums(&c, Some(&s), &e);
                assert_eq!(
                    (sums.0.to_bits(), sums.1.to_bits()),
                    (g.to_bits(), norm.to_bits())
                );
                // Unit weights: q is the column itself.
                let (g, norm) = weighted_column(&c, None, &e, &mut q);
                assert_eq!(q, c);
                assert_eq!(g.to_bits(), dot(&c, &e).to_bits(), "n = {n}");
                assert_eq!(norm.to_bits(), norm2(&c).to_bits(), "n = {n}");
                let sums = weighted_column_sums(&c, None, &e);
                assert_eq!(
                    (sums.0.to_bits(), sums.1.to_bits()),
                    (g.to_bits(), norm.to_bits())
                );
            }
        }
    }

    #[test]
    fn vector_kernels_give_the_same_bits_with_and_without_avx2() {
        use crate::vector::{run_avx2, run_baseline};
        // Dot products of every length 0..80 and Householder QRs of 40 × 3 to 80 × 3
        // matrices (values from the fixed linear congruential sequence), computed by the
        // baseline build and, where the processor has AVX2, by the AVX2 build.
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            let mut uniform = lcg(99);
            let mut next = || uniform().0 - 0.5;
            for n in 0..80 {
                let a: Vec<f64> = (0..n).map(|_| next()).collect();
                let b: Vec<f64> = (0..n).map(|_| next()).collect();
                let base = run_baseline(|| dot_kernel(&a, &b));
                // SAFETY: AVX2 is present (checked above).
                let wide = unsafe { run_avx2(|| dot_kernel(&a, &b)) };
                assert_eq!(base.to_bits(), wide.to_bits(), "dot, n = {n}");
            }
            for n in 40..80 {
                let a = DMatrix::from_fn(n, 6, |_, _| next());
                let b0: Vec<f64> = (0..n).map(|_| next()).collect();
                let (mut qa, mut qb) = (a.clone(), a);
                let (mut ta, mut tb) = (vec![0.0; 6], vec![0.0; 6]);
                let (mut ba, mut bb) = (b0.clone(), b0);
                run_baseline(|| householder_qr_kernel(&mut qa, &mut ta, Some(&mut ba)));
                // SAFETY: AVX2 is present (checked above).
                unsafe { run_avx2(|| householder_qr_kernel(&mut qb, &mut tb, Some(&mut bb))) };
                let bits = |m: &[f64]| m.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(qa.as_slice()), bits(qb.as_slice()), "QR, n = {n}");
                assert_eq!(ta, tb, "tau, n = {n}");
                assert_eq!(bits(&ba), bits(&bb), "Qᵀb, n = {n}");
            }
            return;
        }
        println!("no AVX2 on this processor: only the baseline build runs here");
    }

    /// The QR one reflection and one column at a time with [`reflect`] (the kernel before
    /// the reflections were applied four columns at once), the reference of the test below.
    fn qr_column_by_column(a: &mut DMatrix<f64>, tau: &mut [f64]) {
        let (n, p) = a.shape();
        for j in 0..p {
            let alpha = a[(j, j)];
            let tail_norm = norm2(&a.column(j).as_slice()[j + 1..]);
            if tail_norm == 0.0 {
                tau[j] = 0.0;
                continue;
            }
            let beta = -alpha.signum() * alpha.hypot(tail_norm);
            let t = (beta - alpha) / beta;
            let inv = 1.0 / (alpha - beta);
            for v in &mut a.column_mut(j).as_mut_slice()[j + 1..] {
                *v *= inv;
            }
            a[(j, j)] = beta;
            tau[j] = t;
            for k in j + 1..p {
                let (left, right) = a.as_mut_slice().split_at_mut(k * n);
                reflect(t, &left[j * n + j + 1..(j + 1) * n], &mut right[j..n]);
            }
        }
    }

    #[test]
    fn qr_with_qtb_gives_the_bits_of_the_qr_then_apply_qt() {
        // Invented pseudo-random matrices: 1 to 9 columns (groups of four reflections and the
        // remainders, b among them), rows around the vector and block lengths.
        let mut uniform = lcg(7);
        let mut next = || uniform().0 - 0.5;
        for p in 1..10 {
            for n in [p, p + 1, p + 3, 31, 32, 33, 61, 250] {
                if n < p {
                    continue;
                }
                let a = DMatrix::from_fn(n, p, |_, _| next());
                let b: Vec<f64> = (0..n).map(|_| next()).collect();
                let (mut q1, mut t1, mut b1) = (a.clone(), vec![0.0; p], b.clone());
                qr_column_by_column(&mut q1, &mut t1);
                apply_qt(&q1, &t1, &mut b1);
                let (mut q0, mut t0) = (a.clone(), vec![0.0; p]);
                householder_qr_in_place(&mut q0, &mut t0);
                assert_eq!(q0, q1, "QR alone, n = {n}, p = {p}");
                let (mut q2, mut t2, mut b2) = (a, vec![0.0; p], b);
                householder_qr_with_qtb(&mut q2, &mut t2, &mut b2);
                let bits = |m: &[f64]| m.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
                assert_eq!(
                    bits(q1.as_slice()),
                    bits(q2.as_slice()),
                    "R, n = {n}, p = {p}"
                );
                assert_eq!(bits(&t1), bits(&t2), "tau, n = {n}, p = {p}");
                assert_eq!(bits(&b1), bits(&b2), "Qᵀb, n = {n}, p = {p}");
            }
        }
    }

    fn example() -> DMatrix<f64> {
        // An arbitrary well-conditioned 5×3 matrix (invented).
        DMatrix::from_row_slice(
            5,
            3,
            &[
                1.0, 2.0, 0.5, 1.0, -1.0, 2.0, 1.0, 0.3, -1.5, 1.0, 4.0, 0.0, 1.0, -2.0, 1.0,
            ],
        )
    }

    #[test]
    fn householder_qr_reproduces_the_matrix() {
        let a = example();
        let mut qr = a.clone();
        let mut tau = vec![0.0; 3];
        householder_qr_in_place(&mut qr, &mut tau);
        // Rebuild each column a_k = Q·r_k by applying H₀…H_{p−1} in reverse to r_k.
        for k in 0..3 {
            let mut v: Vec<f64> = (0..5)
                .map(|i| if i <= k { qr[(i, k)] } else { 0.0 })
                .collect();
            for j in (0..3).rev() {
                let mut s = v[j];
                for i in j + 1..5 {
                    s += qr[(i, j)] * v[i];
                }
                s *= tau[j];
                v[j] -= s;
                for i in j + 1..5 {
                    v[i] -= s * qr[(i, j)];
                }
            }
            for i in 0..5 {
                assert!((v[i] - a[(i, k)]).abs() < 1e-14, "({i},{k})");
            }
        }
    }

    #[test]
    fn a_second_right_hand_side_gives_the_bits_of_a_fresh_solve() {
        // Triangles of 1 to 7 parameters (values from the fixed linear congruential sequence),
        // damping with some zero entries of D, two right-hand sides each.
        let mut uniform = lcg(7);
        let mut next = || uniform().0 - 0.5;
        let mut work_once = DampedWork::new(1);
        assert!(!damped_resolve(&mut work_once, &[1.0], &mut [0.0]));
        for p in 1..=7 {
            let a = DMatrix::from_fn(p + 5, p, |_, _| next());
            let mut qr = a.clone();
            let mut tau = vec![0.0; p];
            householder_qr_in_place(&mut qr, &mut tau);
            let diag: Vec<f64> = (0..p)
                .map(|j| if j % 3 == 1 { 0.0 } else { 1.0 + next() })
                .collect();
            for lambda in [0.0, 1e-6, 0.3, 40.0] {
                let (b1, b2): (Vec<f64>, Vec<f64>) = (0..p).map(|_| (next(), next())).unzip();
                let mut work = DampedWork::new(p);
                let (mut x1, mut x2, mut fresh) = (vec![0.0; p], vec![0.0; p], vec![0.0; p]);
                let ok1 = damped_solve(&qr, &diag, lambda, &b1, &mut work, &mut x1);
                let ok2 = damped_resolve(&mut work, &b2, &mut x2);
                let mut other = DampedWork::new(p);
                let ok_fresh = damped_solve(&qr, &diag, lambda, &b2, &mut other, &mut fresh);
                assert!(ok1, "p = {p}, λ = {lambda}");
                assert_eq!(ok2, ok_fresh, "p = {p}, λ = {lambda}");
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&x2), bits(&fresh), "p = {p}, λ = {lambda}");
            }
        }
    }

    #[test]
    fn damped_solve_matches_the_augmented_least_squares_solution() {
        let a = example();
        let b = [1.0, 2.0, -1.0, 0.5, 3.0];
        let diag = [2.0, 0.5, 1.5];
        let lambda = 0.7;
        let mut qr = a.clone();
        let mut tau = vec![0.0; 3];
        householder_qr_in_place(&mut qr, &mut tau);
        let mut qtb = b.to_vec();
        apply_qt(&qr, &tau, &mut qtb);
        let mut work = DampedWork::new(3);
        let mut x = [0.0; 3];
        assert!(damped_solve(&qr, &diag, lambda, &qtb, &mut work, &mut x));
        // Independent check: the augmented 8×3 system solved by nalgebra's SVD.
        let mut aug = DMatrix::zeros(8, 3);
        let mut rhs = nalgebra::DVector::zeros(8);
        for i in 0..5 {
            for j in 0..3 {
                aug[(i, j)] = a[(i, j)];
            }
            rhs[i] = b[i];
        }
        for j in 0..3 {
            aug[(5 + j, j)] = lambda.sqrt() * diag[j];
        }
        let svd = aug.svd(true, true);
        let want = svd.solve(&rhs, 1e-14).expect("full-rank test matrix");
        for j in 0..3 {
            assert!(
                (x[j] - want[j]).abs() < 1e-13,
                "x[{j}] = {} vs {}",
                x[j],
                want[j]
            );
        }
    }

    #[test]
    fn rank_check_names_the_dependent_columns() {
        // Column 2 = column 0 + column 1, column 3 independent.
        let a = DMatrix::from_row_slice(
            4,
            4,
            &[
                1.0, 0.0, 1.0, 3.0, 0.0, 1.0, 1.0, -1.0, 1.0, 1.0, 2.0, 0.0, 2.0, -1.0, 1.0, 5.0,
            ],
        );
        match scaled_qr(a) {
            Err(ScaledQrError::Deficient { columns, .. }) => assert_eq!(columns, vec![0, 1, 2]),
            other => panic!("expected rank deficiency, got {other:?}"),
        }
    }

    #[test]
    fn inverse_gram_equals_the_inverse_of_ata() {
        let a = example();
        let sq = scaled_qr(a.clone()).expect("full rank");
        let g = sq.inverse_gram().expect("non-singular");
        let ata = a.transpose() * &a;
        let prod = &ata * &g;
        for i in 0..3 {
            for j in 0..3 {
                let want = if i == j { 1.0 } else { 0.0 };
                assert!((prod[(i, j)] - want).abs() < 1e-13);
            }
        }
    }
}

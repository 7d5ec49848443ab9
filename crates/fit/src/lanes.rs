//! Sums over the points of a pass in four independent running sums ("lanes"), written out so
//! that the compiler turns them into vector additions without reordering anything: each lane
//! adds its terms in order, so a result does not depend on the processor the code is built for.

/// `acc[l] += f(a[j], b[j])` for the rows j ≡ l (mod 4), in order (the rows past the last whole
/// four go to lanes 0, 1, 2).
#[inline]
pub(crate) fn lane_sums(acc: &mut [f64; 4], a: &[f64], b: &[f64], f: impl Fn(f64, f64) -> f64) {
    let (qa, ra) = a.as_chunks::<4>();
    let (qb, rb) = b.as_chunks::<4>();
    for (qa, qb) in qa.iter().zip(qb) {
        for l in 0..4 {
            acc[l] += f(qa[l], qb[l]);
        }
    }
    for (l, (&x, &y)) in ra.iter().zip(rb).enumerate() {
        acc[l] += f(x, y);
    }
}

/// The lanes added pairwise, `(a₀ + a₁) + (a₂ + a₃)`.
#[inline]
pub(crate) fn lane_total(acc: [f64; 4]) -> f64 {
    (acc[0] + acc[1]) + (acc[2] + acc[3])
}

//! The lane arithmetic of the long-log passes ([`super::large`]): blocks of samples
//! stored per parameter, two samples to an SSE2 register ([`L2`]), and the sums of
//! the upper triangle of Σ xᵢ yᵢᵀ over a block in register tiles.
//!
//! Everything here is safe, portable Rust written so that LLVM maps each two-lane
//! operation on one packed instruction of the baseline x86-64 target (SSE2): each
//! lane's result is exactly that of the scalar operation; only the order in which
//! the per-sample products are added differs from a sample-by-sample sum.

// Index loops mirror the maths.
#![allow(clippy::needless_range_loop)]

/// Two lanes of f64, operated on lane by lane: written this way LLVM emits one
/// SSE2 instruction per operation (mulpd, divpd, sqrtpd, cmppd, …), each lane's
/// result exactly that of the scalar operation.
#[derive(Clone, Copy)]
pub(super) struct L2(pub(super) [f64; LANES]);

impl L2 {
    #[inline(always)]
    pub(super) fn splat(x: f64) -> L2 {
        L2([x, x])
    }
    #[inline(always)]
    pub(super) fn sqrt(self) -> L2 {
        L2([self.0[0].sqrt(), self.0[1].sqrt()])
    }
    #[inline(always)]
    pub(super) fn abs(self) -> L2 {
        L2([self.0[0].abs(), self.0[1].abs()])
    }
    #[inline(always)]
    pub(super) fn gt(self, o: L2) -> Mask2 {
        Mask2([
            if self.0[0] > o.0[0] { !0 } else { 0 },
            if self.0[1] > o.0[1] { !0 } else { 0 },
        ])
    }
    #[inline(always)]
    pub(super) fn lt(self, o: L2) -> Mask2 {
        o.gt(self)
    }
    /// `a` where the mask is set, else `b`, by bit masks (no branch, and a NaN in
    /// the lane not taken does not leak).
    #[inline(always)]
    pub(super) fn select(m: Mask2, a: L2, b: L2) -> L2 {
        let pick =
            |l: usize| f64::from_bits((a.0[l].to_bits() & m.0[l]) | (b.0[l].to_bits() & !m.0[l]));
        L2([pick(0), pick(1)])
    }
}

/// A lane mask of [`L2`]: all bits set (true) or none.
#[derive(Clone, Copy)]
pub(super) struct Mask2(pub(super) [u64; LANES]);

impl Mask2 {
    #[inline(always)]
    pub(super) fn and(self, o: Mask2) -> Mask2 {
        Mask2([self.0[0] & o.0[0], self.0[1] & o.0[1]])
    }
}

macro_rules! l2_op {
    ($tr:ident, $f:ident, $op:tt) => {
        impl std::ops::$tr for L2 {
            type Output = L2;
            #[inline(always)]
            fn $f(self, o: L2) -> L2 {
                L2([self.0[0] $op o.0[0], self.0[1] $op o.0[1]])
            }
        }
    };
}
l2_op!(Add, add, +);
l2_op!(Sub, sub, -);
l2_op!(Mul, mul, *);
l2_op!(Div, div, /);

/// Samples per block of a pass (the per-parameter arrays of a block take
/// 12 × `BLOCK` × 8 bytes each).
pub(super) const BLOCK: usize = 32;
/// Partial sums per accumulator: two, the width of an SSE2 register.
pub(super) const LANES: usize = 2;
/// Lane groups per block.
pub(super) const GROUPS: usize = BLOCK / LANES;
/// Rows and columns of a register tile of a triangle.
pub(super) const TILE: usize = 3;

/// One block's values of one quantity per parameter, sample k at `[k / LANES][k % LANES]`.
pub(super) type Rows<const NP: usize> = [[[f64; LANES]; GROUPS]; NP];
/// Lane-wise partial sums of an upper triangle.
pub(super) type LaneTriangle<const NP: usize> = [[[f64; LANES]; NP]; NP];

/// Adds Σₖ x[a][k] y[b][k] to `out[a][b]` for a ≤ b (the upper triangle), over one
/// block, lane by lane. NP is 9 or 12, a multiple of [`TILE`]; the tiles are spelled
/// out so that every index is a constant.
#[inline(always)]
pub(super) fn triangle_block<const NP: usize>(
    x: &Rows<NP>,
    y: &Rows<NP>,
    out: &mut LaneTriangle<NP>,
) {
    tile::<NP, 0, 0>(x, y, out);
    tile::<NP, 0, 3>(x, y, out);
    tile::<NP, 0, 6>(x, y, out);
    tile::<NP, 3, 3>(x, y, out);
    tile::<NP, 3, 6>(x, y, out);
    tile::<NP, 6, 6>(x, y, out);
    if NP == 12 {
        tile::<NP, 0, 9>(x, y, out);
        tile::<NP, 3, 9>(x, y, out);
        tile::<NP, 6, 9>(x, y, out);
        tile::<NP, 9, 9>(x, y, out);
    }
}

/// The [`TILE`] × [`TILE`] tile of [`triangle_block`] at rows `A0..`, columns `B0..`:
/// its partial sums stay in registers over the block, and each loaded lane pair of x
/// and of y feeds up to [`TILE`] products. Not inlined: compiled on its own, LLVM
/// pairs the two lanes of each partial sum into one register (measured: inlined into
/// the 9-parameter pass it paired partial sums of neighbouring columns instead, with
/// shuffles and spills, and the pass took twice as long).
#[inline(never)]
fn tile<const NP: usize, const A0: usize, const B0: usize>(
    x: &Rows<NP>,
    y: &Rows<NP>,
    out: &mut LaneTriangle<NP>,
) {
    let mut s = [[L2::splat(0.0); TILE]; TILE];
    for k in 0..GROUPS {
        let xs = [L2(x[A0][k]), L2(x[A0 + 1][k]), L2(x[A0 + 2][k])];
        let ys = [L2(y[B0][k]), L2(y[B0 + 1][k]), L2(y[B0 + 2][k])];
        for t in 0..TILE {
            for u in 0..TILE {
                if A0 + t <= B0 + u {
                    s[t][u] = s[t][u] + xs[t] * ys[u];
                }
            }
        }
    }
    for t in 0..TILE {
        for u in 0..TILE {
            if A0 + t <= B0 + u {
                out[A0 + t][B0 + u] = (L2(out[A0 + t][B0 + u]) + s[t][u]).0;
            }
        }
    }
}

/// Adds Σₖ x[a][k] wr[k] to `out[a]` over one block, lane by lane, three rows at a time.
#[inline(always)]
pub(super) fn gradient_block<const NP: usize>(
    x: &Rows<NP>,
    wr: &[[f64; LANES]; GROUPS],
    out: &mut [[f64; LANES]; NP],
) {
    gradient_tile::<NP, 0>(x, wr, out);
    gradient_tile::<NP, 3>(x, wr, out);
    gradient_tile::<NP, 6>(x, wr, out);
    if NP == 12 {
        gradient_tile::<NP, 9>(x, wr, out);
    }
}

/// Rows `A0 .. A0 + TILE` of [`gradient_block`] (not inlined, as [`tile`]).
#[inline(never)]
fn gradient_tile<const NP: usize, const A0: usize>(
    x: &Rows<NP>,
    wr: &[[f64; LANES]; GROUPS],
    out: &mut [[f64; LANES]; NP],
) {
    let mut s = [L2::splat(0.0); TILE];
    for k in 0..GROUPS {
        let w = L2(wr[k]);
        for t in 0..TILE {
            s[t] = s[t] + L2(x[A0 + t][k]) * w;
        }
    }
    for t in 0..TILE {
        out[A0 + t] = (L2(out[A0 + t]) + s[t]).0;
    }
}

//! Sums of the corrected field directions v̂ (unit vectors, sensor frame after the
//! soft-iron correction) of the kept samples, two SSE2 lanes at a time, for the
//! direction spread the last pass of a long-log fit reports.

use crate::fit::coverage::{cell_index, DirectionSums, ALL_CELLS};
use crate::fit::tumble::lanes::{Mask2, L2, LANES};

/// Sums of the corrected directions v̂ of the kept samples, lane by lane, and the
/// cells they hit (see [`crate::fit::coverage`]).
pub(super) struct SpreadLanes {
    /// Σ v̂ v̂ᵀ: xx yy zz xy xz yz.
    scatter: [L2; 6],
    /// Σ v̂.
    sum: [L2; 3],
    hit: u64,
    n: usize,
}

impl Default for SpreadLanes {
    fn default() -> Self {
        let zero = L2::splat(0.0);
        SpreadLanes {
            scatter: [zero; 6],
            sum: [zero; 3],
            hit: 0,
            n: 0,
        }
    }
}

impl SpreadLanes {
    /// Add the lanes of `vh` that `m` selects.
    #[inline(always)]
    pub(super) fn add(&mut self, m: Mask2, vh: [L2; 3]) {
        let zero = L2::splat(0.0);
        let [x, y, z] = vh.map(|c| L2::select(m, c, zero));
        let s = &mut self.scatter;
        s[0] = s[0] + x * x;
        s[1] = s[1] + y * y;
        s[2] = s[2] + z * z;
        s[3] = s[3] + x * y;
        s[4] = s[4] + x * z;
        s[5] = s[5] + y * z;
        self.sum[0] = self.sum[0] + x;
        self.sum[1] = self.sum[1] + y;
        self.sum[2] = self.sum[2] + z;
        for l in 0..LANES {
            if m.0[l] != 0 {
                self.n += 1;
                // Once every cell is hit, no later sample changes that.
                if self.hit != ALL_CELLS {
                    self.hit |= 1 << cell_index(x.0[l], y.0[l], z.0[l]);
                }
            }
        }
    }

    /// The lanes' sums added together.
    pub(super) fn sums(&self) -> DirectionSums {
        let lanes = |v: L2| v.0[0] + v.0[1];
        DirectionSums::from_parts(
            self.hit,
            self.scatter.map(lanes),
            self.sum.map(lanes),
            self.n,
        )
    }
}

//! How large the files of one solve may be, and how a map that would be
//! larger is reduced.
//!
//! A solve of a long device on a fine grid holds maps of cells × energies
//! numbers and a scattering self-energy of orbital sites × energies: at
//! 10 000 cells and 10 000 energies each map is 800 MB and the self-energy
//! 2.4 GB, more than anyone opens. By default a solve writes at most
//! [`ResultLimits::DEFAULT_BUDGET_BYTES`]:
//!
//! - each map file (bond_current.npy, bond_current.npz, occupation.npz) at
//!   most an eighth of the budget: a larger map is replaced by **block
//!   means** — blocks of k₀ consecutive positions × k₁ consecutive energies
//!   (the last block of an axis may be shorter), each written value the
//!   mean of its block and each coordinate the mean of the block's
//!   coordinates. A block's mean times its size is the block's sum, so
//!   sums and energy integrals (mean × block width in energy) are kept;
//! - the scattering self-energy (for warm starts) only when it fits in an
//!   eighth of the budget; otherwise it is left out and summary.json says
//!   so;
//! - every figure at most [`ResultLimits::FIGURE_BYTES`] (or a tenth of a
//!   smaller budget): a map's raster image has at most
//!   [`ResultLimits::map_pixels`] pixels, each the mean of the values it
//!   covers.
//!
//! With `full_arrays` every array is written whole.

use ndarray::Array2;

/// Limits on the files of one solve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ResultLimits {
    /// Bytes the arrays and figures of one solve may take together.
    pub budget_bytes: u64,
    /// Write every array whole (maps and self-energy), whatever the budget.
    pub full_arrays: bool,
}

impl Default for ResultLimits {
    fn default() -> Self {
        Self {
            budget_bytes: Self::DEFAULT_BUDGET_BYTES,
            full_arrays: false,
        }
    }
}

impl ResultLimits {
    /// Default budget of one solve: 50 MB.
    pub const DEFAULT_BUDGET_BYTES: u64 = 50_000_000;
    /// Largest figure: 5 MB.
    pub const FIGURE_BYTES: u64 = 5_000_000;
    /// Bytes of SVG besides a map's raster (axes, labels, overlays): an
    /// allowance, generous for the figures drawn here.
    const FIGURE_OVERHEAD_BYTES: u64 = 300_000;

    /// Largest array file: an eighth of the budget.
    pub fn array_bytes(&self) -> u64 {
        self.budget_bytes / 8
    }

    /// Largest figure: [`Self::FIGURE_BYTES`] or a tenth of the budget,
    /// whichever is smaller.
    pub fn figure_bytes(&self) -> u64 {
        Self::FIGURE_BYTES.min(self.budget_bytes / 10)
    }

    /// Most pixels of a map's raster image: an uncompressed PNG takes about
    /// 3 bytes a pixel and base64 makes that 4 in the SVG.
    pub fn map_pixels(&self) -> usize {
        let room = self
            .figure_bytes()
            .saturating_sub(Self::FIGURE_OVERHEAD_BYTES);
        usize::try_from(room / 4).unwrap_or(usize::MAX).max(400)
    }
}

/// A map reduced to block means, with the block sizes along each axis.
#[derive(Clone, Debug, PartialEq)]
pub struct BlockMeans {
    /// The block means (ceil(n₀/k₀) × ceil(n₁/k₁)).
    pub map: Array2<f64>,
    /// Block size along each axis (1 where the axis is kept whole).
    pub blocks: [usize; 2],
}

/// Block sizes (k₀, k₁) so that the reduced map of an n₀ × n₁ map holds at
/// most `max_values` numbers: both axes reduced by about the same factor,
/// the shorter one never below a single block. (1, 1) when it fits.
pub fn block_sizes(shape: [usize; 2], max_values: usize) -> [usize; 2] {
    let [n0, n1] = shape;
    let max_values = max_values.max(1);
    if n0 * n1 <= max_values {
        return [1, 1];
    }
    let ratio = (n0 * n1) as f64 / max_values as f64;
    let mut k0 = (ratio.sqrt().ceil() as usize).clamp(1, n0.max(1));
    let mut k1 = ((ratio / k0 as f64).ceil() as usize).clamp(1, n1.max(1));
    while n0.div_ceil(k0) * n1.div_ceil(k1) > max_values {
        if k1 < n1 {
            k1 += 1;
        } else if k0 < n0 {
            k0 += 1;
        } else {
            break;
        }
    }
    [k0, k1]
}

/// The means of the blocks of `blocks[0]` × `blocks[1]` values of `map`
/// (the last block of an axis may be shorter; its mean is over the values
/// it has). NaN values make their block's mean NaN.
pub fn block_means(map: &Array2<f64>, blocks: [usize; 2]) -> BlockMeans {
    if blocks.map(|k| k.max(1)) == [1, 1] {
        // The map itself, bit for bit (−0.0 stays −0.0).
        return BlockMeans {
            map: map.clone(),
            blocks: [1, 1],
        };
    }
    let (n0, n1) = map.dim();
    block_means_of([n0, n1], blocks, |i, j| map[(i, j)])
}

/// [`block_means`] of an n₀ × n₁ map given value by value, `value(i, j)`,
/// without storing it: the rows of blocks in parallel. Each block is
/// summed over its rows in order and over each row's values in order, the
/// order of a serial pass over the map in row-major order, so the means
/// are the same bits as [`block_means`] of the stored map gives.
pub fn block_means_of(
    shape: [usize; 2],
    blocks: [usize; 2],
    value: impl Fn(usize, usize) -> f64 + Sync,
) -> BlockMeans {
    use rayon::prelude::*;
    let [n0, n1] = shape;
    let [k0, k1] = [blocks[0].max(1), blocks[1].max(1)];
    let (m0, m1) = (n0.div_ceil(k0), n1.div_ceil(k1));
    let mut out = Array2::zeros((m0, m1));
    let Some(flat) = out.as_slice_mut().filter(|_| m1 > 0) else {
        return BlockMeans {
            map: out,
            blocks: [k0, k1],
        };
    };
    flat.par_chunks_mut(m1).enumerate().for_each(|(bi, row)| {
        let rows = bi * k0..(bi * k0 + k0).min(n0);
        // Block by block: a block's k₀ × k₁ values are read close together.
        for (bj, v) in row.iter_mut().enumerate() {
            let cols = bj * k1..(bj * k1 + k1).min(n1);
            for i in rows.clone() {
                for j in cols.clone() {
                    *v += value(i, j);
                }
            }
            *v /= (rows.len() * cols.len()) as f64;
        }
    });
    BlockMeans {
        map: out,
        blocks: [k0, k1],
    }
}

/// The means of consecutive blocks of `k` values (the last may be shorter).
pub fn axis_means(values: &[f64], k: usize) -> Vec<f64> {
    if k <= 1 {
        return values.to_vec();
    }
    values
        .chunks(k.max(1))
        .map(|c| c.iter().sum::<f64>() / c.len() as f64)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn block_means_of_values_give_the_bits_of_a_serial_pass() {
        // Magnitudes over many decades, so that another order of the sums
        // would show in the last bits.
        let map = Array2::from_shape_fn((103, 251), |(i, j)| {
            let x = ((i * 251 + j) as f64 * 0.754_877_666).fract();
            (x - 0.4) * 10f64.powi((j % 11) as i32 - 5)
        });
        for blocks in [[3, 4], [7, 1], [1, 9], [103, 251], [50, 200]] {
            // The serial pass block_means used to make: every value added
            // to its block in row-major order.
            let (m0, m1) = (103usize.div_ceil(blocks[0]), 251usize.div_ceil(blocks[1]));
            let mut want = Array2::<f64>::zeros((m0, m1));
            for ((i, j), v) in map.indexed_iter() {
                want[(i / blocks[0], j / blocks[1])] += v;
            }
            for ((bi, bj), v) in want.indexed_iter_mut() {
                let rows = blocks[0].min(103 - bi * blocks[0]);
                let cols = blocks[1].min(251 - bj * blocks[1]);
                *v /= (rows * cols) as f64;
            }
            for got in [
                block_means(&map, blocks).map,
                block_means_of([103, 251], blocks, |i, j| map[(i, j)]).map,
            ] {
                assert_eq!(got.dim(), want.dim());
                assert!(
                    got.iter()
                        .zip(&want)
                        .all(|(a, b)| a.to_bits() == b.to_bits())
                );
            }
        }
    }

    #[test]
    fn block_means_keep_the_sum_of_every_block() {
        let map = Array2::from_shape_fn((7, 10), |(i, j)| (i * 10 + j) as f64 * 0.37 - 3.0);
        let r = block_means(&map, [3, 4]);
        assert_eq!(r.map.dim(), (3, 3));
        // Σ mean × block size = Σ of the map.
        let mut total = 0.0;
        for ((bi, bj), v) in r.map.indexed_iter() {
            total += v * ((3.min(7 - 3 * bi)) * (4.min(10 - 4 * bj))) as f64;
        }
        let want: f64 = map.iter().sum();
        assert!((total - want).abs() < 1e-12 * want.abs().max(1.0));
        // A block held whole: the mean of its 12 values.
        let first: f64 = map.slice(ndarray::s![0..3, 0..4]).iter().sum::<f64>() / 12.0;
        assert!((r.map[(0, 0)] - first).abs() < 1e-13);
        // The last, shorter block: 1 × 2 values.
        let last = (map[(6, 8)] + map[(6, 9)]) / 2.0;
        assert!((r.map[(2, 2)] - last).abs() < 1e-13);
    }

    #[test]
    fn block_sizes_fit_the_limit_and_leave_small_maps_alone() {
        assert_eq!(block_sizes([10, 20], 200), [1, 1]);
        for (shape, max) in [
            ([9_999, 10_001], 781_250),
            ([3, 100_000], 1_000),
            ([100_000, 2], 500),
        ] {
            let [k0, k1] = block_sizes(shape, max);
            let kept = shape[0].div_ceil(k0) * shape[1].div_ceil(k1);
            assert!(kept <= max, "{shape:?} {max}: {k0}×{k1} keeps {kept}");
            // Not reduced much further than needed.
            assert!(
                kept * 4 > max,
                "{shape:?} {max}: {k0}×{k1} keeps only {kept}"
            );
        }
    }

    #[test]
    fn a_smaller_budget_allows_smaller_figures() {
        let big = ResultLimits::default();
        assert_eq!(big.figure_bytes(), ResultLimits::FIGURE_BYTES);
        assert!(4 * big.map_pixels() as u64 <= ResultLimits::FIGURE_BYTES);
        let small = ResultLimits {
            budget_bytes: 8_000_000,
            ..big
        };
        assert_eq!(small.figure_bytes(), 800_000);
        assert_eq!(small.array_bytes(), 1_000_000);
        assert!(small.map_pixels() < big.map_pixels());
    }
}

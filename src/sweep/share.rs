//! A sweep split over several processes: each runs whole lines of the
//! grid (a line's points warm-start one another, so a line is never cut),
//! and the rows of all of them make the table.

use super::{Grid, PointTask, SweepError, SweepTable};
use crate::cluster::bytes::{Reader, put_f64, put_u64};

/// Which lines of a grid one process computes: line `l` when
/// `l % size == rank`, so lines of every part of the grid go to every
/// process and uneven line costs even out.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Share {
    rank: usize,
    size: usize,
}

impl Share {
    /// All lines: a sweep in one process.
    pub const WHOLE: Share = Share { rank: 0, size: 1 };

    /// The share of process `rank` of `size`; `None` unless
    /// `rank < size`.
    pub fn new(rank: usize, size: usize) -> Option<Self> {
        (rank < size).then_some(Self { rank, size })
    }

    /// This share's lines among `lines`, ascending.
    pub fn lines(&self, lines: usize) -> Vec<usize> {
        (self.rank..lines).step_by(self.size).collect()
    }

    /// This share's points of `grid`, ascending.
    pub fn points<'g>(&self, grid: &'g Grid) -> impl Iterator<Item = usize> + 'g {
        let len = grid.line_length();
        self.lines(grid.lines())
            .into_iter()
            .flat_map(move |l| l * len..(l + 1) * len)
    }
}

/// What one share of a sweep finished: its points' rows (index, row) and
/// how they were obtained.
#[derive(Clone, Debug, PartialEq)]
pub struct SharePart {
    /// The rows of the share's points, by grid index.
    pub rows: Vec<(usize, Vec<f64>)>,
    /// Points computed in this run (the rest came from the store).
    pub computed: usize,
    /// Lines run at once.
    pub parallel_lines: usize,
}

impl SharePart {
    /// The part as bytes, every number with its exact bits.
    pub fn to_bytes(&self) -> Vec<u8> {
        let mut b = Vec::new();
        put_u64(&mut b, self.computed as u64);
        put_u64(&mut b, self.parallel_lines as u64);
        put_u64(&mut b, self.rows.len() as u64);
        for (index, row) in &self.rows {
            put_u64(&mut b, *index as u64);
            put_u64(&mut b, row.len() as u64);
            row.iter().for_each(|&x| put_f64(&mut b, x));
        }
        b
    }

    /// The part [`SharePart::to_bytes`] wrote; `None` for other bytes.
    pub fn from_bytes(bytes: &[u8]) -> Option<Self> {
        let mut r = Reader::new(bytes);
        let computed = r.u64()? as usize;
        let parallel_lines = r.u64()? as usize;
        let count = r.u64()?;
        let mut rows = Vec::new();
        for _ in 0..count {
            let index = r.u64()? as usize;
            let width = r.u64()?;
            let row = (0..width).map(|_| r.f64()).collect::<Option<Vec<f64>>>()?;
            rows.push((index, row));
        }
        r.is_empty().then_some(Self {
            rows,
            computed,
            parallel_lines,
        })
    }
}

impl SweepTable {
    /// The table of a sweep from the parts of its shares: every point's
    /// row exactly once, in grid order; points computed and lines at once
    /// are summed over the parts.
    pub fn assemble(
        grid: &Grid,
        task: &dyn PointTask,
        parts: &[SharePart],
        store: String,
    ) -> Result<SweepTable, SweepError> {
        let mut columns = grid.names();
        columns.extend(task.columns());
        let mut rows: Vec<Option<Vec<f64>>> = vec![None; grid.len()];
        for (index, row) in parts.iter().flat_map(|p| &p.rows) {
            let bad = |message: &str| SweepError::Task {
                point: *index,
                message: message.to_string(),
            };
            let slot = rows.get_mut(*index).ok_or_else(|| bad("beyond the grid"))?;
            if row.len() != columns.len() {
                return Err(bad("a row of another width than the columns"));
            }
            if slot.replace(row.clone()).is_some() {
                return Err(bad("computed by two shares"));
            }
        }
        let rows = rows
            .into_iter()
            .enumerate()
            .map(|(point, row)| {
                row.ok_or_else(|| SweepError::Task {
                    point,
                    message: "no share returned its row".into(),
                })
            })
            .collect::<Result<Vec<_>, _>>()?;
        Ok(SweepTable {
            columns,
            rows,
            computed: parts.iter().map(|p| p.computed).sum(),
            parallel_lines: parts.iter().map(|p| p.parallel_lines).sum(),
            store,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sweep::Axis;

    fn grid(counts: &[usize]) -> Grid {
        let keys = ["leads.left.temperature_k", "bias.voltage_v"];
        let axes = counts
            .iter()
            .zip(keys)
            .map(|(&count, k)| Axis::parse(&format!("{k}=0:1:{count}")).unwrap())
            .collect();
        Grid::new(axes).unwrap()
    }

    #[test]
    fn shares_cover_every_point_once_and_whole_lines() {
        let g = grid(&[5, 3]);
        for size in 1..=7 {
            let mut seen: Vec<usize> = (0..size)
                .flat_map(|r| Share::new(r, size).unwrap().points(&g).collect::<Vec<_>>())
                .collect();
            for r in 0..size {
                let pts: Vec<usize> = Share::new(r, size).unwrap().points(&g).collect();
                assert!(pts.chunks(3).all(|c| c[0] % 3 == 0 && c.len() == 3));
            }
            seen.sort_unstable();
            assert_eq!(seen, (0..15).collect::<Vec<_>>(), "size {size}");
        }
        assert_eq!(Share::new(2, 2), None);
        assert_eq!(Share::WHOLE.points(&g).count(), 15);
    }

    #[test]
    fn parts_round_trip_with_exact_bits() {
        let part = SharePart {
            rows: vec![(3, vec![-0.0, f64::NAN, 1.0 / 3.0]), (9, vec![])],
            computed: 1,
            parallel_lines: 2,
        };
        let back = SharePart::from_bytes(&part.to_bytes()).unwrap();
        let bits = |p: &SharePart| -> Vec<(usize, Vec<u64>)> {
            p.rows
                .iter()
                .map(|(i, r)| (*i, r.iter().map(|x| x.to_bits()).collect()))
                .collect()
        };
        assert_eq!(bits(&back), bits(&part));
        assert_eq!((back.computed, back.parallel_lines), (1, 2));
        let bytes = part.to_bytes();
        assert_eq!(SharePart::from_bytes(&bytes[..bytes.len() - 1]), None);
    }
}

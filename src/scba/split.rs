//! One Born solve's energy grid shared by the processes of a job.
//!
//! The recursion at one energy needs only that energy's Σ0, so the
//! energies of a pass can be computed by different processes. The Born
//! loop asks the [`EnergySplit`] in force (see [`with_energy_split`]) which
//! part of each pass this process computes, runs the recursion there, and
//! hands the pass to [`EnergySplit::gather_rows`], which leaves every row
//! of the pass on every process. Everything after the gather (rebuilding
//! Σ0, the stopping test, the mixer) runs on every process on the same full
//! arrays, so every process follows the same iterations. Each energy is
//! computed by the same code from the same inputs as in one process, so
//! the results are the same bit for bit. Every process still holds every
//! array: the split saves time, not memory.
//!
//! A pass is split in its own order: in red-black order the red energies
//! are shared out and gathered, the black rows of Σ0 are rebuilt on every
//! process, then the black energies are shared out and gathered.

use super::{Pass, SolveError};
use crate::C64;
use crate::cluster::Cluster;
use crate::cluster::bytes::{Reader, put_f64, put_u64};
use crate::rgf::RgfError;
use std::cell::RefCell;
use std::ops::Range;
use std::rc::Rc;

/// How the energies of each pass are shared between processes.
pub trait EnergySplit {
    /// How many processes share the passes.
    fn processes(&self) -> usize;

    /// The positions, among the `count` energies of one pass (in
    /// ascending order), that this process computes.
    fn part(&self, count: usize) -> Range<usize>;

    /// Make every row `rows` of `pass` (the energies of one pass, in
    /// ascending order) whole on this process, given that each process
    /// computed the rows of its [`EnergySplit::part`] with the outcome
    /// `local`. A failure on any process comes back on every process (that
    /// of the lowest-numbered failing one). Every process must call it for
    /// every pass, failed or not.
    fn gather_rows(
        &self,
        pass: &mut Pass,
        rows: &[usize],
        local: Result<(), SolveError>,
    ) -> Result<(), SolveError>;
}

thread_local! {
    static CURRENT: RefCell<Option<Rc<dyn EnergySplit>>> = const { RefCell::new(None) };
}

/// Run `f` with every Born solve that it starts on this thread sharing its
/// energies by `split` (the Born solves of a command run on the thread
/// that started it; the energies are then computed in parallel by the
/// thread pool of each process). Whatever was in force before comes back
/// when `f` returns or unwinds. Every process of the split must run the
/// same sequence of Born solves in `f`, which holds when they run the same
/// command on the same input.
pub fn with_energy_split<R>(split: Rc<dyn EnergySplit>, f: impl FnOnce() -> R) -> R {
    struct Restore(Option<Rc<dyn EnergySplit>>);
    impl Drop for Restore {
        fn drop(&mut self) {
            let earlier = self.0.take();
            CURRENT.with(|c| *c.borrow_mut() = earlier);
        }
    }
    let _restore = Restore(CURRENT.with(|c| c.borrow_mut().replace(split)));
    f()
}

/// The split in force on this thread, if any.
pub(super) fn current() -> Option<Rc<dyn EnergySplit>> {
    CURRENT.with(|c| c.borrow().clone())
}

/// The energies of a pass over the ranks of a [`Cluster`]: rank r of K
/// computes the r-th of K contiguous, nearly equal blocks of each pass's
/// energies, and the rows travel between ranks as the exact bits of each
/// number. With one rank it computes everything and gathers nothing.
#[derive(Debug)]
pub struct ClusterSplit {
    cluster: Cluster,
}

impl ClusterSplit {
    /// Share the passes over the ranks of `cluster`.
    pub fn new(cluster: Cluster) -> Self {
        Self { cluster }
    }
}

/// Block r of `size` contiguous blocks of `count` positions (the first
/// `count mod size` one longer).
fn block(count: usize, rank: usize, size: usize) -> Range<usize> {
    let (base, extra) = (count / size, count % size);
    let start = rank * base + rank.min(extra);
    start..start + base + usize::from(rank < extra)
}

impl EnergySplit for ClusterSplit {
    fn processes(&self) -> usize {
        self.cluster.size()
    }

    fn part(&self, count: usize) -> Range<usize> {
        block(count, self.cluster.rank(), self.cluster.size())
    }

    fn gather_rows(
        &self,
        pass: &mut Pass,
        rows: &[usize],
        local: Result<(), SolveError>,
    ) -> Result<(), SolveError> {
        let size = self.cluster.size();
        if size == 1 {
            return local;
        }
        let mine = &rows[self.part(rows.len())];
        let outgoing = match local {
            Ok(()) => encode_rows(pass, mine),
            Err(e) => encode_error(&e),
        };
        let parts = self
            .cluster
            .exchange(&outgoing)
            .map_err(|f| SolveError::Invalid(f.message))?;
        // The lowest failing rank's failure, on every rank.
        if let Some(e) = parts.iter().find_map(|p| decode_error(p)) {
            return Err(e);
        }
        for (rank, part) in parts.iter().enumerate() {
            if rank == self.cluster.rank() {
                continue;
            }
            let theirs = &rows[block(rows.len(), rank, size)];
            decode_rows(pass, theirs, part).ok_or_else(|| {
                SolveError::Invalid(format!(
                    "rank {rank} sent {} bytes that are not the rows of its energies; \
                     hint: run every rank with the same qheat build and case",
                    part.len()
                ))
            })?;
        }
        Ok(())
    }
}

/// Call `f` on every number of energy row k of `pass`, always in the same
/// order: G^r and G^n per site, the bond flows, the terminal flows, the
/// kept diagonal blocks and the contacts' records.
fn each_number(pass: &mut Pass, k: usize, f: &mut impl FnMut(&mut f64)) {
    let complex = |z: &mut [C64], f: &mut dyn FnMut(&mut f64)| {
        for v in z {
            f(&mut v.re);
            f(&mut v.im);
        }
    };
    let ns = pass.green.sites;
    complex(&mut pass.green.retarded[k * ns..(k + 1) * ns], f);
    pass.green.filled[k * ns..(k + 1) * ns]
        .iter_mut()
        .for_each(&mut *f);
    let nb = pass.bond.len() / pass.flows.len().max(1);
    pass.bond[k * nb..(k + 1) * nb].iter_mut().for_each(&mut *f);
    let t = &mut pass.flows[k];
    for v in [
        &mut t.left,
        &mut t.right,
        &mut t.transmission,
        &mut t.left_gross,
        &mut t.right_gross,
    ] {
        f(v);
    }
    if let Some(b) = pass.blocks.as_mut() {
        let per = b.per_energy;
        complex(&mut b.retarded[k * per..(k + 1) * per], f);
        complex(&mut b.filled[k * per..(k + 1) * per], f);
    }
    let rl = pass.contact_flows.row_len();
    pass.contact_flows.data[k * rl..(k + 1) * rl]
        .iter_mut()
        .for_each(f);
}

/// Rows `rows` of `pass` as bytes: a 0, then every number of each row.
fn encode_rows(pass: &mut Pass, rows: &[usize]) -> Vec<u8> {
    let mut out = vec![0u8];
    for &k in rows {
        each_number(pass, k, &mut |v| put_f64(&mut out, *v));
    }
    out
}

/// Write the rows [`encode_rows`] wrote into `pass`; `None` when the bytes
/// do not hold exactly those rows.
fn decode_rows(pass: &mut Pass, rows: &[usize], bytes: &[u8]) -> Option<()> {
    let (&0, body) = bytes.split_first()? else {
        return None;
    };
    let mut r = Reader::new(body);
    let mut short = false;
    for &k in rows {
        each_number(pass, k, &mut |v| match r.f64() {
            Some(x) => *v = x,
            None => short = true,
        });
    }
    (!short && r.is_empty()).then_some(())
}

/// A failure of a pass as bytes: 1 and a non-finite Green's function's
/// energy and cell, or 2 and any other failure's message.
fn encode_error(e: &SolveError) -> Vec<u8> {
    match e {
        SolveError::Rgf(RgfError::NotFinite { energy_ev, cell }) => {
            let mut b = vec![1];
            put_f64(&mut b, *energy_ev);
            put_u64(&mut b, *cell as u64);
            b
        }
        other => {
            let mut b = vec![2];
            b.extend_from_slice(other.to_string().as_bytes());
            b
        }
    }
}

/// The failure [`encode_error`] wrote; `None` for rows.
fn decode_error(bytes: &[u8]) -> Option<SolveError> {
    match bytes.split_first()? {
        (1, rest) => {
            let mut r = Reader::new(rest);
            let (energy_ev, cell) = (r.f64()?, r.u64()?);
            Some(SolveError::Rgf(RgfError::NotFinite {
                energy_ev,
                cell: cell as usize,
            }))
        }
        (2, message) => Some(SolveError::Invalid(
            String::from_utf8_lossy(message).into_owned(),
        )),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_cover_every_position_once_in_order() {
        for count in [0, 1, 5, 16, 101] {
            for size in 1..=5 {
                let parts: Vec<Range<usize>> = (0..size).map(|r| block(count, r, size)).collect();
                assert_eq!(parts[0].start, 0);
                assert_eq!(parts[size - 1].end, count);
                for w in parts.windows(2) {
                    assert_eq!(w[0].end, w[1].start);
                }
                let lens: Vec<usize> = parts.iter().map(|p| p.len()).collect();
                let (lo, hi) = (lens.iter().min().unwrap(), lens.iter().max().unwrap());
                assert!(hi - lo <= 1, "{count} over {size}: {lens:?}");
            }
        }
    }

    #[test]
    fn failures_cross_with_their_place() {
        let e = SolveError::Rgf(RgfError::NotFinite {
            energy_ev: -0.0125,
            cell: 7,
        });
        assert_eq!(decode_error(&encode_error(&e)), Some(e));
        let e = SolveError::Invalid("a block self-energy".into());
        assert_eq!(decode_error(&encode_error(&e)), Some(e));
        assert_eq!(decode_error(&[0, 1, 2]), None);
    }

    #[test]
    fn a_split_is_in_force_only_inside_its_scope() {
        struct Two;
        impl EnergySplit for Two {
            fn processes(&self) -> usize {
                2
            }
            fn part(&self, count: usize) -> Range<usize> {
                0..count / 2
            }
            fn gather_rows(
                &self,
                _: &mut Pass,
                _: &[usize],
                local: Result<(), SolveError>,
            ) -> Result<(), SolveError> {
                local
            }
        }
        assert!(current().is_none());
        let seen = with_energy_split(Rc::new(Two), || current().map(|s| s.processes()));
        assert_eq!(seen, Some(2));
        assert!(current().is_none());
        let caught = std::panic::catch_unwind(|| {
            with_energy_split(Rc::new(Two), || panic!("inside"));
        });
        assert!(caught.is_err());
        assert!(current().is_none(), "restored after a panic");
    }
}

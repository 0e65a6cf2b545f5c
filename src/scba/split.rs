//! One Born solve's energy grid shared by the processes of a job.
//!
//! The recursion at one energy needs only that energy's Σ0, so the
//! energies of a pass can be computed by different processes. The Born
//! loop asks the [`EnergySplit`] in force (see [`with_energy_split`]) how
//! many processes share the passes and which one this is.
//!
//! For a model whose Σ0 row at E is built from G at E and E ± ħω only,
//! each process owns a fixed set of energy rows for the whole loop (see
//! `Share`): it runs the recursion, rebuilds Σ0 and mixes there only.
//! After each pass the processes exchange the terminal flows and contact
//! records of every row and G at the rows near the edges of their blocks
//! that another process reads (the halo); the change of Σ0 is summed row
//! by row in the order of one process, and the mixer's inner products are
//! partial sums added up in rank order, so every process follows the same
//! iterations. At the end of the loop every row is gathered on every
//! process once.
//!
//! Other models (the Hermitian part, coupling matrices, or a loop that
//! watches parts cut off from the leads) read every row when Σ0 is
//! rebuilt: there each process computes its part of each pass and
//! [`EnergySplit::gather_rows`] leaves every row of the pass on every
//! process, which then rebuilds Σ0, takes the stopping test and mixes on
//! the same full arrays, bit for bit as one process. In red-black order
//! the red energies are shared out first, the black rows of Σ0 are
//! rebuilt, then the black energies are shared out.

use super::{Pass, SolveError};
use crate::C64;
use crate::cluster::Cluster;
use crate::cluster::bytes::{Reader, put_f64, put_u64};
use crate::rgf::RgfError;
use crate::scattering::ScatteringSelfEnergy;
use std::cell::RefCell;
use std::ops::Range;
use std::rc::Rc;

/// How the energies of each pass are shared between processes.
pub trait EnergySplit {
    /// How many processes share the passes.
    fn processes(&self) -> usize;

    /// This process's number, 0 ≤ rank < [`EnergySplit::processes`].
    fn rank(&self) -> usize;

    /// Every process's `bytes`, in rank order, on every process. A
    /// collective: every process must call it.
    fn exchange(&self, bytes: &[u8]) -> Result<Vec<Vec<u8>>, SolveError>;

    /// The positions, among the `count` energies of one pass (in
    /// ascending order), that this process computes: the r-th of K
    /// contiguous, nearly equal blocks.
    fn part(&self, count: usize) -> Range<usize> {
        block(count, self.rank(), self.processes())
    }

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
    ) -> Result<(), SolveError> {
        let size = self.processes();
        if size == 1 {
            return local;
        }
        let mine = &rows[self.part(rows.len())];
        let outgoing = match local {
            Ok(()) => encode_rows(pass, None, mine),
            Err(e) => encode_error(&e),
        };
        let parts = self.exchange(&outgoing)?;
        // The lowest failing rank's failure, on every rank.
        if let Some(e) = first_failure(&parts) {
            return Err(e);
        }
        for (rank, part) in parts.iter().enumerate() {
            if rank == self.rank() {
                continue;
            }
            let theirs = &rows[block(rows.len(), rank, size)];
            decode_rows(pass, None, theirs, part).ok_or_else(|| garbled(rank, part))?;
        }
        Ok(())
    }
}

/// The error for bytes from `rank` that are not what every rank sends.
fn garbled(rank: usize, part: &[u8]) -> SolveError {
    SolveError::Invalid(format!(
        "rank {rank} sent {} bytes that are not the rows of its energies; \
         hint: run every rank with the same qheat build and case",
        part.len()
    ))
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

    fn rank(&self) -> usize {
        self.cluster.rank()
    }

    fn exchange(&self, bytes: &[u8]) -> Result<Vec<Vec<u8>>, SolveError> {
        (self.cluster.exchange(bytes)).map_err(|f| SolveError::Invalid(f.message))
    }
}

/// The energy rows of a Born loop whose work after each pass is shared as
/// well: which process owns each row (it runs the recursion there, rebuilds
/// that row of Σ0 and mixes it), and the exchanges the loop needs for it.
///
/// Ownership is fixed for the whole loop: in red-black order the red rows
/// and the black rows are each cut into K contiguous blocks (so each pass
/// of a colour is balanced), otherwise all rows are. A row of Σ0 is built
/// from G at its own energy and at the energies `reach` grid steps away
/// (the phonon energies), so after each pass a process sends, besides the
/// terminal flows and contact records of its rows (every process needs all
/// of them, they are a few numbers per energy), G only at the rows that
/// another process reads: a halo near the edges of its blocks.
pub(super) struct Share<'a> {
    split: &'a dyn EnergySplit,
    /// The process that owns each energy row.
    owner: Vec<usize>,
    /// Whether this process owns each energy row.
    own: Vec<bool>,
    /// The distances in grid steps (non-zero) at which a rebuilt row of Σ0
    /// reads G.
    reach: Vec<usize>,
}

impl<'a> Share<'a> {
    /// The rows of a loop over `energies` energies, in red-black order of
    /// band width `band` (None: simultaneous), whose rebuilt Σ0 rows read G
    /// at the `reach` distances (grid steps). With `align = Some(c)` the
    /// blocks of the first colour (the red rows, or all rows) are cut at
    /// multiples of c rows when that leaves every process at least 8 such
    /// units of work: the mixer takes its sums over chunks of c rows, so
    /// each process then holds whole chunks of one process's.
    pub(super) fn new(
        split: &'a dyn EnergySplit,
        energies: usize,
        band: Option<usize>,
        mut reach: Vec<usize>,
        align: Option<usize>,
    ) -> Self {
        let size = split.processes();
        let colours: Vec<Vec<usize>> = match band.filter(|&w| w > 0) {
            Some(w) => {
                let (red, black) = (0..energies).partition(|k| (k / w).is_multiple_of(2));
                vec![red, black]
            }
            None => vec![(0..energies).collect()],
        };
        let mut owner = vec![0; energies];
        for (c, rows) in colours.iter().enumerate() {
            let unit = align.filter(|_| c == 0).unwrap_or(1);
            for q in 0..size {
                rows[aligned_block(rows.len(), q, size, unit)]
                    .iter()
                    .for_each(|&k| owner[k] = q);
            }
        }
        reach.retain(|&s| s > 0);
        reach.sort_unstable();
        reach.dedup();
        let own = owner.iter().map(|&q| q == split.rank()).collect();
        Self {
            split,
            owner,
            own,
            reach,
        }
    }

    /// Whether this process owns energy row k, for every k.
    pub(super) fn own(&self) -> &[bool] {
        &self.own
    }

    /// Whether this process owns energy row k.
    #[cfg(test)]
    fn mine(&self, k: usize) -> bool {
        self.own[k]
    }

    /// The rows process `q` owns, ascending.
    fn rows_of(&self, q: usize) -> Vec<usize> {
        (0..self.owner.len())
            .filter(|&k| self.owner[k] == q)
            .collect()
    }

    /// Whether a process other than `q` (the owner of row k) reads G at
    /// energy k to rebuild one of its rows.
    fn read_elsewhere(&self, k: usize, q: usize) -> bool {
        let n = self.owner.len();
        self.reach
            .iter()
            .any(|&s| (k >= s && self.owner[k - s] != q) || (k + s < n && self.owner[k + s] != q))
    }

    /// After a pass over the rows k with `rows(k)` true, in which each
    /// process computed those it owns with the outcome `local`: hand every
    /// process the terminal flows and contact records of every row of the
    /// pass, and G at the rows it reads from other processes. A failure on
    /// any process comes back on every process (see [`first_failure`]).
    /// Every process must call it for every pass, failed or not.
    pub(super) fn exchange_pass(
        &self,
        pass: &mut Pass,
        rows: impl Fn(usize) -> bool,
        local: Result<(), SolveError>,
    ) -> Result<(), SolveError> {
        let me = self.split.rank();
        let outgoing = match local {
            Ok(()) => {
                let mut out = vec![0u8];
                for k in self.rows_of(me).into_iter().filter(|&k| rows(k)) {
                    each_flow(pass, k, &mut |v| put_f64(&mut out, *v));
                    if self.read_elsewhere(k, me) {
                        each_green(pass, k, &mut |v| put_f64(&mut out, *v));
                    }
                }
                out
            }
            Err(e) => encode_error(&e),
        };
        let parts = self.split.exchange(&outgoing)?;
        if let Some(e) = first_failure(&parts) {
            return Err(e);
        }
        for (q, part) in parts.iter().enumerate() {
            if q != me {
                self.decode_pass(pass, &rows, q, part)
                    .ok_or_else(|| garbled(q, part))?;
            }
        }
        Ok(())
    }

    /// Write what process `q` sent in [`Share::exchange_pass`] into `pass`;
    /// `None` when the bytes do not hold exactly that.
    fn decode_pass(
        &self,
        pass: &mut Pass,
        rows: &impl Fn(usize) -> bool,
        q: usize,
        bytes: &[u8],
    ) -> Option<()> {
        let mut numbers = Numbers::new(bytes)?;
        let mut read = |v: &mut f64| numbers.read(v);
        for k in self.rows_of(q).into_iter().filter(|&k| rows(k)) {
            each_flow(pass, k, &mut read);
            if self.read_elsewhere(k, q) {
                each_green(pass, k, &mut read);
            }
        }
        numbers.finish()
    }

    /// The total of every process's chunk sums `parts` (`width` numbers
    /// each), added chunk by chunk in rank order and, within a process,
    /// in its order: the order of one process when each process holds
    /// whole chunks of one process's rows, so every process gets the same
    /// bits and, then, those of one process. A collective.
    pub(super) fn reduce(&self, parts: &[Vec<f64>], width: usize) -> Result<Vec<f64>, SolveError> {
        let mut out = Vec::with_capacity(8 + 8 * width * parts.len());
        put_u64(&mut out, parts.len() as u64);
        for part in parts {
            part.iter().for_each(|&v| put_f64(&mut out, v));
        }
        let all = self.split.exchange(&out)?;
        let mut tot = vec![0.0; width];
        for (q, bytes) in all.iter().enumerate() {
            let mut r = Reader::new(bytes);
            let chunks = r.u64().ok_or_else(|| garbled(q, bytes))?;
            for _ in 0..chunks {
                for t in tot.iter_mut() {
                    *t += r.f64().ok_or_else(|| garbled(q, bytes))?;
                }
            }
            if !r.is_empty() {
                return Err(garbled(q, bytes));
            }
        }
        Ok(tot)
    }

    /// The sums of squares of the relative change of Σ0 over every energy,
    /// from each process's rows `(k, sums)` (`local`), added in row order as
    /// one process adds them, so the change has the bits of one process
    /// given the same Σ0 and image. A process that found a non-finite row
    /// sends that fault instead; then every process gets the one at the
    /// lowest energy. A collective.
    pub(super) fn row_sums(
        &self,
        local: Result<Vec<(usize, [f64; 6])>, SolveError>,
    ) -> Result<[f64; 6], SolveError> {
        let outgoing = match local {
            Ok(rows) => {
                let mut b = Vec::with_capacity(1 + 56 * rows.len());
                b.push(0);
                for (k, sums) in rows {
                    put_u64(&mut b, k as u64);
                    sums.iter().for_each(|&v| put_f64(&mut b, v));
                }
                b
            }
            Err(e) => encode_error(&e),
        };
        let parts = self.split.exchange(&outgoing)?;
        if let Some(e) = first_failure(&parts) {
            return Err(e);
        }
        let mut by_row: Vec<Option<[f64; 6]>> = vec![None; self.owner.len()];
        for (q, part) in parts.iter().enumerate() {
            read_row_sums(part, &mut by_row).ok_or_else(|| garbled(q, part))?;
        }
        let mut tot = [0.0; 6];
        for (k, sums) in by_row.iter().enumerate() {
            let sums = sums.ok_or_else(|| {
                SolveError::Invalid(format!("no process sent the change of energy row {k}"))
            })?;
            for (t, v) in tot.iter_mut().zip(sums) {
                *t += v;
            }
        }
        Ok(tot)
    }

    /// Every row of `pass` and of Σ0 `x` from the process that owns it, on
    /// every process: what the results need, once at the end of the loop.
    /// A collective.
    pub(super) fn gather_all(
        &self,
        pass: &mut Pass,
        x: &mut ScatteringSelfEnergy,
    ) -> Result<(), SolveError> {
        let me = self.split.rank();
        let outgoing = encode_rows(pass, Some(&mut *x), &self.rows_of(me));
        let parts = self.split.exchange(&outgoing)?;
        for (q, part) in parts.iter().enumerate() {
            if q != me {
                decode_rows(pass, Some(&mut *x), &self.rows_of(q), part)
                    .ok_or_else(|| garbled(q, part))?;
            }
        }
        Ok(())
    }
}

/// [`block`] cut at multiples of `unit` positions, when there are at least
/// 8 units per process (else [`block`] itself).
fn aligned_block(count: usize, rank: usize, size: usize, unit: usize) -> Range<usize> {
    let units = count.div_ceil(unit.max(1));
    if unit <= 1 || units < 8 * size {
        return block(count, rank, size);
    }
    let b = block(units, rank, size);
    (b.start * unit).min(count)..(b.end * unit).min(count)
}

/// Read the `(k, sums)` of [`Share::row_sums`] into `by_row`; `None` when
/// the bytes are not such rows.
fn read_row_sums(bytes: &[u8], by_row: &mut [Option<[f64; 6]>]) -> Option<()> {
    let (&0, body) = bytes.split_first()? else {
        return None;
    };
    let mut r = Reader::new(body);
    while !r.is_empty() {
        let k = usize::try_from(r.u64()?).ok()?;
        let mut sums = [0.0; 6];
        for v in &mut sums {
            *v = r.f64()?;
        }
        *by_row.get_mut(k)? = Some(sums);
    }
    Some(())
}

/// Call `f` on G^r and G^n of every site of energy row k of `pass`.
fn each_green(pass: &mut Pass, k: usize, f: &mut impl FnMut(&mut f64)) {
    let ns = pass.green.sites;
    for v in &mut pass.green.retarded[k * ns..(k + 1) * ns] {
        f(&mut v.re);
        f(&mut v.im);
    }
    pass.green.filled[k * ns..(k + 1) * ns]
        .iter_mut()
        .for_each(f);
}

/// Call `f` on the terminal flows and the contacts' records of energy row
/// k of `pass`.
fn each_flow(pass: &mut Pass, k: usize, f: &mut impl FnMut(&mut f64)) {
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
    let rl = pass.contact_flows.row_len();
    pass.contact_flows.data[k * rl..(k + 1) * rl]
        .iter_mut()
        .for_each(f);
}

/// Call `f` on every number of energy row k of `pass`, always in the same
/// order: G^r and G^n per site, the bond flows, the kept diagonal blocks,
/// the terminal flows and the contacts' records; then, when `sigma` is
/// given, on Σ^r_0 and Σ^in_0 of the row.
fn each_number(
    pass: &mut Pass,
    sigma: Option<&mut ScatteringSelfEnergy>,
    k: usize,
    f: &mut impl FnMut(&mut f64),
) {
    let complex = |z: &mut [C64], f: &mut dyn FnMut(&mut f64)| {
        for v in z {
            f(&mut v.re);
            f(&mut v.im);
        }
    };
    each_green(pass, k, f);
    let nb = pass.bond.len() / pass.flows.len().max(1);
    pass.bond[k * nb..(k + 1) * nb].iter_mut().for_each(&mut *f);
    if let Some(b) = pass.blocks.as_mut() {
        let per = b.per_energy;
        complex(&mut b.retarded[k * per..(k + 1) * per], f);
        complex(&mut b.filled[k * per..(k + 1) * per], f);
    }
    each_flow(pass, k, f);
    if let Some(s) = sigma {
        let per = s.sites;
        complex(&mut s.retarded[k * per..(k + 1) * per], f);
        s.inscatter[k * per..(k + 1) * per].iter_mut().for_each(f);
    }
}

/// Rows `rows` of `pass` (and of `sigma`, when given) as bytes: a 0, then
/// every number of each row.
fn encode_rows(
    pass: &mut Pass,
    mut sigma: Option<&mut ScatteringSelfEnergy>,
    rows: &[usize],
) -> Vec<u8> {
    let mut out = vec![0u8];
    for &k in rows {
        each_number(pass, sigma.as_deref_mut(), k, &mut |v| {
            put_f64(&mut out, *v)
        });
    }
    out
}

/// Write the rows [`encode_rows`] wrote into `pass` (and `sigma`); `None`
/// when the bytes do not hold exactly those rows.
fn decode_rows(
    pass: &mut Pass,
    mut sigma: Option<&mut ScatteringSelfEnergy>,
    rows: &[usize],
    bytes: &[u8],
) -> Option<()> {
    let mut numbers = Numbers::new(bytes)?;
    for &k in rows {
        each_number(pass, sigma.as_deref_mut(), k, &mut |v| numbers.read(v));
    }
    numbers.finish()
}

/// The numbers of a message of work (a 0, then numbers), read in order
/// into the places the decoders walk; a read past the end is remembered.
struct Numbers<'a> {
    reader: Reader<'a>,
    short: bool,
}

impl<'a> Numbers<'a> {
    /// `None` when `bytes` is not a message of work.
    fn new(bytes: &'a [u8]) -> Option<Self> {
        let (&0, body) = bytes.split_first()? else {
            return None;
        };
        Some(Self {
            reader: Reader::new(body),
            short: false,
        })
    }

    /// Write the next number into `v`; past the end, leave `v` as it is.
    fn read(&mut self, v: &mut f64) {
        match self.reader.f64() {
            Some(x) => *v = x,
            None => self.short = true,
        }
    }

    /// `Some` when every read found a number and none is left over.
    fn finish(self) -> Option<()> {
        (!self.short && self.reader.is_empty()).then_some(())
    }
}

/// The failure to report when some processes sent failures instead of
/// their work: a non-finite Σ0 before any other (one process checks Σ0
/// before it runs the pass that would fail on it), the one at the lowest
/// energy among those; else that of the lowest-numbered failing process.
fn first_failure(parts: &[Vec<u8>]) -> Option<SolveError> {
    let faults: Vec<SolveError> = parts.iter().filter_map(|p| decode_error(p)).collect();
    let energy = |e: &SolveError| match e {
        SolveError::SelfEnergyNotFinite { energy_ev, .. } => Some(*energy_ev),
        _ => None,
    };
    let lowest = (faults.iter())
        .filter_map(|e| energy(e).map(|at| (at, e)))
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, e)| e.clone());
    lowest.or_else(|| faults.into_iter().next())
}

/// The two parts of Σ0 a non-finite value is reported in.
const PARTS: [&str; 2] = ["Σ^r_0", "Σ^in_0"];

/// A failure of a pass as bytes: 1 and a non-finite Green's function's
/// energy and cell, 3 and a non-finite Σ0's iteration, energy, cell and
/// part, or 2 and any other failure's message.
fn encode_error(e: &SolveError) -> Vec<u8> {
    match e {
        SolveError::Rgf(RgfError::NotFinite { energy_ev, cell }) => {
            let mut b = vec![1];
            put_f64(&mut b, *energy_ev);
            put_u64(&mut b, *cell as u64);
            b
        }
        SolveError::SelfEnergyNotFinite {
            iteration,
            energy_ev,
            cell,
            part,
        } if PARTS.contains(part) => {
            let mut b = vec![3];
            put_u64(&mut b, *iteration as u64);
            put_f64(&mut b, *energy_ev);
            put_u64(&mut b, *cell as u64);
            put_u64(&mut b, u64::from(*part == PARTS[1]));
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
        (3, rest) => {
            let mut r = Reader::new(rest);
            let (iteration, energy_ev, cell) = (r.u64()?, r.f64()?, r.u64()?);
            let part = *PARTS.get(usize::try_from(r.u64()?).ok()?)?;
            Some(SolveError::SelfEnergyNotFinite {
                iteration: iteration as usize,
                energy_ev,
                cell: cell as usize,
                part,
            })
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
        for part in PARTS {
            let e = SolveError::SelfEnergyNotFinite {
                iteration: 3,
                energy_ev: 0.25,
                cell: 9,
                part,
            };
            assert_eq!(decode_error(&encode_error(&e)), Some(e));
        }
    }

    /// Process `rank` of `size` (no exchange: the ownership alone).
    struct Alone(usize, usize);
    impl EnergySplit for Alone {
        fn processes(&self) -> usize {
            self.1
        }
        fn rank(&self) -> usize {
            self.0
        }
        fn exchange(&self, bytes: &[u8]) -> Result<Vec<Vec<u8>>, SolveError> {
            Ok(vec![bytes.to_vec()])
        }
    }

    #[test]
    fn each_colour_is_cut_into_blocks_and_the_halo_is_what_others_read() {
        // 20 energies, bands of 2: red 0 1 4 5 8 9 12 13 16 17.
        let (zero, one) = (Alone(0, 2), Alone(1, 2));
        let a = Share::new(&zero, 20, Some(2), vec![2, 0, 2], None);
        let b = Share::new(&one, 20, Some(2), vec![2], None);
        assert_eq!(a.reach, vec![2]);
        assert_eq!(a.rows_of(0), vec![0, 1, 2, 3, 4, 5, 6, 7, 8, 10]);
        assert_eq!(a.rows_of(1), b.rows_of(1));
        for k in 0..20 {
            assert_ne!(a.mine(k), b.mine(k), "row {k} has one owner");
        }
        // Each rank sends the rows of its own whose neighbours 2 steps away
        // the other owns.
        let sent = |s: &Share, q: usize| -> Vec<usize> {
            (s.rows_of(q).into_iter())
                .filter(|&k| s.read_elsewhere(k, q))
                .collect()
        };
        assert_eq!(sent(&a, 0), vec![7, 10]);
        assert_eq!(sent(&b, 1), vec![9, 12]);
        // Simultaneous order: one block each; no phonon, no halo.
        let c = Share::new(&one, 7, None, vec![], None);
        assert_eq!(c.rows_of(1), vec![4, 5, 6]);
        assert!(sent(&c, 1).is_empty());
        // Blocks cut at whole chunks of 3 rows when each process gets 8.
        assert_eq!(aligned_block(100, 0, 2, 3), 0..51);
        assert_eq!(aligned_block(100, 1, 2, 3), 51..100);
        assert_eq!(aligned_block(40, 1, 2, 3), block(40, 1, 2));
        let d = Share::new(&one, 100, None, vec![], Some(3));
        assert_eq!(d.rows_of(1), (51..100).collect::<Vec<_>>());
    }

    #[test]
    fn the_fault_at_the_lowest_energy_wins() {
        let bad = |energy_ev: f64| SolveError::SelfEnergyNotFinite {
            iteration: 1,
            energy_ev,
            cell: 0,
            part: PARTS[0],
        };
        let rgf = SolveError::Rgf(RgfError::NotFinite {
            energy_ev: -1.0,
            cell: 2,
        });
        let parts = vec![
            vec![0u8],
            encode_error(&rgf),
            encode_error(&bad(0.3)),
            encode_error(&bad(0.1)),
        ];
        assert_eq!(first_failure(&parts), Some(bad(0.1)));
        assert_eq!(first_failure(&parts[..2]), Some(rgf));
        assert_eq!(first_failure(&parts[..1]), None);
        let mut rows = vec![None; 3];
        let mut b = vec![0u8];
        put_u64(&mut b, 2);
        (0..6).for_each(|i| put_f64(&mut b, i as f64));
        assert_eq!(read_row_sums(&b, &mut rows), Some(()));
        assert_eq!(rows[2], Some([0.0, 1.0, 2.0, 3.0, 4.0, 5.0]));
        b.pop();
        assert_eq!(read_row_sums(&b, &mut rows), None);
    }

    #[test]
    fn a_split_is_in_force_only_inside_its_scope() {
        struct Two;
        impl EnergySplit for Two {
            fn processes(&self) -> usize {
                2
            }
            fn rank(&self) -> usize {
                0
            }
            fn exchange(&self, bytes: &[u8]) -> Result<Vec<Vec<u8>>, SolveError> {
                Ok(vec![bytes.to_vec(), bytes.to_vec()])
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

    /// The decoders' shared reader takes exactly the numbers of a message
    /// of work, with their bits: a wrong tag, a short message and bytes
    /// left over are each refused.
    #[test]
    fn the_decoders_reader_takes_exactly_the_numbers_of_a_message() {
        let read_two = |bytes: &[u8]| {
            let mut numbers = Numbers::new(bytes)?;
            let mut v = [7.0; 2];
            for x in &mut v {
                numbers.read(x);
            }
            numbers.finish().map(|()| v)
        };
        let mut bytes = vec![0u8];
        put_f64(&mut bytes, 1.5);
        put_f64(&mut bytes, -0.1);
        assert_eq!(read_two(&bytes), Some([1.5, -0.1]));
        assert_eq!(read_two(&bytes[..9]), None, "short");
        let mut long = bytes.clone();
        long.push(0);
        assert_eq!(read_two(&long), None, "left over");
        let mut tagged = bytes.clone();
        tagged[0] = 1;
        assert_eq!(read_two(&tagged), None, "not work");
        assert_eq!(read_two(&[]), None, "empty");
    }
}

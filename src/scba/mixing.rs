//! Mixing of successive scattering self-energies.
//!
//! The mixed quantity is the vector (Re Σ^r_0, Im Σ^r_0, Σ^in_0) over the
//! mixed energies and all orbital sites. Anderson acceleration in the form
//! of H. F. Walker and P. Ni, SIAM J. Numer. Anal. 49, 1715 (2011) (after
//! D. G. Anderson, J. ACM 12, 547 (1965)): with residuals r_j = F(x_j) − x_j
//! and differences ΔR, ΔX of the last m iterates, solve
//! min_γ ‖r_k − ΔR γ‖ and take x_k+1 = x_k + β r_k − (ΔX + β ΔR) γ.
//! Safeguard: when the residual norm grows, the history is dropped and a
//! damped linear step is taken.
//!
//! # Compact history
//!
//! The history (ΔR_j, U_j = ΔX_j + β ΔR_j, the last residual and the last
//! step) is stored in f32 by default ([`MixerHistory::Compact`]); the
//! residual r_k = F(x_k) − x_k, the base x_k + β r_k of the update and
//! every inner product stay in f64. This cannot move the fixed point: at a
//! fixed point r_k = 0, so every right-hand side ΔR_j·r_k of the least
//! squares is zero, γ = 0, and the update returns x_k exactly; and the loop
//! stops on the f64 residual, never on a stored one. Rounding the history
//! only perturbs the search direction (relative 6e-8 per number), i.e. how
//! fast the loop gets there. [`MixerHistory::Full`] keeps it in f64.

#![allow(clippy::needless_range_loop)] // small dense linear algebra reads best with indices

use super::params::{MixerHistory, Mixing};
use crate::C64;
use crate::scattering::ScatteringSelfEnergy;
use rayon::prelude::*;
use std::collections::VecDeque;
use std::convert::Infallible;
use std::sync::Mutex;

/// Mixing state across Born iterations.
///
/// Internally a Σ0 is a vector of L = P·E_m·S numbers: the P mixed parts
/// of each orbital site side by side (Re Σ^r_0, Im Σ^r_0, Σ^in_0, or the
/// last two), over the E_m mixed energies (all of them, or the red ones
/// when the black rows are rebuilt from the red Green's functions before
/// they are used, see [`Mixer::with_rows`]) and the S values per energy.
///
/// Memory: for each of the m stored steps the residual difference ΔR_j
/// and U_j = ΔX_j + β ΔR_j, plus the last residual and the last step:
/// (2m + 2)·L numbers of 4 bytes (compact history) or 8 bytes (full).
/// Linear mixing keeps nothing. The residual itself is recomputed from
/// Σ0 and F(Σ0) where it is needed, never stored.
///
/// Cost: each iteration reads and writes these vectors in two fused
/// passes (residual, new differences and every inner product in the first;
/// the update and the new step in the second), in parallel over fixed
/// chunks of whole energy rows whose partial sums are added in order, so
/// any thread count gives the same numbers. The first pass can instead be
/// taken row by row by whoever builds F(Σ0), each row while it is in
/// cache ([`Mixer::begin_fused`]).
pub struct Mixer {
    kind: Mixing,
    /// Numbers mixed per orbital site: 3, or 2 when Re Σ^r_0 is zero for
    /// every input (no Hermitian part, no dephasing) and is left out.
    parts: usize,
    /// The mixed energy rows (None: all), fixed at the first update.
    rows: Option<Vec<usize>>,
    /// A band width w: only the red rows (⌊k/w⌋ even) are mixed.
    red_only: Option<usize>,
    /// The rows this process mixes when the rows are shared between
    /// processes (see [`Mixer::share_rows`]); None: every row.
    own: Option<Vec<bool>>,
    state: State,
}

/// Adds up the sums of each chunk of rows (`width` numbers each, chunks
/// in row order) across the processes that share the rows (see
/// [`Mixer::update_shared`]).
pub type Reduce<'a, E> = &'a mut dyn FnMut(&[Vec<f64>], usize) -> Result<Vec<f64>, E>;

/// The sums of `parts` (`width` numbers each), added in order.
pub fn add_in_order(parts: &[Vec<f64>], width: usize) -> Vec<f64> {
    let mut tot = vec![0.0; width];
    for part in parts {
        for (t, v) in tot.iter_mut().zip(part) {
            *t += v;
        }
    }
    tot
}

/// How many energy rows of `sites` values form one chunk of the mixer's
/// passes (whose sums are taken per chunk and then added in order).
pub fn rows_per_chunk(sites: usize) -> usize {
    (CHUNK_SITES / sites.max(1)).max(1)
}

/// The Anderson history at its storage precision.
enum State {
    Linear,
    Compact(Anderson<f32>),
    Full(Anderson<f64>),
}

/// A number type the history is stored in.
trait Stored: Copy + Send + Sync + Default + 'static {
    fn put(v: f64) -> Self;
    fn get(self) -> f64;
}

impl Stored for f32 {
    #[inline]
    fn put(v: f64) -> Self {
        v as f32
    }
    #[inline]
    fn get(self) -> f64 {
        f64::from(self)
    }
}

impl Stored for f64 {
    #[inline]
    fn put(v: f64) -> Self {
        v
    }
    #[inline]
    fn get(self) -> f64 {
        self
    }
}

/// Anderson history stored as `T`.
struct Anderson<T: Stored> {
    depth: usize,
    beta: f64,
    /// The last residual r_{k−1} and the last step x_k − x_{k−1}.
    last: Option<(Vec<T>, Vec<T>)>,
    /// ΔR_j and U_j of the stored steps, oldest first.
    dr: VecDeque<Vec<T>>,
    u: VecDeque<Vec<T>>,
    /// Gram[i][j] = ΔR_i·ΔR_j of the stored steps (same order), of the
    /// stored (rounded) vectors.
    gram: VecDeque<VecDeque<f64>>,
    /// Buffers no longer in use, reused before allocating.
    spare: Vec<Vec<T>>,
    last_norm: f64,
}

/// Orbital sites per parallel chunk (P numbers each); a chunk holds whole
/// energy rows, at least one.
const CHUNK_SITES: usize = 1 << 12;

/// Where the mixed numbers sit: values per energy, parts per site, the
/// mixed rows and how many of them form a chunk.
#[derive(Clone, Copy)]
struct Layout<'a> {
    ns: usize,
    parts: usize,
    rows: &'a [usize],
    per_chunk: usize,
}

impl Layout<'_> {
    /// Numbers of one chunk of the mixed vector.
    fn chunk_len(&self) -> usize {
        self.per_chunk * self.ns * self.parts
    }

    /// The mixed numbers of the rows of chunk `c` of `s`, appended to `out`.
    fn gather(&self, s: &ScatteringSelfEnergy, c: usize, out: &mut Vec<f64>) {
        out.clear();
        let ns = self.ns;
        let end = ((c + 1) * self.per_chunk).min(self.rows.len());
        for &k in &self.rows[c * self.per_chunk..end] {
            let (r, i) = (
                &s.retarded[k * ns..(k + 1) * ns],
                &s.inscatter[k * ns..(k + 1) * ns],
            );
            push_row(self.parts, r, i, out);
        }
    }
}

/// The mixed numbers of one energy row (Σ^r_0 row `r`, Σ^in_0 row `i`),
/// `parts` per orbital site, appended to `out`.
fn push_row(parts: usize, r: &[C64], i: &[f64], out: &mut Vec<f64>) {
    for (z, v) in r.iter().zip(i) {
        if parts == 3 {
            out.extend_from_slice(&[z.re, z.im, *v]);
        } else {
            out.extend_from_slice(&[z.im, *v]);
        }
    }
}

impl Mixer {
    /// A fresh mixer (all energies, the default history).
    pub fn new(kind: Mixing) -> Self {
        Self::with_real_part(kind, true)
    }

    /// A fresh mixer that mixes Re Σ^r_0 only when `real_part` is true;
    /// otherwise the next input takes Re Σ^r_0 from the image F(x), which
    /// must then be zero everywhere, and a third less memory is streamed.
    pub fn with_real_part(kind: Mixing, real_part: bool) -> Self {
        Self::with_rows(kind, real_part, MixerHistory::default(), None)
    }

    /// A fresh mixer storing its history as `history` says. With
    /// `red_only = Some(w)` only the red energy rows (⌊k/w⌋ even) are
    /// mixed and the others are left as they are: right when every black
    /// row of Σ0 is rebuilt from the red Green's functions before it is
    /// used, so that its residual is exactly zero and its mixed value
    /// would be thrown away (red-black order with two-colouring phonons
    /// only); then this halves the history and gives the same iterates.
    pub fn with_rows(
        kind: Mixing,
        real_part: bool,
        history: MixerHistory,
        red_only: Option<usize>,
    ) -> Self {
        let state = match (kind, history) {
            (Mixing::Linear { .. }, _) => State::Linear,
            (Mixing::Anderson { depth, damping }, MixerHistory::Compact) => {
                State::Compact(Anderson::new(depth, damping))
            }
            (Mixing::Anderson { depth, damping }, MixerHistory::Full) => {
                State::Full(Anderson::new(depth, damping))
            }
        };
        Self {
            kind,
            parts: if real_part { 3 } else { 2 },
            rows: None,
            red_only: red_only.filter(|&w| w > 0),
            own: None,
            state,
        }
    }

    /// Mix only the energy rows k with `own[k]` true (of those this mixer
    /// mixes at all), the share of one of several processes that each mix
    /// their own rows: the history then holds only these rows, and the
    /// inner products are partial sums that [`Mixer::update_shared`] adds
    /// up across the processes. Call before the first update.
    pub fn share_rows(&mut self, own: Vec<bool>) {
        self.rows = None;
        self.own = Some(own);
    }

    /// Replace `x` by the next input given its image `fx`; returns which
    /// step was taken ("linear", "anderson" or "restart" when the residual
    /// grew and the history was dropped for a damped linear step).
    pub fn update(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
    ) -> &'static str {
        let mut add = |parts: &[Vec<f64>], width| Ok::<_, Infallible>(add_in_order(parts, width));
        match self.update_shared(x, fx, &mut add) {
            Ok(step) => step,
            Err(never) => match never {},
        }
    }

    /// [`Mixer::update`] on the rows of [`Mixer::share_rows`]: `reduce`
    /// turns the sums of this process's chunks of rows into their total
    /// over the processes (once per update), so that every process takes
    /// the same step; x is changed on this process's rows only. Fails when
    /// `reduce` does. When each process's rows are whole chunks of one
    /// process's and the chunk sums are added in row order, the total has
    /// the bits of one process.
    pub fn update_shared<E>(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        reduce: Reduce<'_, E>,
    ) -> Result<&'static str, E> {
        let (red_only, own) = (self.red_only, self.own.as_deref());
        let ns = x.sites.max(1);
        if let Mixing::Linear { factor } = self.kind {
            match own {
                None => linear_step(x, fx, factor),
                Some(own) => linear_step_rows(x, fx, factor, ns, own),
            }
            return Ok("linear");
        }
        let rows = self
            .rows
            .get_or_insert_with(|| mixed_rows(x.energies(), red_only, own));
        let lay = Layout {
            ns,
            parts: self.parts,
            rows,
            per_chunk: rows_per_chunk(ns),
        };
        match &mut self.state {
            State::Compact(a) => a.update(x, fx, lay, reduce),
            State::Full(a) => a.update(x, fx, lay, reduce),
            State::Linear => unreachable!("linear mixing returned above"),
        }
    }
}

/// The energy rows k < `energies` a mixer mixes: the red ones only with
/// `red_only = Some(w)`, and only those with `own[k]` when given.
fn mixed_rows(energies: usize, red_only: Option<usize>, own: Option<&[bool]>) -> Vec<usize> {
    (0..energies)
        .filter(|k| red_only.is_none_or(|w| (k / w).is_multiple_of(2)))
        .filter(|&k| own.is_none_or(|o| o[k]))
        .collect()
}

/// The buffers of an Anderson update between the start of its first pass
/// and its step: the new residual, and (after the first update) U_new and
/// ΔR_new being formed in the last step's and last residual's buffers;
/// `old` stored steps take part.
struct Begun<T> {
    r_new: Vec<T>,
    pair: Option<(Vec<T>, Vec<T>)>,
    old: usize,
}

/// An Anderson update whose first pass (the residual, the new
/// differences and the inner products, see [`Mixer`])
/// is taken row by row through a [`RowHook`] while the image F(x) is
/// being built, each row while it is in cache, instead of in a pass of its
/// own that reads x and F(x) again. Started by [`Mixer::begin_fused`],
/// ended by [`Mixer::finish_fused`] (or dropped when no step is taken).
pub struct FusedUpdate(FusedKind);

enum FusedKind {
    Compact(Begun<f32>),
    Full(Begun<f64>),
}

/// Takes pass 1 of a [`FusedUpdate`] on the rows handed to it: see
/// [`RowHook::row`].
pub struct RowHook<'a>(HookKind<'a>);

enum HookKind<'a> {
    Compact(Hook<'a, f32>),
    Full(Hook<'a, f64>),
}

/// What a [`RowHook`] reads and writes: the history, the mixed rows
/// (one per chunk) and per chunk its slices of the update's buffers.
struct Hook<'a, T: Stored> {
    anderson: &'a Anderson<T>,
    rows: &'a [usize],
    parts: usize,
    old: usize,
    slots: Vec<Mutex<Slot<'a, T>>>,
}

/// One chunk's slices of r_new, U_new and ΔR_new, and its sums once taken.
struct Slot<'a, T> {
    rn: &'a mut [T],
    pair: Option<(&'a mut [T], &'a mut [T])>,
    sums: Option<Vec<f64>>,
}

impl<'a, T: Stored> Hook<'a, T> {
    fn new(
        anderson: &'a Anderson<T>,
        rows: &'a [usize],
        parts: usize,
        b: &'a mut Begun<T>,
    ) -> Self {
        let cl = b.r_new.len() / rows.len().max(1);
        let mut pairs: Vec<Option<(&'a mut [T], &'a mut [T])>> = match &mut b.pair {
            Some((u, d)) => (u.chunks_mut(cl.max(1)))
                .zip(d.chunks_mut(cl.max(1)))
                .map(Some)
                .collect(),
            None => Vec::new(),
        };
        pairs.resize_with(rows.len(), || None);
        let slots = (b.r_new.chunks_mut(cl.max(1)))
            .zip(pairs)
            .map(|(rn, pair)| {
                let sums = None;
                Mutex::new(Slot { rn, pair, sums })
            })
            .collect();
        Self {
            anderson,
            rows,
            parts,
            old: b.old,
            slots,
        }
    }

    fn row(&self, k: usize, x: &ScatteringSelfEnergy, fr: &[C64], fi: &[f64]) {
        let Ok(c) = self.rows.binary_search(&k) else {
            return;
        };
        let mut slot = self.slots[c]
            .lock()
            .expect("no panic while a chunk is mixed");
        let Slot { rn, pair, sums } = &mut *slot;
        let ns = fr.len();
        let (mut r, mut f) = (Vec::with_capacity(rn.len()), Vec::with_capacity(rn.len()));
        let at = k * ns..(k + 1) * ns;
        push_row(
            self.parts,
            &x.retarded[at.clone()],
            &x.inscatter[at],
            &mut r,
        );
        push_row(self.parts, fr, fi, &mut f);
        let pair = pair.as_mut().map(|(u, d)| (&mut **u, &mut **d));
        let at = c * rn.len();
        *sums = Some(
            self.anderson
                .chunk_sums(at, &mut r, &mut f, rn, pair, self.old),
        );
    }

    fn into_sums(self) -> Vec<Option<Vec<f64>>> {
        (self.slots.into_iter())
            .map(|m| {
                m.into_inner()
                    .expect("no panic while a chunk is mixed")
                    .sums
            })
            .collect()
    }
}

impl RowHook<'_> {
    /// Pass 1 of the update on energy row k, if it is mixed, from x (row k
    /// is read) and the row of its image F(x) just built (`fr`: Σ^r_0,
    /// `fi`: Σ^in_0). The same numbers as the separate pass, bit for bit.
    pub fn row(&self, k: usize, x: &ScatteringSelfEnergy, fr: &[C64], fi: &[f64]) {
        match &self.0 {
            HookKind::Compact(h) => h.row(k, x, fr, fi),
            HookKind::Full(h) => h.row(k, x, fr, fi),
        }
    }

    /// The sums of each chunk taken (None: a mixed row never handed over),
    /// for [`Mixer::finish_fused`].
    pub fn into_sums(self) -> Vec<Option<Vec<f64>>> {
        match self.0 {
            HookKind::Compact(h) => h.into_sums(),
            HookKind::Full(h) => h.into_sums(),
        }
    }
}

impl Mixer {
    /// Start an update whose first pass runs through [`Mixer::row_hook`]
    /// inside the pass that builds the image. `None` when that is not
    /// possible: linear mixing, rows shared between processes, or chunks
    /// of more than one energy row (rows of at most 2048 orbital sites,
    /// whose sums are taken over several rows at once).
    pub fn begin_fused(&mut self, x: &ScatteringSelfEnergy) -> Option<FusedUpdate> {
        let ns = x.sites.max(1);
        if self.own.is_some() || rows_per_chunk(ns) != 1 {
            return None;
        }
        let red_only = self.red_only;
        let rows = (self.rows).get_or_insert_with(|| mixed_rows(x.energies(), red_only, None));
        let len = rows.len() * ns * self.parts;
        match &mut self.state {
            State::Linear => None,
            State::Compact(a) => Some(FusedUpdate(FusedKind::Compact(a.begin(len)))),
            State::Full(a) => Some(FusedUpdate(FusedKind::Full(a.begin(len)))),
        }
    }

    /// True when an update reads the image F(x) on the red rows only (see
    /// [`Mixer::with_rows`]); linear mixing reads every row.
    pub fn reads_red_rows_only(&self) -> bool {
        self.red_only.is_some() && !matches!(self.kind, Mixing::Linear { .. })
    }

    /// The hook that takes pass 1 of `update` row by row.
    pub fn row_hook<'a>(&'a self, update: &'a mut FusedUpdate) -> RowHook<'a> {
        let rows = self.rows.as_deref().expect("rows fixed by begin_fused");
        RowHook(match (&self.state, &mut update.0) {
            (State::Compact(a), FusedKind::Compact(b)) => {
                HookKind::Compact(Hook::new(a, rows, self.parts, b))
            }
            (State::Full(a), FusedKind::Full(b)) => {
                HookKind::Full(Hook::new(a, rows, self.parts, b))
            }
            _ => unreachable!("an update is begun on its own mixer"),
        })
    }

    /// Replace `x` by the next input given its image `fx`, as
    /// [`Mixer::update`] does, once the hook of `update` has taken pass 1
    /// on the rows handed to it, leaving `sums` ([`RowHook::into_sums`]);
    /// any mixed row it was not handed is taken here.
    pub fn finish_fused(
        &mut self,
        update: FusedUpdate,
        sums: Vec<Option<Vec<f64>>>,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
    ) -> &'static str {
        let lay = Layout {
            ns: x.sites.max(1),
            parts: self.parts,
            rows: self.rows.as_deref().expect("rows fixed by begin_fused"),
            per_chunk: 1,
        };
        let mut add = |parts: &[Vec<f64>], width| Ok::<_, Infallible>(add_in_order(parts, width));
        let step = match (&mut self.state, update.0) {
            (State::Compact(a), FusedKind::Compact(b)) => {
                a.finish_rows(b, sums, x, fx, lay, &mut add)
            }
            (State::Full(a), FusedKind::Full(b)) => a.finish_rows(b, sums, x, fx, lay, &mut add),
            _ => unreachable!("an update is begun on its own mixer"),
        };
        match step {
            Ok(step) => step,
            Err(never) => match never {},
        }
    }
}

impl<T: Stored> Anderson<T> {
    fn new(depth: usize, beta: f64) -> Self {
        Self {
            depth,
            beta,
            last: None,
            dr: VecDeque::new(),
            u: VecDeque::new(),
            gram: VecDeque::new(),
            spare: Vec::new(),
            last_norm: f64::INFINITY,
        }
    }

    /// A buffer of `len` numbers whose contents will all be overwritten.
    fn buffer(&mut self, len: usize) -> Vec<T> {
        match self.spare.pop() {
            Some(mut v) => {
                v.resize(len, T::default());
                v
            }
            // Fresh zeroed memory from the allocator: no separate pass that
            // writes zeros before the pass that writes the contents.
            None => vec![T::default(); len],
        }
    }

    /// One Anderson update of `x` (see [`Mixer::update_shared`]).
    fn update<E>(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        lay: Layout<'_>,
        reduce: Reduce<'_, E>,
    ) -> Result<&'static str, E> {
        let mut b = self.begin(lay.rows.len() * lay.ns * lay.parts);
        let parts = self.residual_pass(x, fx, lay, &mut b.r_new, b.pair.as_mut(), b.old);
        self.finish(b, parts, x, fx, lay, reduce)
    }

    /// [`Anderson::finish`] with the sums of pass 1 per chunk in `sums`,
    /// those missing taken here from `x` and `fx`.
    fn finish_rows<E>(
        &mut self,
        mut b: Begun<T>,
        sums: Vec<Option<Vec<f64>>>,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        lay: Layout<'_>,
        reduce: Reduce<'_, E>,
    ) -> Result<&'static str, E> {
        let cl = lay.chunk_len();
        let mut parts = Vec::with_capacity(sums.len());
        for (c, s) in sums.into_iter().enumerate() {
            let s = s.unwrap_or_else(|| {
                let g = c * cl..(c + 1) * cl;
                let (mut r, mut f) = (Vec::with_capacity(cl), Vec::with_capacity(cl));
                lay.gather(x, c, &mut r);
                lay.gather(fx, c, &mut f);
                let pair = (b.pair.as_mut()).map(|(u, d)| (&mut u[g.clone()], &mut d[g.clone()]));
                self.chunk_sums(c * cl, &mut r, &mut f, &mut b.r_new[g.clone()], pair, b.old)
            });
            parts.push(s);
        }
        self.finish(b, parts, x, fx, lay, reduce)
    }

    /// The buffers of an update of `len` numbers (see [`Begun`]).
    fn begin(&mut self, len: usize) -> Begun<T> {
        let r_new = self.buffer(len);
        // The last residual becomes ΔR_new, the last step U_new.
        let pair = self.last.take().map(|(r, dx)| (dx, r));
        let old = if pair.is_some() { self.dr.len() } else { 0 };
        Begun { r_new, pair, old }
    }

    /// The rest of an update once the first pass has left its sums per
    /// chunk in `parts`: the history, the least squares and pass 2.
    fn finish<E>(
        &mut self,
        b: Begun<T>,
        parts: Vec<Vec<f64>>,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        lay: Layout<'_>,
        reduce: Reduce<'_, E>,
    ) -> Result<&'static str, E> {
        let Begun { r_new, pair, old } = b;
        let len = r_new.len();
        let sums = reduce(&parts, 3 + 2 * old)?;
        let norm = sums[0].sqrt();
        let grew = norm > self.last_norm;
        self.last_norm = norm;
        let rhs = self.record_step(&sums, pair, grew, old);
        let m = self.dr.len();
        let gamma = least_squares(&self.gram, &rhs);
        // Pass 2: x_{k+1} = x_k + β r_k − Σ_j γ_j U_j, keeping the step.
        let step = if m == 0 && grew {
            0.5 * self.beta
        } else {
            self.beta
        };
        let mut dx_new = self.buffer(len);
        self.step_pass(x, fx, lay, &gamma, step, &mut dx_new);
        self.last = Some((r_new, dx_new));
        Ok(if m > 0 {
            "anderson"
        } else if grew {
            "restart"
        } else {
            "linear"
        })
    }

    /// Pass 1, per chunk: r = F(x) − x (f64), stored in `r_new`; with a
    /// previous step also ΔR_new = r − r_prev (in r_prev's buffer) and
    /// U_new = ΔX + β ΔR_new (in the last step's buffer). Returns the sums
    /// ‖r‖², ΔR_new·ΔR_new, ΔR_new·r, then ΔR_j·ΔR_new and ΔR_j·r for each
    /// of the `old` stored steps j (ΔR as stored), per chunk of rows.
    fn residual_pass(
        &self,
        x: &ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        lay: Layout<'_>,
        r_new: &mut [T],
        pair: Option<&mut (Vec<T>, Vec<T>)>,
        old: usize,
    ) -> Vec<Vec<f64>> {
        let cl = lay.chunk_len();
        let body = |c: usize, rn: &mut [T], pair: Option<(&mut [T], &mut [T])>| {
            let (mut r, mut f) = (Vec::with_capacity(rn.len()), Vec::with_capacity(rn.len()));
            lay.gather(x, c, &mut r);
            lay.gather(fx, c, &mut f);
            self.chunk_sums(c * cl, &mut r, &mut f, rn, pair, old)
        };
        let parts: Vec<Vec<f64>> = match pair {
            Some((u, d)) => r_new
                .par_chunks_mut(cl)
                .zip(u.par_chunks_mut(cl).zip(d.par_chunks_mut(cl)))
                .enumerate()
                .map(|(c, (rn, (uc, dc)))| body(c, rn, Some((uc, dc))))
                .collect(),
            None => r_new
                .par_chunks_mut(cl)
                .enumerate()
                .map(|(c, rn)| body(c, rn, None))
                .collect(),
        };
        parts
    }

    /// The arithmetic of pass 1 on one chunk, whose numbers start at `at`
    /// in the mixed vector: `r` holds x there and becomes r = F(x) − x,
    /// `f` holds F(x) there (and is overwritten); see
    /// [`Anderson::residual_pass`] for what is stored and summed.
    fn chunk_sums(
        &self,
        at: usize,
        r: &mut [f64],
        f: &mut [f64],
        rn: &mut [T],
        pair: Option<(&mut [T], &mut [T])>,
        old: usize,
    ) -> Vec<f64> {
        let mut acc = vec![0.0; 3 + 2 * old];
        for ((ri, fi), t) in r.iter_mut().zip(&*f).zip(rn.iter_mut()) {
            *ri = fi - *ri;
            *t = T::put(*ri);
        }
        acc[0] = dot2(&*r, &*r, &*r).0;
        if let Some((u, d)) = pair {
            // `f` now holds ΔR_new as stored.
            for ((dv, di), ri) in f.iter_mut().zip(d.iter_mut()).zip(&*r) {
                *di = T::put(ri - di.get());
                *dv = di.get();
            }
            for (ui, dv) in u.iter_mut().zip(&*f) {
                *ui = T::put(ui.get() + self.beta * dv);
            }
            (acc[1], acc[2]) = dot2(&*f, &*f, &*r);
            let g = at..at + rn.len();
            for (j, drj) in self.dr.iter().enumerate() {
                (acc[3 + 2 * j], acc[4 + 2 * j]) = dot2(&drj[g.clone()], &*f, &*r);
            }
        }
        acc
    }

    /// Keep the step just formed (`pair`: U_new and ΔR_new) in the
    /// history, or drop the whole history when the residual grew; returns
    /// ΔR_j·r for the steps kept.
    fn record_step(
        &mut self,
        sums: &[f64],
        mut pair: Option<(Vec<T>, Vec<T>)>,
        grew: bool,
        old: usize,
    ) -> Vec<f64> {
        let mut rhs: Vec<f64> = (0..old).map(|j| sums[4 + 2 * j]).collect();
        if grew {
            // Drop the whole history, the step just formed included.
            self.spare.extend(self.dr.drain(..));
            self.spare.extend(self.u.drain(..));
            self.gram.clear();
            rhs.clear();
            if let Some((u, d)) = pair.take() {
                self.spare.push(u);
                self.spare.push(d);
            }
        } else if let Some((u_new, dr_new)) = pair.take() {
            if self.depth > 0 {
                for (j, row) in self.gram.iter_mut().enumerate() {
                    row.push_back(sums[3 + 2 * j]);
                }
                let mut row: VecDeque<f64> = (0..old).map(|j| sums[3 + 2 * j]).collect();
                row.push_back(sums[1]);
                self.gram.push_back(row);
                self.dr.push_back(dr_new);
                self.u.push_back(u_new);
                rhs.push(sums[2]);
                if self.dr.len() > self.depth {
                    self.spare.push(self.dr.pop_front().expect("non-empty"));
                    self.spare.push(self.u.pop_front().expect("non-empty"));
                    self.gram.pop_front();
                    for row in &mut self.gram {
                        row.pop_front();
                    }
                    rhs.remove(0);
                }
            } else {
                self.spare.push(u_new);
                self.spare.push(dr_new);
            }
        }
        rhs
    }

    /// Pass 2: x ← x + step·r − Σ_j γ_j U_j on the mixed rows, with
    /// r = F(x) − x recomputed in f64; the step taken, new x − old x, is
    /// stored in `dx_new`.
    fn step_pass(
        &self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
        lay: Layout<'_>,
        gamma: &[f64],
        step: f64,
        dx_new: &mut [T],
    ) {
        let (ns, parts, cl) = (lay.ns, lay.parts, lay.chunk_len());
        let mut want = lay.rows.iter().peekable();
        let mut sel: Vec<(&mut [C64], &mut [f64])> = Vec::with_capacity(lay.rows.len());
        for (k, row) in x
            .retarded
            .chunks_mut(ns)
            .zip(x.inscatter.chunks_mut(ns))
            .enumerate()
        {
            if want.next_if_eq(&&k).is_some() {
                sel.push(row);
            }
        }
        let u = &self.u;
        sel.par_chunks_mut(lay.per_chunk)
            .zip(dx_new.par_chunks_mut(cl))
            .enumerate()
            .for_each(|(c, (rs, dxc))| {
                let mut xs = Vec::with_capacity(dxc.len());
                for (zr, zi) in rs.iter() {
                    for (z, v) in zr.iter().zip(zi.iter()) {
                        if parts == 3 {
                            xs.extend_from_slice(&[z.re, z.im, *v]);
                        } else {
                            xs.extend_from_slice(&[z.im, *v]);
                        }
                    }
                }
                let mut next = Vec::with_capacity(dxc.len());
                lay.gather(fx, c, &mut next);
                for (n, xo) in next.iter_mut().zip(&xs) {
                    *n = xo + step * (*n - xo);
                }
                let g = c * cl..c * cl + dxc.len();
                for (uj, &gj) in u.iter().zip(gamma) {
                    if gj != 0.0 {
                        for (v, w) in next.iter_mut().zip(&uj[g.clone()]) {
                            *v -= gj * w.get();
                        }
                    }
                }
                for ((t, n), xo) in dxc.iter_mut().zip(&next).zip(&xs) {
                    *t = T::put(n - xo);
                }
                let first = c * lay.per_chunk;
                write_back(rs, &next, parts, &lay.rows[first..], ns, fx);
            });
    }
}

/// Write the mixed numbers `next` into the rows `rs` (energy rows `ks`);
/// with two parts Re Σ^r_0 is taken from the image `fx`.
fn write_back(
    rs: &mut [(&mut [C64], &mut [f64])],
    next: &[f64],
    parts: usize,
    ks: &[usize],
    ns: usize,
    fx: &ScatteringSelfEnergy,
) {
    let mut vals = next.chunks_exact(parts);
    for ((zr, zi), &k) in rs.iter_mut().zip(ks) {
        let fre = &fx.retarded[k * ns..(k + 1) * ns];
        for ((z, v), f) in zr.iter_mut().zip(zi.iter_mut()).zip(fre) {
            let t = vals.next().expect("one value per mixed number");
            if parts == 3 {
                *z = C64::new(t[0], t[1]);
                *v = t[2];
            } else {
                *z = C64::new(f.re, t[0]);
                *v = t[1];
            }
        }
    }
}

/// x ← x + factor·(F(x) − x) on every number.
fn linear_step(x: &mut ScatteringSelfEnergy, fx: &ScatteringSelfEnergy, factor: f64) {
    x.retarded
        .par_iter_mut()
        .zip(x.inscatter.par_iter_mut())
        .zip(fx.retarded.par_iter().zip(&fx.inscatter))
        .for_each(|((r, i), (fr, fi))| {
            *r += (fr - *r) * factor;
            *i += factor * (fi - *i);
        });
}

/// [`linear_step`] on the energy rows k (of `ns` values) with `own[k]`
/// true.
fn linear_step_rows(
    x: &mut ScatteringSelfEnergy,
    fx: &ScatteringSelfEnergy,
    factor: f64,
    ns: usize,
    own: &[bool],
) {
    x.retarded
        .par_chunks_mut(ns)
        .zip(x.inscatter.par_chunks_mut(ns))
        .zip(fx.retarded.par_chunks(ns).zip(fx.inscatter.par_chunks(ns)))
        .enumerate()
        .filter(|(k, _)| own.get(*k).copied().unwrap_or(false))
        .for_each(|(_, ((xr, xi), (fr, fi)))| {
            for ((r, i), (fr, fi)) in xr.iter_mut().zip(xi.iter_mut()).zip(fr.iter().zip(fi)) {
                *r += (fr - *r) * factor;
                *i += factor * (fi - *i);
            }
        });
}

/// (a·b, a·c) in one pass over a, with four partial sums each (so that the
/// loop vectorises), added in a fixed order.
fn dot2<A: Stored>(a: &[A], b: &[f64], c: &[f64]) -> (f64, f64) {
    let mut s = [0.0; 4];
    let mut t = [0.0; 4];
    let n = a.len() / 4 * 4;
    for ((x, y), z) in a[..n]
        .chunks_exact(4)
        .zip(b[..n].chunks_exact(4))
        .zip(c[..n].chunks_exact(4))
    {
        for l in 0..4 {
            let xl = x[l].get();
            s[l] += xl * y[l];
            t[l] += xl * z[l];
        }
    }
    let mut ab = (s[0] + s[1]) + (s[2] + s[3]);
    let mut ac = (t[0] + t[1]) + (t[2] + t[3]);
    for i in n..a.len() {
        ab += a[i].get() * b[i];
        ac += a[i].get() * c[i];
    }
    (ab, ac)
}

/// Least squares min ‖r − ΔR γ‖ from the Gram matrix and ΔR·r, by a
/// Cholesky factorisation that drops columns whose pivot falls below 1e-14
/// of their squared norm (numerically dependent differences).
fn least_squares(gram: &VecDeque<VecDeque<f64>>, rhs: &[f64]) -> Vec<f64> {
    let m = rhs.len();
    let mut gamma = vec![0.0; m];
    let mut l = vec![vec![0.0; m]; m];
    let mut kept = vec![false; m];
    for j in 0..m {
        let mut d = gram[j][j];
        for k in 0..j {
            if kept[k] {
                d -= l[j][k] * l[j][k];
            }
        }
        if d <= 1e-14 * gram[j][j] || d <= 0.0 {
            continue;
        }
        kept[j] = true;
        let dj = d.sqrt();
        l[j][j] = dj;
        for i in j + 1..m {
            let mut s = gram[i][j];
            for k in 0..j {
                if kept[k] {
                    s -= l[i][k] * l[j][k];
                }
            }
            l[i][j] = s / dj;
        }
    }
    let mut y = vec![0.0; m];
    for i in 0..m {
        if kept[i] {
            let mut s = rhs[i];
            for k in 0..i {
                if kept[k] {
                    s -= l[i][k] * y[k];
                }
            }
            y[i] = s / l[i][i];
        }
    }
    for i in (0..m).rev() {
        if kept[i] {
            let mut s = y[i];
            for k in i + 1..m {
                if kept[k] {
                    s -= l[k][i] * gamma[k];
                }
            }
            gamma[i] = s / l[i][i];
        }
    }
    gamma
}

#[cfg(test)]
mod tests {
    use super::*;

    fn state(v: &[f64]) -> ScatteringSelfEnergy {
        let n = v.len() / 3;
        let mut s = ScatteringSelfEnergy::zeros(1, n);
        unflatten(v, &mut s);
        s
    }

    fn unflatten(v: &[f64], s: &mut ScatteringSelfEnergy) {
        let n = s.inscatter.len();
        for i in 0..n {
            s.retarded[i] = C64::new(v[i], v[n + i]);
            s.inscatter[i] = v[2 * n + i];
        }
    }

    fn flat(s: &ScatteringSelfEnergy) -> Vec<f64> {
        let mut v: Vec<f64> = s.retarded.iter().map(|z| z.re).collect();
        v.extend(s.retarded.iter().map(|z| z.im));
        v.extend_from_slice(&s.inscatter);
        v
    }

    #[test]
    fn a_growing_residual_drops_the_history_and_damps_the_step() {
        let beta = 0.8;
        let mut m = Mixer::new(Mixing::Anderson {
            depth: 4,
            damping: beta,
        });
        let mut x = state(&[0.0; 6]);
        assert_eq!(m.update(&mut x, &state(&[1.0; 6])), "linear");
        // Residual 10 per element: larger than the first one (1).
        let x0 = flat(&x);
        let fx: Vec<f64> = x0.iter().map(|v| v + 10.0).collect();
        assert_eq!(m.update(&mut x, &state(&fx)), "restart");
        for (a, b) in flat(&x).iter().zip(&x0) {
            assert!((a - (b + 0.5 * beta * 10.0)).abs() < 1e-14);
        }
        // With a shrinking residual the history builds up again.
        let x1 = flat(&x);
        let fx: Vec<f64> = x1.iter().map(|v| v + 1.0).collect();
        assert_eq!(m.update(&mut x, &state(&fx)), "anderson");
    }

    /// F(x) = A x + c with a contraction A whose slowest mode decays by
    /// 0.95 per step: linear mixing crawls, Anderson solves the linear
    /// problem in about as many steps as A has distinct eigenvalues.
    #[test]
    fn anderson_beats_linear_mixing_on_a_linear_map() {
        let eig = [0.95, 0.5, -0.3, 0.1, 0.8, 0.0];
        let c = [1.0, -2.0, 0.5, 3.0, 0.25, -1.0];
        let f = |x: &[f64]| -> Vec<f64> { (0..6).map(|i| eig[i] * x[i] + c[i]).collect() };
        let fixed: Vec<f64> = (0..6).map(|i| c[i] / (1.0 - eig[i])).collect();
        let run = |kind: Mixing| {
            let mut m = Mixer::new(kind);
            let mut x = state(&[0.0; 6]);
            for it in 1..=2000 {
                let fx = f(&flat(&x));
                let err = flat(&x)
                    .iter()
                    .zip(&fixed)
                    .map(|(a, b)| (a - b).abs())
                    .fold(0.0, f64::max);
                if err < 1e-10 {
                    return it;
                }
                m.update(&mut x, &state(&fx));
            }
            usize::MAX
        };
        let anderson = run(Mixing::Anderson {
            depth: 6,
            damping: 0.8,
        });
        let linear = run(Mixing::Linear { factor: 1.0 });
        assert!(anderson <= 20, "anderson took {anderson}");
        assert!(
            linear > 5 * anderson,
            "linear {linear} vs anderson {anderson}"
        );
    }

    /// With Re Σ^r_0 zero in every image, leaving it out of the mixed
    /// vector changes nothing but rounding; a non-zero real part of the
    /// start is replaced by the image's zero.
    #[test]
    fn leaving_out_a_zero_real_part_gives_the_same_iterates() {
        // Sites: 4; F(x) = A x + c on (Im, in), Re part of F always zero.
        let eig = [0.9, -0.6, 0.3, 0.7, -0.2, 0.5, 0.1, 0.8];
        let c = [1.0, -2.0, 0.5, 3.0, 0.25, -1.0, 2.0, -0.5];
        let f = |x: &[f64]| -> Vec<f64> {
            let mut out = vec![0.0; 12];
            for i in 0..8 {
                out[4 + i] = eig[i] * x[4 + i] + c[i];
            }
            state(&out)
                .retarded
                .iter()
                .for_each(|z| assert_eq!(z.re, 0.0));
            out
        };
        let kind = Mixing::Anderson {
            depth: 3,
            damping: 1.0,
        };
        // Full history: the compact one rounds the two layouts' histories
        // at different moments (their inner products add in other orders).
        let mut three = Mixer::with_rows(kind, true, MixerHistory::Full, None);
        let mut two = Mixer::with_rows(kind, false, MixerHistory::Full, None);
        let mut x3 = state(&[0.0; 12]);
        let mut x2 = state(&[0.0; 12]);
        for _ in 0..12 {
            let (f3, f2) = (f(&flat(&x3)), f(&flat(&x2)));
            let s3 = three.update(&mut x3, &state(&f3));
            let s2 = two.update(&mut x2, &state(&f2));
            assert_eq!(s3, s2);
            for (a, b) in flat(&x3).iter().zip(&flat(&x2)) {
                assert!((a - b).abs() <= 1e-12 * (1.0 + a.abs()), "{a} vs {b}");
            }
        }
        // A start with a real part (say, warm from a case with dephasing).
        let mut two = Mixer::with_real_part(kind, false);
        let mut start = vec![0.0; 12];
        start[..4].copy_from_slice(&[0.5, -0.25, 1.0, 2.0]);
        let mut x = state(&start);
        for _ in 0..3 {
            let fx = f(&flat(&x));
            two.update(&mut x, &state(&fx));
            assert!(flat(&x)[..4].iter().all(|&v| v == 0.0));
        }
    }

    /// With every black row overwritten by a function of the red rows
    /// before F is applied (as the red-black loop does), a black residual
    /// is zero and a mixed black value is thrown away: mixing the red rows
    /// only gives the same red rows as mixing all of them.
    #[test]
    fn mixing_only_the_red_rows_gives_the_same_red_rows() {
        let (ne, ns) = (4, 2);
        let at = |k: usize, s: usize| k * ns + s;
        // Band width 1: rows 0 and 2 are red, 1 and 3 black.
        let black_from_red = |x: &mut ScatteringSelfEnergy| {
            for s in 0..ns {
                for k in [1, 3] {
                    let v = 0.3 * x.inscatter[at(k - 1, s)] + 0.1;
                    x.inscatter[at(k, s)] = v;
                    x.retarded[at(k, s)] = C64::new(0.0, -0.2 * v);
                }
            }
        };
        let f = |x: &ScatteringSelfEnergy| {
            let mut y = x.clone();
            for s in 0..ns {
                for k in [0, 2] {
                    let b = x.inscatter[at(k + 1, s)];
                    let v = 0.5 * b + 0.2 * x.inscatter[at(k, s)] + 1.0 + s as f64;
                    y.inscatter[at(k, s)] = v;
                    y.retarded[at(k, s)] = C64::new(0.0, -0.7 * v + 0.1 * x.retarded[at(k, s)].im);
                }
            }
            y
        };
        let kind = Mixing::Anderson {
            depth: 3,
            damping: 1.0,
        };
        let mut all = Mixer::with_rows(kind, false, MixerHistory::Full, None);
        let mut red = Mixer::with_rows(kind, false, MixerHistory::Full, Some(1));
        let mut xa = ScatteringSelfEnergy::zeros(ne, ns);
        let mut xr = ScatteringSelfEnergy::zeros(ne, ns);
        for _ in 0..8 {
            black_from_red(&mut xa);
            black_from_red(&mut xr);
            let (fa, fr) = (f(&xa), f(&xr));
            assert_eq!(all.update(&mut xa, &fa), red.update(&mut xr, &fr));
            for k in [0, 2] {
                for s in 0..ns {
                    let (a, b) = (xa.inscatter[at(k, s)], xr.inscatter[at(k, s)]);
                    assert!((a - b).abs() <= 1e-12 * (1.0 + a.abs()), "{a} vs {b}");
                    let (a, b) = (xa.retarded[at(k, s)].im, xr.retarded[at(k, s)].im);
                    assert!((a - b).abs() <= 1e-12 * (1.0 + a.abs()), "{a} vs {b}");
                }
            }
        }
    }

    /// The first pass taken row by row through the hook ([`Mixer::begin_fused`])
    /// gives the iterates of [`Mixer::update`] bit for bit, for both history
    /// precisions, with red rows only, and also when some mixed rows are never
    /// handed to the hook (they are then taken in `finish_fused`). Rows of
    /// 3000 sites, so that each chunk is one row and the hook applies.
    #[test]
    fn the_fused_first_pass_gives_the_same_bits() {
        let (ne, ns) = (6, 3000);
        assert_eq!(rows_per_chunk(ns), 1, "the hook needs one row per chunk");
        let f = |x: &ScatteringSelfEnergy| {
            let mut y = x.clone();
            for i in 0..ne * ns {
                let e = 0.9 - 0.3 * ((i * 7919) % 101) as f64 / 100.0;
                let v = e * x.inscatter[i] + 0.05 * x.inscatter[i].powi(2) + 1.0 + (i % 13) as f64;
                y.inscatter[i] = v;
                y.retarded[i] = C64::new(0.0, -0.5 * v + 0.1 * e * x.retarded[i].im);
            }
            y
        };
        let kind = Mixing::Anderson {
            depth: 3,
            damping: 0.8,
        };
        for history in [MixerHistory::Compact, MixerHistory::Full] {
            for (red_only, skip) in [(None, None), (Some(1), None), (Some(1), Some(2))] {
                let mut plain = Mixer::with_rows(kind, false, history, red_only);
                let mut fused = Mixer::with_rows(kind, false, history, red_only);
                let (mut xp, mut xf) = (
                    ScatteringSelfEnergy::zeros(ne, ns),
                    ScatteringSelfEnergy::zeros(ne, ns),
                );
                for it in 0..8 {
                    let (fp, ff) = (f(&xp), f(&xf));
                    let want = plain.update(&mut xp, &fp);
                    let mut u = fused.begin_fused(&xf).expect("fusable");
                    let hook = fused.row_hook(&mut u);
                    for k in (0..ne).filter(|&k| Some(k) != skip) {
                        let at = k * ns..(k + 1) * ns;
                        hook.row(k, &xf, &ff.retarded[at.clone()], &ff.inscatter[at]);
                    }
                    let sums = hook.into_sums();
                    let got = fused.finish_fused(u, sums, &mut xf, &ff);
                    assert_eq!(want, got, "{history:?} {red_only:?} {skip:?} step {it}");
                    let bits = |x: &ScatteringSelfEnergy| -> Vec<u64> {
                        flat(x).iter().map(|v| v.to_bits()).collect()
                    };
                    assert!(
                        bits(&xp) == bits(&xf),
                        "{history:?} {red_only:?} {skip:?} step {it}"
                    );
                }
                assert_ne!(flat(&xp), flat(&ScatteringSelfEnergy::zeros(ne, ns)));
            }
        }
    }

    /// Two processes, each mixing half of the energy rows and adding their
    /// partial sums in rank order, take the steps of one mixer of every
    /// row: the same step names, and iterates equal to rounding (the
    /// inner products are added in another order, so 1e-12 relative, well
    /// above the ~1e-15 that reordering a handful of sums can change).
    #[test]
    fn rows_shared_by_two_processes_mix_as_one() {
        let (ne, ns) = (4, 3);
        let eig: Vec<f64> = (0..ne * ns).map(|i| 0.9 - 0.13 * i as f64).collect();
        let f = |x: &ScatteringSelfEnergy| {
            let mut y = x.clone();
            for i in 0..ne * ns {
                let v = eig[i] * x.inscatter[i] + 1.0 + i as f64;
                y.inscatter[i] = v;
                y.retarded[i] = C64::new(0.0, -0.5 * v + 0.1 * eig[i] * x.retarded[i].im);
            }
            y
        };
        let kind = Mixing::Anderson {
            depth: 3,
            damping: 0.7,
        };
        let steps = 10;
        let mut one = Mixer::with_rows(kind, false, MixerHistory::Full, None);
        let mut x = ScatteringSelfEnergy::zeros(ne, ns);
        let mut want = Vec::new();
        for _ in 0..steps {
            let fx = f(&x);
            want.push((one.update(&mut x, &fx), x.clone()));
        }
        let (to_one, from_zero) = std::sync::mpsc::channel::<Vec<f64>>();
        let (to_zero, from_one) = std::sync::mpsc::channel::<Vec<f64>>();
        let run = |rank: usize,
                   send: std::sync::mpsc::Sender<Vec<f64>>,
                   recv: std::sync::mpsc::Receiver<Vec<f64>>| {
            let mut m = Mixer::with_rows(kind, false, MixerHistory::Full, None);
            m.share_rows((0..ne).map(|k| (k < 2) == (rank == 0)).collect());
            let mut x = ScatteringSelfEnergy::zeros(ne, ns);
            let mut got = Vec::new();
            for _ in 0..steps {
                let fx = f(&x);
                let mut reduce = |parts: &[Vec<f64>], width: usize| -> Result<Vec<f64>, ()> {
                    let sums = add_in_order(parts, width);
                    send.send(sums.clone()).map_err(|_| ())?;
                    let theirs = recv.recv().map_err(|_| ())?;
                    let (a, b) = if rank == 0 {
                        (sums, theirs)
                    } else {
                        (theirs, sums)
                    };
                    Ok(add_in_order(&[a, b], width))
                };
                let step = m.update_shared(&mut x, &fx, &mut reduce).unwrap();
                got.push((step, x.clone()));
            }
            got
        };
        let (zero, one_) = std::thread::scope(|s| {
            let a = s.spawn(|| run(0, to_one, from_one));
            let b = s.spawn(|| run(1, to_zero, from_zero));
            (a.join().unwrap(), b.join().unwrap())
        });
        for (it, (w, (z, o))) in want.iter().zip(zero.iter().zip(&one_)).enumerate() {
            assert_eq!((w.0, w.0), (z.0, o.0), "step {it}");
            for k in 0..ne {
                let mine = if k < 2 { &z.1 } else { &o.1 };
                for i in k * ns..(k + 1) * ns {
                    let (a, b) = (w.1.inscatter[i], mine.inscatter[i]);
                    assert!(
                        (a - b).abs() <= 1e-12 * a.abs().max(1.0),
                        "step {it}: {a} vs {b}"
                    );
                    let (a, b) = (w.1.retarded[i].im, mine.retarded[i].im);
                    assert!(
                        (a - b).abs() <= 1e-12 * a.abs().max(1.0),
                        "step {it}: {a} vs {b}"
                    );
                }
            }
        }
    }

    /// The compact history reaches the fixed point of the linear map to
    /// the same 1e-10 as the full one, in about as many steps: rounding the
    /// history changes the search directions, never the fixed point.
    #[test]
    fn compact_history_reaches_the_same_fixed_point() {
        let eig = [0.95, 0.5, -0.3, 0.1, 0.8, 0.0];
        let c = [1.0, -2.0, 0.5, 3.0, 0.25, -1.0];
        let fixed: Vec<f64> = (0..6).map(|i| c[i] / (1.0 - eig[i])).collect();
        let run = |h: MixerHistory| {
            let kind = Mixing::Anderson {
                depth: 6,
                damping: 0.8,
            };
            let mut m = Mixer::with_rows(kind, true, h, None);
            let mut x = state(&[0.0; 6]);
            for it in 1..=200 {
                let v = flat(&x);
                let err = (0..6).map(|i| (v[i] - fixed[i]).abs()).fold(0.0, f64::max);
                if err < 1e-10 {
                    return it;
                }
                let fx: Vec<f64> = (0..6).map(|i| eig[i] * v[i] + c[i]).collect();
                m.update(&mut x, &state(&fx));
            }
            usize::MAX
        };
        let (compact, full) = (run(MixerHistory::Compact), run(MixerHistory::Full));
        assert!(full <= 20, "full took {full}");
        assert!(compact <= full + 3, "compact {compact}, full {full}");
    }
}

//! Where a sweep keeps its finished points, so that an interrupted sweep
//! recomputes only what is missing.
//!
//! The sweep sees its store through [`PointStore`]: one row of numbers per
//! finished point and, for sweeps that warm-start the Born loop, the
//! converged Σ0 of the latest points of each line (and, when the potential
//! is solved at every point, their potentials). A store must make a
//! point it has accepted durable before `put_row` returns (the sweep
//! reports a point only after that), and must never return a row it did
//! not receive whole. The result folder's implementation, one file per
//! point written atomically, is `crate::output::sweep::PointFolder`;
//! [`MemoryStore`] keeps points in memory.
//!
//! A sweep's [`fingerprint`] hashes the case text, the grid and the task,
//! so a store keyed by it never mixes the results of a changed command with
//! those of an old one.

use crate::scattering::ScatteringSelfEnergy;
use std::collections::BTreeMap;
use std::sync::Mutex;

/// Why a store could not keep a point (the store's own error, such as a
/// failed file write, with the path in its message).
pub type StoreError = Box<dyn std::error::Error + Send + Sync>;

/// The finished points of one sweep, by grid index. Called from the
/// sweep's worker threads.
pub trait PointStore: Sync {
    /// The stored row of point `index`, if it is there and has `width`
    /// numbers.
    fn row(&self, index: usize, width: usize) -> Option<Vec<f64>>;
    /// Keep the row of point `index` durably.
    fn put_row(&self, index: usize, row: &[f64]) -> Result<(), StoreError>;
    /// The stored Σ0 of point `index`, if any.
    fn sigma(&self, index: usize) -> Option<ScatteringSelfEnergy>;
    /// Keep the Σ0 of point `index` (exact bits).
    fn put_sigma(&self, index: usize, sigma: &ScatteringSelfEnergy) -> Result<(), StoreError>;
    /// Forget the Σ0 of point `index` (nothing happens when it is absent).
    fn remove_sigma(&self, index: usize);
    /// The stored electrostatic potential (eV per cell) of point `index`,
    /// if any (sweeps that solve the potential at every point).
    fn potential(&self, index: usize) -> Option<Vec<f64>>;
    /// Keep the potential of point `index` (exact bits).
    fn put_potential(&self, index: usize, potential_ev: &[f64]) -> Result<(), StoreError>;
    /// Forget the potential of point `index` (nothing happens when it is
    /// absent).
    fn remove_potential(&self, index: usize);
    /// Where the points are kept, for summaries (a folder, "memory", …).
    fn location(&self) -> String;
}

/// A store in memory: points live as long as the value (tests, or a
/// library user who does not need to resume).
#[derive(Debug, Default)]
pub struct MemoryStore {
    rows: Mutex<BTreeMap<usize, Vec<f64>>>,
    sigmas: Mutex<BTreeMap<usize, ScatteringSelfEnergy>>,
    potentials: Mutex<BTreeMap<usize, Vec<f64>>>,
}

impl MemoryStore {
    /// An empty store.
    pub fn new() -> Self {
        Self::default()
    }

    /// Indices of the stored rows, ascending.
    pub fn stored_rows(&self) -> Vec<usize> {
        lock(&self.rows).keys().copied().collect()
    }

    /// Indices of the stored Σ0, ascending.
    pub fn stored_sigmas(&self) -> Vec<usize> {
        lock(&self.sigmas).keys().copied().collect()
    }

    /// Indices of the stored potentials, ascending.
    pub fn stored_potentials(&self) -> Vec<usize> {
        lock(&self.potentials).keys().copied().collect()
    }

    /// Forget the row of point `index` (as if that point had never
    /// finished).
    pub fn remove_row(&self, index: usize) {
        lock(&self.rows).remove(&index);
    }
}

/// The data behind a lock even when another thread panicked holding it
/// (every write is a single insert or remove, so it is whole).
fn lock<T>(m: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    m.lock().unwrap_or_else(|p| p.into_inner())
}

impl PointStore for MemoryStore {
    fn row(&self, index: usize, width: usize) -> Option<Vec<f64>> {
        lock(&self.rows)
            .get(&index)
            .filter(|r| r.len() == width)
            .cloned()
    }

    fn put_row(&self, index: usize, row: &[f64]) -> Result<(), StoreError> {
        lock(&self.rows).insert(index, row.to_vec());
        Ok(())
    }

    fn sigma(&self, index: usize) -> Option<ScatteringSelfEnergy> {
        lock(&self.sigmas).get(&index).cloned()
    }

    fn put_sigma(&self, index: usize, sigma: &ScatteringSelfEnergy) -> Result<(), StoreError> {
        lock(&self.sigmas).insert(index, sigma.clone());
        Ok(())
    }

    fn remove_sigma(&self, index: usize) {
        lock(&self.sigmas).remove(&index);
    }

    fn potential(&self, index: usize) -> Option<Vec<f64>> {
        lock(&self.potentials).get(&index).cloned()
    }

    fn put_potential(&self, index: usize, potential_ev: &[f64]) -> Result<(), StoreError> {
        lock(&self.potentials).insert(index, potential_ev.to_vec());
        Ok(())
    }

    fn remove_potential(&self, index: usize) {
        lock(&self.potentials).remove(&index);
    }

    fn location(&self) -> String {
        "memory".into()
    }
}

/// FNV-1a, 64 bit: a stable hash (the standard library's hasher is not
/// guaranteed stable across releases, and the fingerprint names stores
/// that outlive the process).
pub fn fingerprint(parts: &[&str]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for p in parts {
        for b in p.bytes().chain(std::iter::once(0xff)) {
            h ^= b as u64;
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
    }
    h
}

/// The text of a number inside a fingerprint: the shortest text that
/// reads back to the same f64. Fingerprints name the stores of earlier
/// runs, so this text must never change, whatever the display format of
/// numbers in result files becomes.
pub(crate) fn exact_text(v: f64) -> String {
    if v.is_finite() {
        format!("{v:e}")
    } else {
        v.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fingerprint_separates_parts() {
        assert_ne!(fingerprint(&["ab", "c"]), fingerprint(&["a", "bc"]));
        assert_eq!(fingerprint(&["x"]), fingerprint(&["x"]));
    }

    /// The fingerprint of fixed text is pinned: a change here would orphan
    /// the stores of every earlier sweep.
    #[test]
    fn fingerprint_and_number_text_are_stable() {
        assert_eq!(fingerprint(&["0.1.0", "case"]), 0x311f_3a4b_9520_9caa);
        assert_eq!(exact_text(0.1), "1e-1");
        assert_eq!(exact_text(-300.0), "-3e2");
        assert_eq!(exact_text(f64::NAN), "NaN");
        assert_eq!(exact_text(1.0 / 3.0).parse::<f64>().unwrap(), 1.0 / 3.0);
    }

    #[test]
    fn memory_store_keeps_rows_of_the_asked_width() {
        let s = MemoryStore::new();
        s.put_row(3, &[1.0, 2.0]).unwrap();
        assert_eq!(s.row(3, 2), Some(vec![1.0, 2.0]));
        assert_eq!(s.row(3, 3), None);
        assert_eq!(s.row(4, 2), None);
        assert_eq!(s.stored_rows(), vec![3]);
    }
}

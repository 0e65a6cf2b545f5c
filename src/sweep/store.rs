//! Durable per-point storage of a sweep, so that an interrupted sweep
//! recomputes only what is missing.
//!
//! Layout under the result folder: `points/<fingerprint>/`, one file per
//! finished point (`<index>.row`, the row's numbers in shortest round-trip
//! text) and, for sweeps that warm-start the Born loop, the converged Σ0 of
//! the latest points of each line (`<index>.sigma`, raw little-endian
//! doubles). Every file is written to a temporary name, synced and renamed
//! ([`crate::output::atomic_write`]), so a file that exists is whole. The
//! fingerprint hashes the case text, the grid and the task, so a changed
//! command never mixes its results with an old one.
//!
//! The result folder's manifest lists the store before its first point is
//! written ([`crate::output::manifest::claim_store`]), so no other command
//! takes it for somebody else's files or removes it.

use crate::C64;
use crate::output::{OutputError, atomic_write, format_number};
use crate::scattering::ScatteringSelfEnergy;
use std::path::{Path, PathBuf};

/// FNV-1a, 64 bit: a stable hash (the standard library's hasher is not
/// guaranteed stable across releases, and the fingerprint names folders
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

/// Name of the folder holding the point stores inside a result folder.
pub const STORE_FOLDER: &str = "points";

/// The stored points of one sweep.
#[derive(Clone, Debug)]
pub struct PointStore {
    dir: PathBuf,
}

impl PointStore {
    /// Open (creating) the store of sweep `fingerprint` below `result_dir`.
    pub fn open(result_dir: &Path, fingerprint: u64) -> Result<Self, OutputError> {
        let dir = result_dir
            .join(STORE_FOLDER)
            .join(format!("{fingerprint:016x}"));
        std::fs::create_dir_all(&dir).map_err(|source| OutputError::Io {
            action: "creating",
            path: dir.clone(),
            source,
        })?;
        Ok(Self { dir })
    }

    /// The folder holding the point files.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    fn row_path(&self, index: usize) -> PathBuf {
        self.dir.join(format!("{index:08}.row"))
    }

    fn sigma_path(&self, index: usize) -> PathBuf {
        self.dir.join(format!("{index:08}.sigma"))
    }

    /// The stored row of point `index`, if it is there and has `width`
    /// numbers.
    pub fn row(&self, index: usize, width: usize) -> Option<Vec<f64>> {
        let text = std::fs::read_to_string(self.row_path(index)).ok()?;
        let row: Option<Vec<f64>> = text
            .trim_end()
            .split(',')
            .map(|s| s.parse::<f64>().ok())
            .collect();
        row.filter(|r| r.len() == width)
    }

    /// Store the row of point `index` durably.
    pub fn put_row(&self, index: usize, row: &[f64]) -> Result<(), OutputError> {
        let mut text = row
            .iter()
            .map(|v| format_number(*v))
            .collect::<Vec<_>>()
            .join(",");
        text.push('\n');
        atomic_write(&self.row_path(index), text.as_bytes())
    }

    /// The stored Σ0 of point `index`, if any.
    pub fn sigma(&self, index: usize) -> Option<ScatteringSelfEnergy> {
        let bytes = std::fs::read(self.sigma_path(index)).ok()?;
        decode_sigma(&bytes)
    }

    /// Store the Σ0 of point `index` durably (exact bits).
    pub fn put_sigma(&self, index: usize, s: &ScatteringSelfEnergy) -> Result<(), OutputError> {
        atomic_write(&self.sigma_path(index), &encode_sigma(s))
    }

    /// Forget the Σ0 of point `index` (no error when it is absent).
    pub fn remove_sigma(&self, index: usize) {
        let _ = std::fs::remove_file(self.sigma_path(index));
    }
}

fn encode_sigma(s: &ScatteringSelfEnergy) -> Vec<u8> {
    let n = s.inscatter.len();
    let mut out = Vec::with_capacity(16 + 24 * n);
    out.extend_from_slice(&(s.sites as u64).to_le_bytes());
    out.extend_from_slice(&(n as u64).to_le_bytes());
    for z in &s.retarded {
        out.extend_from_slice(&z.re.to_le_bytes());
        out.extend_from_slice(&z.im.to_le_bytes());
    }
    for v in &s.inscatter {
        out.extend_from_slice(&v.to_le_bytes());
    }
    out
}

fn decode_sigma(b: &[u8]) -> Option<ScatteringSelfEnergy> {
    let word = |i: usize| -> Option<[u8; 8]> { b.get(8 * i..8 * i + 8)?.try_into().ok() };
    let sites = u64::from_le_bytes(word(0)?) as usize;
    let n = u64::from_le_bytes(word(1)?) as usize;
    if b.len() != 16 + 24 * n {
        return None;
    }
    let f = |i: usize| f64::from_le_bytes(word(i).expect("length checked"));
    let retarded = (0..n)
        .map(|k| C64::new(f(2 + 2 * k), f(3 + 2 * k)))
        .collect();
    let inscatter = (0..n).map(|k| f(2 + 2 * n + k)).collect();
    Some(ScatteringSelfEnergy {
        sites,
        retarded,
        inscatter,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sigma_round_trip_is_exact() {
        let s = ScatteringSelfEnergy {
            sites: 2,
            retarded: vec![C64::new(0.1, -1e-300), C64::new(-3.0, 1.0 / 3.0)],
            inscatter: vec![std::f64::consts::PI, -0.0],
        };
        let back = decode_sigma(&encode_sigma(&s)).unwrap();
        assert_eq!(back.sites, 2);
        assert_eq!(back.retarded, s.retarded);
        assert_eq!(
            back.inscatter
                .iter()
                .map(|v| v.to_bits())
                .collect::<Vec<_>>(),
            s.inscatter.iter().map(|v| v.to_bits()).collect::<Vec<_>>()
        );
        assert!(decode_sigma(&encode_sigma(&s)[..20]).is_none());
    }

    #[test]
    fn fingerprint_separates_parts() {
        assert_ne!(fingerprint(&["ab", "c"]), fingerprint(&["a", "bc"]));
        assert_eq!(fingerprint(&["x"]), fingerprint(&["x"]));
    }
}

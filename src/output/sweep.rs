//! Files of a sweep: the point store folder and the table.
//!
//! The point store keeps a sweep's finished points in its result folder,
//! under `points/<fingerprint>/`: one file per finished point
//! (`<index>.row`, the row's numbers in shortest round-trip text) and, for
//! sweeps that warm-start the Born loop, the converged Σ0 of the latest
//! points of each line (`<index>.sigma`, raw little-endian doubles), and
//! for sweeps that solve the potential at every point their potentials
//! (`<index>.potential`, U_es of each cell as little-endian doubles). Every
//! file is written to a temporary name, synced and renamed
//! ([`atomic_write`]), so a file that exists is whole. The fingerprint
//! ([`crate::sweep::sweep_fingerprint`]) hashes the case text, the grid and
//! the task, so a changed command never mixes its results with an old one.
//!
//! The result folder's manifest lists the store before its first point is
//! written ([`super::manifest::claim_store`]), so no other command takes it
//! for somebody else's files or removes it.

use super::{OutputError, atomic_write, format_number};
use crate::C64;
use crate::scattering::ScatteringSelfEnergy;
use crate::sweep::{PointStore, StoreError};
use std::path::{Path, PathBuf};

/// Name of the folder holding the point stores inside a result folder.
pub const STORE_FOLDER: &str = "points";

/// The stored points of one sweep, one file per point in a folder.
#[derive(Clone, Debug)]
pub struct PointFolder {
    dir: PathBuf,
}

impl PointFolder {
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

    fn potential_path(&self, index: usize) -> PathBuf {
        self.dir.join(format!("{index:08}.potential"))
    }
}

impl PointStore for PointFolder {
    fn row(&self, index: usize, width: usize) -> Option<Vec<f64>> {
        let text = std::fs::read_to_string(self.row_path(index)).ok()?;
        let row: Option<Vec<f64>> = text
            .trim_end()
            .split(',')
            .map(|s| s.parse::<f64>().ok())
            .collect();
        row.filter(|r| r.len() == width)
    }

    fn put_row(&self, index: usize, row: &[f64]) -> Result<(), StoreError> {
        let mut text = row
            .iter()
            .map(|v| format_number(*v))
            .collect::<Vec<_>>()
            .join(",");
        text.push('\n');
        Ok(atomic_write(&self.row_path(index), text.as_bytes())?)
    }

    fn sigma(&self, index: usize) -> Option<ScatteringSelfEnergy> {
        let bytes = std::fs::read(self.sigma_path(index)).ok()?;
        decode_sigma(&bytes)
    }

    fn put_sigma(&self, index: usize, s: &ScatteringSelfEnergy) -> Result<(), StoreError> {
        Ok(atomic_write(&self.sigma_path(index), &encode_sigma(s))?)
    }

    fn remove_sigma(&self, index: usize) {
        let _ = std::fs::remove_file(self.sigma_path(index));
    }

    fn potential(&self, index: usize) -> Option<Vec<f64>> {
        let bytes = std::fs::read(self.potential_path(index)).ok()?;
        if bytes.len() % 8 != 0 {
            return None;
        }
        let value = |c: &[u8]| f64::from_le_bytes(c.try_into().expect("8 bytes"));
        Some(bytes.chunks_exact(8).map(value).collect())
    }

    fn put_potential(&self, index: usize, potential_ev: &[f64]) -> Result<(), StoreError> {
        let bytes: Vec<u8> = potential_ev.iter().flat_map(|v| v.to_le_bytes()).collect();
        Ok(atomic_write(&self.potential_path(index), &bytes)?)
    }

    fn remove_potential(&self, index: usize) {
        let _ = std::fs::remove_file(self.potential_path(index));
    }

    fn location(&self) -> String {
        self.dir.display().to_string()
    }
}

/// Layout: values per energy and value count (u64 each), Σ^r_0 (re, im
/// pairs), Σ^in_0, then for blocks one more u64 holding b (a diagonal
/// self-energy has no such word, so the two never read as each other).
fn encode_sigma(s: &ScatteringSelfEnergy) -> Vec<u8> {
    let n = s.inscatter.len();
    let mut out = Vec::with_capacity(24 + 24 * n);
    out.extend_from_slice(&(s.sites as u64).to_le_bytes());
    out.extend_from_slice(&(n as u64).to_le_bytes());
    for z in &s.retarded {
        out.extend_from_slice(&z.re.to_le_bytes());
        out.extend_from_slice(&z.im.to_le_bytes());
    }
    for v in &s.inscatter {
        out.extend_from_slice(&v.to_le_bytes());
    }
    if let Some(b) = s.blocks {
        out.extend_from_slice(&(b as u64).to_le_bytes());
    }
    out
}

fn decode_sigma(b: &[u8]) -> Option<ScatteringSelfEnergy> {
    let word = |i: usize| -> Option<[u8; 8]> { b.get(8 * i..8 * i + 8)?.try_into().ok() };
    let sites = u64::from_le_bytes(word(0)?) as usize;
    let n = u64::from_le_bytes(word(1)?) as usize;
    let blocks = if b.len() == 16 + 24 * n {
        None
    } else if b.len() == 24 + 24 * n {
        Some(u64::from_le_bytes(word(2 + 3 * n)?) as usize)
    } else {
        return None;
    };
    let f = |i: usize| f64::from_le_bytes(word(i).expect("length checked"));
    let retarded = (0..n)
        .map(|k| C64::new(f(2 + 2 * k), f(3 + 2 * k)))
        .collect();
    let inscatter = (0..n).map(|k| f(2 + 2 * n + k)).collect();
    Some(ScatteringSelfEnergy {
        sites,
        retarded,
        inscatter,
        blocks,
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
            blocks: None,
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
        // A block self-energy keeps its block size and never reads as a
        // diagonal one.
        let blocks = ScatteringSelfEnergy {
            sites: 4,
            retarded: vec![C64::new(0.5, -0.25); 4],
            inscatter: vec![0.125; 4],
            blocks: Some(2),
        };
        let back = decode_sigma(&encode_sigma(&blocks)).unwrap();
        assert_eq!(back, blocks);
        assert_eq!(decode_sigma(&encode_sigma(&s)).unwrap().blocks, None);
    }

    /// The on-disk layout other runs resume from: file names, row text.
    #[test]
    fn point_files_keep_their_layout() {
        let tmp = tempfile::tempdir().unwrap();
        let store = PointFolder::open(tmp.path(), 0xab).unwrap();
        store.put_row(7, &[0.5, -2.0, f64::NAN]).unwrap();
        let path = tmp.path().join("points/00000000000000ab/00000007.row");
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "0.5,-2,NaN\n");
        // Stores written before numbers were printed plainly still read.
        std::fs::write(&path, "5e-1,-2e0,NaN\n").unwrap();
        assert_eq!(store.row(7, 3).map(|r| r[0]), Some(0.5));
        assert_eq!(store.row(7, 3).map(|r| r[1]), Some(-2.0));
        assert_eq!(store.row(7, 2), None);
    }
}

//! Channels: named groups of the orbitals of a cell (spin up and down, one
//! band of several), so that results can be split by channel and potential
//! regions can act on some orbitals only.
//!
//! A channel set covers every orbital of a cell exactly once: the orbitals
//! no named channel holds form one more channel, [`OTHER_CHANNEL`]. The
//! projector P_c of channel c is the diagonal matrix with 1 on its orbitals
//! and 0 elsewhere, so Σ_c P_c = 1 and any trace splits into channel parts
//! that add up to it.

use super::{Device, lowest_band_energy};
use crate::C64;
use faer::Mat;

/// Name of the channel that holds the orbitals no named channel holds.
pub const OTHER_CHANNEL: &str = "other";

/// One channel: a name and the orbitals of a cell it holds (indices
/// within the cell, ascending).
#[derive(Clone, Debug, PartialEq)]
pub struct Channel {
    /// Name, unique in its set.
    pub name: String,
    /// Orbital indices within a cell, ascending, at least one.
    pub orbitals: Vec<usize>,
}

/// Channels that partition the orbitals of a cell.
#[derive(Clone, Debug, PartialEq)]
pub struct Channels {
    /// Orbitals per cell b.
    pub orbitals: usize,
    /// The channels, named ones in the order given, then [`OTHER_CHANNEL`]
    /// when some orbitals are left out.
    pub list: Vec<Channel>,
    /// Channel index of each orbital of a cell.
    owner: Vec<usize>,
}

/// Why a channel set is refused.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum ChannelError {
    /// An orbital index is not below b.
    #[error("channel `{name}` holds orbital {orbital}, but a cell has {orbitals} orbitals (0 to {last})", last = orbitals - 1)]
    OutOfRange {
        /// Channel name.
        name: String,
        /// The index given.
        orbital: usize,
        /// Orbitals per cell.
        orbitals: usize,
    },
    /// Two channels hold the same orbital (or one holds it twice).
    #[error(
        "orbital {orbital} is in channel `{first}` and again in `{second}`: channels must not overlap"
    )]
    Overlap {
        /// The orbital.
        orbital: usize,
        /// Channel that holds it first.
        first: String,
        /// Channel that holds it again.
        second: String,
    },
    /// Two channels share a name, or a named channel is called like the
    /// implicit one while orbitals are left out.
    #[error(
        "channel name `{0}` is used twice (or is the name of the channel of the orbitals left out)"
    )]
    DuplicateName(String),
    /// A channel holds no orbital.
    #[error("channel `{0}` holds no orbital")]
    Empty(String),
}

impl Channels {
    /// A channel set over `orbitals` orbitals per cell from named channels;
    /// orbitals left out go to [`OTHER_CHANNEL`].
    pub fn new(orbitals: usize, named: Vec<Channel>) -> Result<Self, ChannelError> {
        let mut owner: Vec<Option<usize>> = vec![None; orbitals];
        let mut list: Vec<Channel> = Vec::with_capacity(named.len() + 1);
        for (c, mut ch) in named.into_iter().enumerate() {
            if ch.orbitals.is_empty() {
                return Err(ChannelError::Empty(ch.name));
            }
            if list.iter().any(|o| o.name == ch.name) {
                return Err(ChannelError::DuplicateName(ch.name));
            }
            for &o in &ch.orbitals {
                if o >= orbitals {
                    return Err(ChannelError::OutOfRange {
                        name: ch.name,
                        orbital: o,
                        orbitals,
                    });
                }
                if let Some(first) = owner[o] {
                    let first = list.get(first).map_or(ch.name.clone(), |f| f.name.clone());
                    return Err(ChannelError::Overlap {
                        orbital: o,
                        first,
                        second: ch.name,
                    });
                }
                owner[o] = Some(c);
            }
            ch.orbitals.sort_unstable();
            list.push(ch);
        }
        let rest: Vec<usize> = (0..orbitals).filter(|&o| owner[o].is_none()).collect();
        if !rest.is_empty() {
            if list.iter().any(|c| c.name == OTHER_CHANNEL) {
                return Err(ChannelError::DuplicateName(OTHER_CHANNEL.into()));
            }
            let c = list.len();
            for &o in &rest {
                owner[o] = Some(c);
            }
            list.push(Channel {
                name: OTHER_CHANNEL.into(),
                orbitals: rest,
            });
        }
        let owner = owner.into_iter().map(|o| o.unwrap_or(0)).collect();
        Ok(Self {
            orbitals,
            list,
            owner,
        })
    }

    /// The two spin channels of a cell doubled by [`spin_doubled`]:
    /// "up" holds orbitals 0..b, "down" b..2b (b orbitals per spin).
    pub fn spin(orbitals_per_spin: usize) -> Self {
        let b = orbitals_per_spin;
        Self::new(
            2 * b,
            vec![
                Channel {
                    name: "up".into(),
                    orbitals: (0..b).collect(),
                },
                Channel {
                    name: "down".into(),
                    orbitals: (b..2 * b).collect(),
                },
            ],
        )
        .expect("two disjoint halves")
    }

    /// Number of channels.
    pub fn len(&self) -> usize {
        self.list.len()
    }

    /// True when there is no channel (a cell without orbitals).
    pub fn is_empty(&self) -> bool {
        self.list.is_empty()
    }

    /// Channel names in order.
    pub fn names(&self) -> Vec<String> {
        self.list.iter().map(|c| c.name.clone()).collect()
    }

    /// Index of the channel called `name`.
    pub fn index_of(&self, name: &str) -> Option<usize> {
        self.list.iter().position(|c| c.name == name)
    }

    /// Channel index of orbital `o` of a cell.
    pub fn channel_of(&self, orbital: usize) -> usize {
        self.owner[orbital]
    }

    /// The first element of `m` (b×b) that couples two different channels,
    /// with its modulus, when one exceeds `tolerance`.
    pub fn mixing_element(&self, m: &Mat<C64>, tolerance: f64) -> Option<(usize, usize, f64)> {
        for r in 0..m.nrows().min(self.orbitals) {
            for c in 0..m.ncols().min(self.orbitals) {
                let v = m[(r, c)].norm();
                if self.owner[r] != self.owner[c] && v > tolerance {
                    return Some((r, c, v));
                }
            }
        }
        None
    }
}

/// Block diag(M, M) of a b×b block.
fn doubled_block(m: &Mat<C64>) -> Mat<C64> {
    let b = m.nrows();
    Mat::from_fn(2 * b, 2 * b, |r, c| {
        if r / b == c / b {
            m[(r % b, c % b)]
        } else {
            C64::new(0.0, 0.0)
        }
    })
}

/// A device with explicit spin: every block H becomes diag(H, H), up spin
/// on orbitals 0..b and down spin on b..2b. The band edges stay those of
/// the spinless device (both spins carry its bands).
pub fn spin_doubled(dev: &Device) -> Device {
    Device {
        orbitals: 2 * dev.orbitals,
        onsite: dev.onsite.iter().map(doubled_block).collect(),
        coupling: dev.coupling.iter().map(doubled_block).collect(),
        ..dev.clone()
    }
}

/// diag(M, M) of a lead or device block (for leads built beside a
/// spin-doubled device).
pub fn spin_doubled_block(m: &Mat<C64>) -> Mat<C64> {
    doubled_block(m)
}

/// True when every off-diagonal element of `m` is zero.
fn is_diagonal(m: &Mat<C64>) -> bool {
    (0..m.nrows()).all(|r| (0..m.ncols()).all(|c| r == c || m[(r, c)] == C64::new(0.0, 0.0)))
}

/// Lowest band energy of a cell: exact for diagonal on-site and coupling
/// blocks (each orbital its own chain, min over o of h_oo − 2|t_oo|),
/// otherwise [`lowest_band_energy`].
fn cell_band_bottom(onsite: &Mat<C64>, hop: &Mat<C64>) -> f64 {
    if is_diagonal(onsite) && is_diagonal(hop) {
        return (0..onsite.nrows())
            .map(|o| onsite[(o, o)].re - 2.0 * hop[(o, o)].norm())
            .fold(f64::INFINITY, f64::min);
    }
    lowest_band_energy(onsite, hop)
}

/// Add `offsets[i][o]` (eV) to orbital o of cell i (on the diagonal of
/// H_ii) and recompute the band bottom of every cell that changed, from its
/// on-site block and a neighbouring coupling. `offsets` has one entry per
/// cell, each b long.
pub fn add_orbital_offsets(dev: &mut Device, offsets: &[Vec<f64>]) {
    let n = dev.cells();
    for (i, off) in offsets.iter().enumerate().take(n) {
        if off.iter().all(|&v| v == 0.0) {
            continue;
        }
        for (o, &v) in off.iter().enumerate() {
            dev.onsite[i][(o, o)] += C64::new(v, 0.0);
        }
        let hop = if i + 1 < n {
            dev.coupling[i].clone()
        } else if i > 0 {
            dev.coupling[i - 1].clone()
        } else {
            Mat::zeros(dev.orbitals, dev.orbitals)
        };
        dev.band_edge_ev[i] = cell_band_bottom(&dev.onsite[i], &hop);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ch(name: &str, orbitals: &[usize]) -> Channel {
        Channel {
            name: name.into(),
            orbitals: orbitals.to_vec(),
        }
    }

    #[test]
    fn left_out_orbitals_form_the_other_channel() {
        let set = Channels::new(4, vec![ch("a", &[2, 0])]).unwrap();
        assert_eq!(set.names(), vec!["a", OTHER_CHANNEL]);
        assert_eq!(set.list[0].orbitals, vec![0, 2]);
        assert_eq!(set.list[1].orbitals, vec![1, 3]);
        assert_eq!(set.channel_of(3), 1);
    }

    #[test]
    fn overlapping_or_out_of_range_channels_are_refused() {
        let e = Channels::new(3, vec![ch("a", &[0, 1]), ch("b", &[1])]).unwrap_err();
        assert!(matches!(e, ChannelError::Overlap { orbital: 1, .. }), "{e}");
        let e = Channels::new(3, vec![ch("a", &[3])]).unwrap_err();
        assert!(
            matches!(e, ChannelError::OutOfRange { orbital: 3, .. }),
            "{e}"
        );
        let e = Channels::new(3, vec![ch("other", &[0])]).unwrap_err();
        assert!(matches!(e, ChannelError::DuplicateName(_)), "{e}");
        // "other" is a fine name when nothing is left out
        assert!(Channels::new(1, vec![ch("other", &[0])]).is_ok());
    }

    #[test]
    fn spin_doubling_keeps_the_band_and_offsets_move_it() {
        let dev = super::super::chain(0.5, 1.0, 0.0, vec![0.0; 3]);
        let mut d2 = spin_doubled(&dev);
        assert_eq!(d2.orbitals, 2);
        assert_eq!(d2.onsite[1][(1, 1)], dev.onsite[1][(0, 0)]);
        assert_eq!(d2.onsite[1][(0, 1)], C64::new(0.0, 0.0));
        let set = Channels::spin(1);
        assert!(set.mixing_element(&d2.coupling[0], 0.0).is_none());
        add_orbital_offsets(&mut d2, &[vec![0.1, -0.1], vec![0.0; 2], vec![0.0; 2]]);
        assert!((d2.band_edge_ev[0] + 0.1).abs() < 1e-15);
        assert_eq!(d2.band_edge_ev[1], 0.0);
    }
}

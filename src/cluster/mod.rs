//! One command run as several processes (ranks) of a job.
//!
//! Commands whose work falls into independent pieces (the points of a
//! sweep or a screening) can spread them over the ranks of an MPI job
//! started by `mpirun` or a batch scheduler. Everything the rest of the
//! program needs from the job goes through [`Cluster`]: which rank this
//! process is, how many there are, one collective that hands every rank's
//! bytes to every rank ([`Cluster::exchange`]), and on top of it the two
//! uses the commands make of it: everybody agreeing on success or on the
//! first failure ([`Cluster::agree`]), and collecting what each rank
//! finished ([`Cluster::gather`]).
//!
//! Without the `mpi` cargo feature, or when the program was not started by
//! an MPI launcher, the cluster is one process of rank 0: every collective
//! returns the process's own contribution, so callers need no special
//! case. With the feature, MPI is started only when the environment shows
//! a launcher (the rank variables that Open MPI, MPICH/Hydra, PMIx and
//! Slurm's PMI set); then a panic on any rank aborts the whole job instead
//! of leaving the others waiting in a collective.
//!
//! Every collective must be called by every rank in the same order; the
//! commands that use them call each one unconditionally on every rank, so
//! a rank that failed early still takes part and reports its failure
//! through the collective rather than by leaving.

#[cfg(feature = "mpi")]
mod mpi_job;

/// A failure handed from one rank to all: a kind code chosen by the caller
/// (the command line uses its exit codes) and the message for the user.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Fault {
    /// The kind of failure, as the caller numbers them.
    pub code: u8,
    /// What went wrong, for the user.
    pub message: String,
}

/// The processes running one command, as seen from one of them.
///
/// A clone is another handle on the same job (MPI ends when the last one
/// is dropped), for a part of the program that must keep it, such as the
/// energy split of a Born solve.
#[derive(Clone)]
pub struct Cluster {
    rank: usize,
    size: usize,
    #[cfg(feature = "mpi")]
    job: Option<std::sync::Arc<mpi_job::Job>>,
}

impl std::fmt::Debug for Cluster {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Cluster")
            .field("rank", &self.rank)
            .field("size", &self.size)
            .finish()
    }
}

impl Cluster {
    /// One process alone: rank 0 of 1.
    pub fn single() -> Self {
        Self {
            rank: 0,
            size: 1,
            #[cfg(feature = "mpi")]
            job: None,
        }
    }

    /// Join the job this process was started in: the MPI job when the
    /// `mpi` feature is built in and a launcher started the process, else
    /// [`Cluster::single`]. Call once, early, from the main thread; MPI
    /// ends when the value is dropped.
    pub fn start() -> Self {
        #[cfg(feature = "mpi")]
        if mpi_job::launched()
            && let Some(job) = mpi_job::Job::start()
        {
            return Self {
                rank: job.rank(),
                size: job.size(),
                job: Some(std::sync::Arc::new(job)),
            };
        }
        Self::single()
    }

    /// This process's rank, 0 ≤ rank < [`Cluster::size`].
    pub fn rank(&self) -> usize {
        self.rank
    }

    /// How many processes run the command.
    pub fn size(&self) -> usize {
        self.size
    }

    /// Whether this is rank 0, the one that writes results and prints.
    pub fn is_root(&self) -> bool {
        self.rank == 0
    }

    /// Every rank's `bytes`, in rank order, on every rank. A collective:
    /// every rank must call it. A message too long for one MPI transfer
    /// (2³¹ bytes) on any rank fails on every rank alike.
    pub fn exchange(&self, bytes: &[u8]) -> Result<Vec<Vec<u8>>, Fault> {
        #[cfg(feature = "mpi")]
        if let Some(job) = &self.job {
            return job.exchange(bytes);
        }
        Ok(vec![bytes.to_vec()])
    }

    /// Every rank's finished work, in rank order, on every rank; or, when
    /// any rank failed, the failure of the lowest such rank on every rank
    /// (with the rank named when rank 0 itself did not fail). A
    /// collective: every rank must call it, failed or not.
    pub fn gather(&self, local: Result<Vec<u8>, Fault>) -> Result<Vec<Vec<u8>>, Fault> {
        let parts = self.exchange(&encode_outcome(&local))?;
        let mut payloads = Vec::with_capacity(parts.len());
        for (rank, part) in parts.iter().enumerate() {
            match decode_outcome(part) {
                Some(Ok(payload)) => payloads.push(payload),
                Some(Err(mut fault)) => {
                    if rank != 0 {
                        fault.message = format!(
                            "{} (on rank {rank} of {}; every rank ends with this error)",
                            fault.message,
                            parts.len()
                        );
                    }
                    return Err(fault);
                }
                None => {
                    return Err(Fault {
                        code: u8::MAX,
                        message: format!(
                            "rank {rank} sent {} bytes that are not an outcome; \
                             hint: run every rank with the same qheat build",
                            part.len()
                        ),
                    });
                }
            }
        }
        Ok(payloads)
    }

    /// Success on every rank, or the same failure on every rank (that of
    /// the lowest failing rank). A collective: every rank must call it.
    pub fn agree(&self, local: Result<(), Fault>) -> Result<(), Fault> {
        self.gather(local.map(|()| Vec::new())).map(|_| ())
    }
}

/// An outcome as bytes: 0 then the payload, or 1, the code and the message.
fn encode_outcome(outcome: &Result<Vec<u8>, Fault>) -> Vec<u8> {
    match outcome {
        Ok(payload) => {
            let mut b = Vec::with_capacity(payload.len() + 1);
            b.push(0);
            b.extend_from_slice(payload);
            b
        }
        Err(f) => {
            let mut b = vec![1, f.code];
            b.extend_from_slice(f.message.as_bytes());
            b
        }
    }
}

/// The outcome [`encode_outcome`] wrote; `None` for other bytes.
fn decode_outcome(bytes: &[u8]) -> Option<Result<Vec<u8>, Fault>> {
    match bytes.split_first()? {
        (0, payload) => Some(Ok(payload.to_vec())),
        (1, rest) => {
            let (&code, message) = rest.split_first()?;
            Some(Err(Fault {
                code,
                message: String::from_utf8_lossy(message).into_owned(),
            }))
        }
        _ => None,
    }
}

/// Numbers as bytes for [`Cluster::exchange`]: little-endian, so every
/// value, NaN payloads and the sign of zero included, comes back with the
/// same bits.
pub mod bytes {
    /// Append `x` (8 bytes).
    pub fn put_u64(out: &mut Vec<u8>, x: u64) {
        out.extend_from_slice(&x.to_le_bytes());
    }

    /// Append `x` with its exact bits (8 bytes).
    pub fn put_f64(out: &mut Vec<u8>, x: f64) {
        out.extend_from_slice(&x.to_bits().to_le_bytes());
    }

    /// Reads numbers back in the order they were put.
    #[derive(Debug)]
    pub struct Reader<'a> {
        rest: &'a [u8],
    }

    impl<'a> Reader<'a> {
        /// Read from the start of `bytes`.
        pub fn new(bytes: &'a [u8]) -> Self {
            Self { rest: bytes }
        }

        /// The next 8 bytes as a `u64`; `None` past the end.
        pub fn u64(&mut self) -> Option<u64> {
            let (head, rest) = self.rest.split_first_chunk::<8>()?;
            self.rest = rest;
            Some(u64::from_le_bytes(*head))
        }

        /// The next 8 bytes as an `f64` with its exact bits.
        pub fn f64(&mut self) -> Option<f64> {
            self.u64().map(f64::from_bits)
        }

        /// Whether every byte was read.
        pub fn is_empty(&self) -> bool {
            self.rest.is_empty()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_single_process_gathers_its_own_work() {
        let c = Cluster::single();
        assert_eq!((c.rank(), c.size(), c.is_root()), (0, 1, true));
        assert_eq!(c.gather(Ok(vec![1, 2, 3])).unwrap(), vec![vec![1, 2, 3]]);
        assert_eq!(c.agree(Ok(())), Ok(()));
    }

    #[test]
    fn a_failure_comes_back_whole() {
        let fault = Fault {
            code: 2,
            message: "grid point 3: did not converge — µ".into(),
        };
        let c = Cluster::single();
        assert_eq!(c.agree(Err(fault.clone())), Err(fault.clone()));
        assert_eq!(c.gather(Err(fault.clone())), Err(fault));
    }

    #[test]
    fn outcomes_and_numbers_round_trip() {
        for outcome in [
            Ok(vec![]),
            Ok(vec![0, 1, 255]),
            Err(Fault {
                code: 3,
                message: String::new(),
            }),
        ] {
            assert_eq!(decode_outcome(&encode_outcome(&outcome)), Some(outcome));
        }
        assert_eq!(decode_outcome(&[]), None);
        assert_eq!(decode_outcome(&[7, 1]), None);
        let values = [0.0, -0.0, f64::NAN, 1e-300, -3.5, f64::INFINITY];
        let mut b = Vec::new();
        bytes::put_u64(&mut b, 42);
        values.iter().for_each(|&v| bytes::put_f64(&mut b, v));
        let mut r = bytes::Reader::new(&b);
        assert_eq!(r.u64(), Some(42));
        for v in values {
            assert_eq!(r.f64().map(f64::to_bits), Some(v.to_bits()));
        }
        assert!(r.is_empty());
        assert_eq!(r.u64(), None);
    }
}

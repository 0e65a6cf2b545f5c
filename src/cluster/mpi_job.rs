//! The MPI side of [`super::Cluster`], built with the `mpi` feature.

use super::Fault;
use mpi::Count;
use mpi::datatype::PartitionMut;
use mpi::environment::Universe;
use mpi::topology::SimpleCommunicator;
use mpi::traits::{Communicator, CommunicatorCollectives};

/// Environment variables by which MPI launchers tell a process its rank:
/// Open MPI's mpirun, MPICH's Hydra and Slurm's PMI (PMI_SIZE), PMIx
/// (Open MPI 5, `srun --mpi=pmix`).
const LAUNCHER_VARIABLES: [&str; 4] = [
    "OMPI_COMM_WORLD_SIZE",
    "PMI_SIZE",
    "PMIX_RANK",
    "MPI_LOCALNRANKS",
];

/// Whether an MPI launcher started this process.
pub fn launched() -> bool {
    LAUNCHER_VARIABLES
        .iter()
        .any(|v| std::env::var_os(v).is_some())
}

/// A running MPI job: MPI ends when it is dropped.
pub struct Job {
    universe: Universe,
    rank: usize,
    size: usize,
}

impl Job {
    /// Start MPI (collectives are called from the main thread only; the
    /// worker threads never call MPI) and make a panic on this rank abort
    /// every rank. `None` when MPI was already started.
    pub fn start() -> Option<Self> {
        let (universe, _) = mpi::initialize_with_threading(mpi::Threading::Funneled)?;
        let world = universe.world();
        let (rank, size) = (world.rank() as usize, world.size() as usize);
        let earlier = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            earlier(info);
            // The other ranks may wait in a collective this rank will never
            // reach: end them all rather than hang.
            SimpleCommunicator::world().abort(101);
        }));
        Some(Self {
            universe,
            rank,
            size,
        })
    }

    /// This process's rank.
    pub fn rank(&self) -> usize {
        self.rank
    }

    /// The ranks in the job.
    pub fn size(&self) -> usize {
        self.size
    }

    /// Every rank's bytes on every rank (MPI_Allgather of the lengths, then
    /// MPI_Allgatherv of the bytes).
    pub fn exchange(&self, bytes: &[u8]) -> Result<Vec<Vec<u8>>, Fault> {
        let world = self.universe.world();
        let mut lengths = vec![0u64; self.size];
        world.all_gather_into(&(bytes.len() as u64), &mut lengths[..]);
        let total: u64 = lengths.iter().sum();
        if total > Count::MAX as u64 {
            return Err(Fault {
                code: u8::MAX,
                message: format!(
                    "the ranks' results add up to {total} bytes, more than one MPI transfer \
                     carries ({} bytes); hint: split the grid into several smaller runs",
                    Count::MAX
                ),
            });
        }
        let counts: Vec<Count> = lengths.iter().map(|&n| n as Count).collect();
        let displs: Vec<Count> = counts
            .iter()
            .scan(0, |at, &n| {
                let start = *at;
                *at += n;
                Some(start)
            })
            .collect();
        let mut all = vec![0u8; total as usize];
        {
            let mut partition = PartitionMut::new(&mut all[..], &counts[..], &displs[..]);
            world.all_gather_varcount_into(bytes, &mut partition);
        }
        Ok(counts
            .iter()
            .zip(&displs)
            .map(|(&n, &at)| all[at as usize..(at + n) as usize].to_vec())
            .collect())
    }
}

//! One type per section of the case file. Each validates itself from its
//! raw table, owns its defaults and writes its own messages.

pub(crate) mod bias;
pub(crate) mod channels;
pub(crate) mod contacts;
pub(crate) mod device;
pub(crate) mod electrostatics;
pub(crate) mod lattice;
pub(crate) mod lattice_blocks;
pub(crate) mod lead_blocks;
pub(crate) mod leads;
pub(crate) mod regions;
pub(crate) mod scattering;
pub(crate) mod settings;

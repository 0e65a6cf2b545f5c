//! Case files: TOML schema -> validated case (being written).

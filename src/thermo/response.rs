//! Linear response by finite differences (being written).

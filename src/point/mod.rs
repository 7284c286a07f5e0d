//! One parameter point, start to finish (`engine`): the first parallel pass (`first_pass`), the
//! gap minimiser (`gap_search`) and the proven gap (`gap_proof`); the flow that decided a plane
//! (`decided_flow`); stopping a point early (`cancel`); and the results of many points as flat
//! columns (`columns`).
//!
//! Uses: topology, zone, linalg, exec.

pub mod cancel;
pub mod columns;
pub mod decided_flow;
pub mod engine;
pub mod first_pass;
pub mod gap_probe;
pub mod gap_proof;
pub mod gap_search;

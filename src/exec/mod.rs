//! Execution: which threads run a call (`pools`), the flat list of tasks the workers of a pool
//! share (`guided`), and the scratch a thread keeps from one task to the next (`kept`). No
//! physics here: the kernels above hand their work to these.
//!
//! Uses: nothing but `error`.

pub mod guided;
pub(crate) mod kept;
pub mod pools;

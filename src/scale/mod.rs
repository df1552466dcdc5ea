//! Running one suite on many machines and checking results folders:
//! [`shard`] (`plumbline run --shard K/N`), [`merge`] (`plumbline merge`),
//! [`verify`] (`plumbline verify`), and [`cli`], their command-line parts.

pub mod cli;
pub mod merge;
pub mod shard;
pub mod verify;

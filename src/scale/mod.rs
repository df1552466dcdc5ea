//! Running one suite on many machines and checking results folders:
//! [`shard`] (`plumbline run --shard K/N`), [`merge`] (`plumbline merge`) and
//! [`verify`] (`plumbline verify`). Their command-line parts are in
//! `commands/merge.rs` and `commands/verify.rs`.

pub mod merge;
pub mod shard;
pub mod verify;

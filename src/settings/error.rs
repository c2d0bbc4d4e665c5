//! What can stop a choice from resolving: an unknown preset or apex, parameters the physics
//! refuses, a run file that does not parse, a malformed `--infall`. Each prints as one
//! message naming the setting (and the run file).

use thiserror::Error;

use crate::physics::PhysicsError;

#[derive(Debug, Error)]
pub enum SettingsError {
    /// A run file that is not valid TOML for a `RunConfig`; `origin` names the file.
    #[error("{origin}: {message}")]
    RunFile { origin: String, message: String },
    /// A name that is not in the tables (cosmology preset, apex), with the names there are.
    #[error("{0}")]
    UnknownName(String),
    #[error("give either a named dipole or a user apex, not both")]
    DipoleAndUserApex,
    /// A bad entry of an apex file (or of a run file's `frame.apices`): the file, the entry
    /// and the key.
    #[error("{origin}: {entry}: key '{key}': {problem}")]
    ApexEntry {
        origin: String,
        entry: String,
        key: String,
        problem: String,
    },
    #[error("user apex: {0}")]
    UserApex(PhysicsError),
    /// `--infall NAME,X,Y,Z,DELTA0,R_SCALE` as given, and what is wrong with it.
    #[error("--infall '{given}': {problem}")]
    Infall { given: String, problem: String },
    /// Parameters the physics refuses (a cosmology out of range, tables that do not reach).
    #[error(transparent)]
    Physics(#[from] PhysicsError),
}

//! Command-line flags as clap parsers, in the library so that the command line and the
//! Python package parse options with the same code (and so give the same messages): flag
//! groups shared by several subcommands, and the flags of the subcommands Python reaches.

pub mod distances;
pub mod galaxy;
pub mod options;
pub mod velocities;

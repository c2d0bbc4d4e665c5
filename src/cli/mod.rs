//! Subcommands, one file each, and the flag groups they share.

mod demo;
mod distances;
mod frames;
mod galaxy;
mod options;
mod table;

use clap::{Parser, Subcommand};

/// flowsift: peculiar velocities for galaxy catalogues, by exact redshift composition.
#[derive(Debug, Parser)]
#[command(name = "flowsift", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// One object: sky position, heliocentric redshift and a distance → CMB-frame redshift,
    /// cosmological redshift, peculiar velocity and errors.
    Galaxy(galaxy::GalaxyArgs),
    /// FLRW distances (D_C, D_M, D_L, D_A, μ) at given redshifts.
    Distances(distances::DistancesArgs),
    /// The rest-frame apices and cosmology presets flowsift knows, with their sources.
    Frames(frames::FramesArgs),
    /// Run flowsift on the shipped invented survey and print what it finds.
    Demo(demo::DemoArgs),
}

pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Galaxy(a) => galaxy::run(a),
        Command::Distances(a) => distances::run(a),
        Command::Frames(a) => frames::run(a),
        Command::Demo(a) => demo::run(a),
    }
}

//! Subcommands, one file each, and the flag groups they share.

mod config;
mod demo;
mod distances;
mod frames;
mod galaxy;
mod mock;
mod options;
mod table;
mod velocities;

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
    Galaxy(Box<galaxy::GalaxyArgs>),
    /// A catalogue in, every row out with CMB-frame redshift, cosmological redshift,
    /// peculiar velocity, errors and a status.
    Velocities(Box<velocities::VelocitiesArgs>),
    /// Run files: a commented example, or their JSON Schema.
    Config(config::ConfigArgs),
    /// Mock catalogues from a known flow, with truth columns.
    Mock(Box<mock::MockArgs>),
    /// FLRW distances (D_C, D_M, D_L, D_A, μ) at given redshifts.
    Distances(distances::DistancesArgs),
    /// The rest-frame apices and cosmology presets flowsift knows, with their sources.
    Frames(frames::FramesArgs),
    /// Run flowsift on the shipped invented survey and print what it finds.
    Demo(demo::DemoArgs),
}

pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Galaxy(a) => galaxy::run(*a),
        Command::Velocities(a) => velocities::run(*a),
        Command::Config(a) => config::run(a),
        Command::Mock(a) => mock::run(*a),
        Command::Distances(a) => distances::run(a),
        Command::Frames(a) => frames::run(a),
        Command::Demo(a) => demo::run(a),
    }
}

//! Subcommands, one file each, and the flag groups they share.

mod audit;
mod config;
mod correct;
mod covariance;
mod demo;
mod distances;
mod field;
mod flow_moments;
mod frames;
mod galaxy;
mod growth;
mod mock;
mod plot;
mod sample_stages;
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
    /// Which conventions made a catalogue's own derived columns (CMB/LG redshifts, v_pec,
    /// η, z_cos, distances), and which rows none reproduces.
    Audit(Box<audit::AuditArgs>),
    /// Run files: a commented example, or their JSON Schema.
    Config(config::ConfigArgs),
    /// Combine group members: error-weighted mean distance, mean redshift, group velocities.
    Groups(Box<sample_stages::GroupsArgs>),
    /// Malmquist-bias correction of the distances, then velocities.
    Malmquist(Box<sample_stages::MalmquistArgs>),
    /// Flag outliers in a flowsift output (adds `outlier` and `outlier_reason`).
    Outliers(Box<sample_stages::OutliersArgs>),
    /// The maximum-likelihood bulk flow of a flowsift output and its ΛCDM expectation.
    Bulkflow(Box<sample_stages::BulkFlowArgs>),
    /// The linear-theory ΛCDM covariance of a sample's radial peculiar velocities.
    Covariance(Box<covariance::CovarianceArgs>),
    /// The maximum-likelihood growth rate fσ8 of a sample.
    Growth(Box<growth::GrowthArgs>),
    /// The flow-sample export (supergalactic positions, velocities, errors, flags).
    Export(Box<sample_stages::ExportArgs>),
    /// Hubble-diagram redshifts corrected with a velocity-field model (z_cos_model, errors).
    Correct(Box<correct::CorrectArgs>),
    /// A velocity-field file sampled from an analytic model.
    Field(Box<field::FieldArgs>),
    /// Mock catalogues from a known flow, with truth columns.
    Mock(Box<mock::MockArgs>),
    /// FLRW distances (D_C, D_M, D_L, D_A, μ) at given redshifts.
    Distances(distances::DistancesArgs),
    /// The chain of boosts between rest frames, the apices to choose from and the cosmology
    /// presets, with their sources.
    Frames(frames::FramesArgs),
    /// Run flowsift on the shipped invented survey and print what it finds.
    Demo(demo::DemoArgs),
    /// Figures and a run report from a flowsift output.
    Plot(Box<plot::PlotArgs>),
}

pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Galaxy(a) => galaxy::run(*a),
        Command::Velocities(a) => velocities::run(*a),
        Command::Audit(a) => audit::run(*a),
        Command::Config(a) => config::run(a),
        Command::Mock(a) => mock::run(*a),
        Command::Correct(a) => correct::run(*a),
        Command::Field(a) => field::run(*a),
        Command::Groups(a) => sample_stages::groups(*a),
        Command::Malmquist(a) => sample_stages::malmquist(*a),
        Command::Outliers(a) => sample_stages::outliers(*a),
        Command::Bulkflow(a) => sample_stages::bulkflow(*a),
        Command::Export(a) => sample_stages::export(*a),
        Command::Covariance(a) => covariance::run(*a),
        Command::Growth(a) => growth::run(*a),
        Command::Distances(a) => distances::run(a),
        Command::Frames(a) => frames::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Plot(a) => plot::run(*a),
    }
}

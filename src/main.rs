//! The flowsift command line: parse, dispatch, report errors. Nothing else lives here.

mod cli;

use clap::Parser;

fn main() {
    let args = cli::Cli::parse();
    if let Err(e) = cli::run(args) {
        eprintln!("flowsift: error: {e:#}");
        std::process::exit(1);
    }
}

//! The flowsift command line: parse, dispatch, report errors. Nothing else lives here.

mod cli;

use clap::Parser;

fn main() {
    on_signal_remove_unfinished();
    on_panic_say_it_is_a_bug();
    let args = cli::Cli::parse();
    if let Err(e) = cli::run(args) {
        eprintln!("flowsift: error: {e:#}");
        std::process::exit(1);
    }
}

/// SIGINT and SIGTERM remove the temporary file being written, then exit with the shell's
/// code for the signal (130, 143).
fn on_signal_remove_unfinished() {
    use signal_hook::consts::{SIGINT, SIGTERM};
    let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) else {
        return;
    };
    std::thread::spawn(move || {
        if let Some(signal) = signals.forever().next() {
            flowsift::catalogue::atomic::remove_unfinished();
            eprintln!("flowsift: interrupted; unfinished output removed");
            std::process::exit(128 + signal);
        }
    });
}

/// A panic is a bug: say so in one line. Panics a reader is known to raise on a corrupt
/// file are caught and reported as errors naming the file, so they stay quiet here.
fn on_panic_say_it_is_a_bug() {
    std::panic::set_hook(Box::new(|info| {
        if flowsift::catalogue::contained::active() {
            return;
        }
        eprintln!(
            "flowsift: internal error (a bug; please report it with the command line): {info}"
        );
    }));
}

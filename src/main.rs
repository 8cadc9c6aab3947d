//! The curlew binary: parses the command line, runs one command, prints
//! errors with their whole context and maps them to docs/interface.md's exit
//! status (0 done, 1 the data could not be reduced, 2 the command line or the
//! pipeline file is wrong).

mod cli;

use clap::{Parser, Subcommand};

#[derive(Parser)]
#[command(
    name = "curlew",
    version,
    about = "Reduce planar PIV campaigns: validation, filling, smoothing, velocity gradients with \
             propagated uncertainty, ensemble and phase statistics, figures and a report."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Reduce every run of a campaign described by a pipeline file.
    Run(cli::run::Args),
    /// Read the pipeline and every input's header and grid; report the plan; compute nothing.
    Check(cli::check::Args),
    /// Write a synthetic campaign with known ground truth, and a pipeline file for it.
    Synth(cli::synth::Args),
    /// Combine the partial results of `run --shard` into the outputs of one run.
    Merge(cli::merge::Args),
    /// Print what a frame file or an output table holds.
    Inspect(cli::inspect::Args),
    /// Check how well the uncertainties hold on a simulated campaign matched to yours.
    Coverage(cli::coverage::Args),
}

fn main() {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            std::process::exit(code);
        }
    };
    let result = match cli.command {
        Command::Run(a) => cli::run::run(a),
        Command::Check(a) => cli::check::run(a),
        Command::Synth(a) => cli::synth::run(a),
        Command::Merge(a) => cli::merge::run(a),
        Command::Inspect(a) => cli::inspect::run(a),
        Command::Coverage(a) => cli::coverage::run(a),
    };
    if let Err(e) = result {
        if e.kind == curlew::ErrorKind::Io && e.message.contains("broken pipe") {
            std::process::exit(0);
        }
        eprintln!("curlew: error: {e}");
        std::process::exit(e.exit_code());
    }
}

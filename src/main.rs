//! The `gliss` binary: the command line over the gliss library. Argument
//! parsing (clap), the progress bar (indicatif) and the Ctrl-C handler
//! (ctrlc) live here; the library never sees them.

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    cli::main()
}

use std::process::ExitCode;

fn main() -> ExitCode {
    gliss::cli::main()
}

//! The `crowsnest` binary: parse the command line, run it, map the outcome to an exit code.

fn main() -> std::process::ExitCode {
    crowsnest::cli::main_with_args(std::env::args_os())
}

//! The `quassay` binary: parses the command line and hands over to [`quassay::cli`].

fn main() -> std::process::ExitCode {
    quassay::cli::main()
}

//! tankbook's entry point: all the work is in the library.

fn main() -> std::process::ExitCode {
    tankbook::cli::main()
}

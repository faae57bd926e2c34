use std::process::ExitCode;

fn main() -> ExitCode {
    regionkey::cli::main()
}

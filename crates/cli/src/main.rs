//! The `spindrift` command. Everything happens in [`spindrift_cli::run`]; this only maps
//! its outcome to the process exit code.

fn main() -> std::process::ExitCode {
    std::process::ExitCode::from(spindrift_cli::run())
}

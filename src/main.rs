//! The `rarefy` binary; everything lives in the library.

fn main() -> std::process::ExitCode {
    rarefy::cli::main()
}

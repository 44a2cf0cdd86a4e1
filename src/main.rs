fn main() -> std::process::ExitCode {
    ratewright::cli::main()
}

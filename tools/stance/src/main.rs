fn main() -> std::process::ExitCode {
    stance::main_with_args(std::env::args_os().collect())
}

fn main() -> std::process::ExitCode {
    stance_core::host::main::<stance_trend::Trend>()
}

//! Thin command-line front end over the `deepdry` library.

use clap::Parser;

fn main() {
    env_logger::Builder::from_env(env_logger::Env::default().default_filter_or("warn"))
        .format_timestamp(None)
        .init();
    let cli = deepdry::cli::Cli::parse();
    match deepdry::cli::dispatch(cli) {
        Ok(()) => std::process::exit(deepdry::error::exit::OK),
        Err(e) => {
            eprintln!("deepdry: error: {e}");
            std::process::exit(e.exit_code());
        }
    }
}

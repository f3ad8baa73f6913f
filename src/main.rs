//! Thin command-line front end over the `deepdry` library.

use clap::Parser;

fn main() {
    // A closed output pipe (`deepdry compare … | head`) ends the process quietly, as it
    // does other command-line tools, instead of a panic on the next print.
    // SAFETY: setting a signal's disposition to its default before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
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

//! The `ringline` command: a thin shell over the library (see `ringline::cli`).

fn main() {
    std::process::exit(ringline::cli::run(std::env::args_os()));
}

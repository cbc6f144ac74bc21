//! The `groundcount` command: flags and glue around the library.

mod cli;

fn main() {
    std::process::exit(cli::run());
}

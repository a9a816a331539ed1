//! The `ringtrue` command: parses arguments into a request and hands it to the library.

mod cli;

fn main() {
    std::process::exit(cli::run());
}

//! The `ebbwise` command: parses options and hands off to the library's `run` layer.

#![forbid(unsafe_code)]

mod cli;

fn main() {
    std::process::exit(cli::main());
}

//! dipwatch command-line entry point: parse arguments, run the command, print an error once.

#![warn(clippy::too_many_lines)]

mod cli;

fn main() {
    let code = match cli::run() {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("dipwatch: {}", cli::describe(&e));
            2
        }
    };
    std::process::exit(code);
}

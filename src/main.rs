//! The `ooksift` command line: thin glue over the library.
//!
//! Errors become one line on stderr naming the file and the problem, and exit status 1;
//! usage errors exit 2. Exit 0 means the input was analysed, whether or not it held a code.

mod cli;

fn main() {
    std::process::exit(cli::run());
}

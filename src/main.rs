//! The `settle` command line: parses arguments and calls one library function per command.

fn main() {
    println!("settle {}", env!("CARGO_PKG_VERSION"));
}

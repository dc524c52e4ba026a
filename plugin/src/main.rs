//! The `fieldglass` command-line program.

fn main() {
    println!("fieldglass {}", env!("CARGO_PKG_VERSION"));
}

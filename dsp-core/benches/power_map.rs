// (in progress) criterion benchmarks of the power-map paths.
fn main() {}

// (in progress)
fn main() {}

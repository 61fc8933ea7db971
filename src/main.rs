//! The `quarry` command line.
fn main() {
    println!("quarry");
}

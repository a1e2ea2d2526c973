//! The `fickfit` command-line tool (a thin layer over the library).
fn main() {
    println!("fickfit {}", env!("CARGO_PKG_VERSION"));
}

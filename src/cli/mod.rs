//! Command-line front end.
pub fn main() -> i32 {
    0
}

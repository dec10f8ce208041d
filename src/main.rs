//! The `mirrorsite` command line: a thin shell over the library.

fn main() {}

//! The `panelready` binary: hands its arguments to the library and exits with its code.

fn main() {
    std::process::exit(panelready::run(std::env::args_os()));
}

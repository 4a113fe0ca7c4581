//! Command-line tests: each module drives the real `xtal-ladder` binary on the files in the
//! workspace's `examples/` folder, in a fresh temporary directory, and checks the numbers in
//! its JSON, its files, and its exit codes (0 ok, 2 bad input, 1 I/O).
//!
//! One test target with a module per subcommand keeps the build light.

mod cli {
    pub mod util;

    mod analyze;
    mod crystal;
    mod demo;
    mod design;
    mod errors;
    mod fit;
    mod matching;
    mod netlist;
    mod parts;
    mod report;
    mod shift;
    mod touchstone;
    mod yield_;
}

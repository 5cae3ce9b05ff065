//! Fuzz target: arbitrary bytes through quorum's data loader and design builder.
//! Property: never a panic; every failure is a typed error with exit code 2 or 3.
#![no_main]

use libfuzzer_sys::fuzz_target;
use quorum::config::{DataSpec, Source};
use quorum::error::Location;

fuzz_target!(|data: &[u8]| {
    for factors in [&["g"][..], &["g", "h"][..]] {
        let spec = DataSpec::new(Source::Stdin, "y", factors);
        let loc = Location::file("fuzz");
        match quorum::data::parse(data, &spec, "fuzz", &loc) {
            Ok(obs) => {
                if let Err(e) = quorum::design::Design::build(&obs, &spec) {
                    assert!(matches!(e.exit_code(), 2 | 3), "{e}");
                }
            }
            Err(e) => assert!(matches!(e.exit_code(), 2 | 3), "{e}"),
        }
    }
});

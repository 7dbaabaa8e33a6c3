//! Fuzz target: arbitrary bytes as one scenario input; see `broodcast_fuzz::oracle`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Err(why) = broodcast_fuzz::oracle::check("fleet_csv", data) {
        panic!("oracle violated on fleet_csv: {why}");
    }
});

#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| headroom_fuzz::bodies::execute(data));

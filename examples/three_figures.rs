//! Analyse a capture with its profile and print three figures.
//!
//!     cargo run --release --example three_figures -- \
//!         sample-captures/crane-bench-cable.ci16 sample-captures/crane-bench-cable.ci16.profile.json
use iqaudit::analyse::{analyse_capture, AnalyseOptions};
use std::path::Path;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let (capture, profile) = match args.as_slice() {
        [_, c, p] => (Path::new(c), Path::new(p)),
        _ => return Err("usage: three_figures CAPTURE PROFILE.json".into()),
    };
    let profile = iqaudit::profile::load_profile(profile)?;
    let report = analyse_capture(capture, &profile, &AnalyseOptions::default())?;
    let s = &report.summary;
    println!("bursts found:     {}", s.bursts);
    println!(
        "RMS EVM:          {:.2} %",
        s.evm_rms_percent.unwrap_or(f64::NAN)
    );
    match s.ser {
        Some(ser) => println!(
            "SER:              {:.2e} ({} of {})",
            ser.rate, ser.errors, ser.trials
        ),
        None => println!("SER:              n/a (payload unknown)"),
    }
    Ok(())
}

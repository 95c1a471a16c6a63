//! Lookup throughput of the Rust API: the baseline `capi/bench/throughput.sh` compares the C
//! ABI and the Python module against. Usage: `lookup_rate TABLE QUERIES [ROUNDS]`.
//!
//! Each round looks up every query once (one reused result, as a decoder would) and reads
//! every option's target and first score; the median round is reported in ns per lookup.

use std::time::Instant;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 3 {
        return Err("usage: lookup_rate TABLE QUERIES [ROUNDS]".into());
    }
    let rounds: usize = args.get(3).map_or(Ok(7), |r| r.parse())?;
    let table = baler_core::Table::open(std::path::Path::new(&args[1]))?;
    let text = std::fs::read_to_string(&args[2])?;
    let queries: Vec<&str> = text.lines().filter(|l| !l.is_empty()).collect();
    let mut options = baler_core::read::Options::default();
    let mut pass = || -> baler_core::Result<(u64, f64)> {
        let (mut bytes, mut sum) = (0u64, 0.0);
        for q in &queries {
            table.lookup_into(q, &mut options)?;
            for o in options.iter() {
                bytes += o.target().len() as u64;
                sum += o.scores().first().copied().unwrap_or(0.0);
            }
        }
        Ok((bytes, sum))
    };
    let check = pass()?; // warm-up: page in the map, fill the block cache
    let mut times = Vec::new();
    for _ in 0..rounds {
        let t = Instant::now();
        let again = pass()?;
        times.push(t.elapsed().as_nanos() as f64 / queries.len() as f64);
        assert_eq!(again.0, check.0);
    }
    times.sort_by(f64::total_cmp);
    println!(
        "rust\t{:.1}\tns/lookup\t{} queries\ttarget bytes {}\tscore sum {:.3}",
        times[times.len() / 2],
        queries.len(),
        check.0,
        check.1
    );
    Ok(())
}

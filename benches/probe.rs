//! Measurements on one large packed table, for `benches/compare.py`:
//! open time (median of 201 opens), single-phrase lookups per second (hits in random order,
//! every option decoded), anonymous memory (RssAnon) after 10^6 lookups, then the same lookups
//! against a `HashMap` built from the dumped TSV in the same process.
//!
//! Usage: `cargo bench --bench probe -- TABLE.bale DUMP.tsv [LOOKUPS]`; prints one JSON object.

use std::collections::HashMap;
use std::hint::black_box;
use std::io::BufRead;
use std::path::Path;
use std::time::Instant;

use baler::read::Options;
use baler::Table;

fn rss_anon_kib() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find_map(|l| l.strip_prefix("RssAnon:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse().ok())
        .unwrap_or(0)
}

fn splitmix(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let (table_path, tsv_path) = (Path::new(&args[0]), Path::new(&args[1]));
    let lookups: usize = args
        .get(2)
        .and_then(|v| v.parse().ok())
        .unwrap_or(1_000_000);

    let rss_start = rss_anon_kib();
    let mut opens = Vec::new();
    for _ in 0..201 {
        let t = Instant::now();
        let table = Table::open(table_path).unwrap();
        opens.push(t.elapsed().as_secs_f64());
        black_box(table.pairs());
    }
    opens.sort_by(f64::total_cmp);
    let table = Table::open(table_path).unwrap();

    // Queries: 100 000 sources spread over the table (every k-th in byte order), shuffled.
    let step = (table.sources() / 100_000).max(1) as usize;
    let distinct: Vec<String> = table
        .source_phrases()
        .step_by(step)
        .map(|s| s.unwrap())
        .collect();
    let mut state = 42u64;
    let order: Vec<u32> = (0..lookups)
        .map(|_| (splitmix(&mut state) % distinct.len() as u64) as u32)
        .collect();
    let rss_queries = rss_anon_kib();

    let mut options = Options::default();
    let t = Instant::now();
    let mut touched = 0usize;
    for &i in &order {
        table
            .lookup_into(&distinct[i as usize], &mut options)
            .unwrap();
        for o in options.iter() {
            touched += o.target().len() + o.scores().len();
        }
    }
    let packed_secs = t.elapsed().as_secs_f64();
    let rss_after = rss_anon_kib();
    black_box(touched);

    // The baseline map, built from the dump (same targets and quantized scores).
    let t = Instant::now();
    let mut map: HashMap<String, Vec<(String, Vec<f32>)>> = HashMap::new();
    let reader = baler::files::open_input(tsv_path).unwrap();
    let mut lines = reader.lines();
    for line in lines.by_ref() {
        if !line.unwrap().starts_with('#') {
            break; // the header line
        }
    }
    for line in lines {
        let line = line.unwrap();
        let mut fields = line.split('\t');
        let source = fields.next().unwrap().to_string();
        let target = fields.next().unwrap().to_string();
        let scores = fields.map(|f| f.parse::<f32>().unwrap_or(0.0)).collect();
        map.entry(source).or_default().push((target, scores));
    }
    let build_secs = t.elapsed().as_secs_f64();
    let rss_map = rss_anon_kib();
    let t = Instant::now();
    let mut touched = 0usize;
    for &i in &order {
        if let Some(options) = map.get(distinct[i as usize].as_str()) {
            for (target, scores) in options {
                touched += target.len() + scores.len();
            }
        }
    }
    let map_secs = t.elapsed().as_secs_f64();
    black_box(touched);

    println!(
        "{{\"pairs\": {}, \"open_median_ms\": {:.4}, \"open_max_ms\": {:.4}, \"lookups\": {}, \
         \"packed_lookups_per_s\": {:.0}, \"hashmap_lookups_per_s\": {:.0}, \
         \"rss_anon_start_kib\": {}, \"rss_anon_with_queries_kib\": {}, \"rss_anon_after_lookups_kib\": {}, \
         \"hashmap_build_s\": {:.2}, \"rss_anon_with_hashmap_kib\": {}}}",
        table.pairs(),
        opens[opens.len() / 2] * 1e3,
        opens[opens.len() - 1] * 1e3,
        lookups,
        lookups as f64 / packed_secs,
        lookups as f64 / map_secs,
        rss_start,
        rss_queries,
        rss_after,
        build_secs,
        rss_map
    );
}

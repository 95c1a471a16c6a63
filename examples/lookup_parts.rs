use std::time::Instant;
fn main() {
    let args: Vec<String> = std::env::args().collect();
    let table = baler::Table::open(std::path::Path::new(&args[1])).unwrap();
    let step = (table.sources() / 100_000).max(1) as usize;
    let q: Vec<String> = table
        .source_phrases()
        .step_by(step)
        .map(|s| s.unwrap())
        .collect();
    let mut st = 42u64;
    let count: usize = args
        .get(2)
        .and_then(|v| v.parse().ok())
        .unwrap_or(1_000_000);
    let order: Vec<usize> = (0..count)
        .map(|_| {
            st = st.wrapping_mul(6364136223846793005).wrapping_add(1);
            ((st >> 33) % q.len() as u64) as usize
        })
        .collect();
    let t = Instant::now();
    let mut n = 0u64;
    for &i in &order {
        n += table.source_ordinal(&q[i]).unwrap().unwrap();
    }
    let fst_t = t.elapsed().as_secs_f64();
    let mut o = baler::read::Options::default();
    let t = Instant::now();
    let mut opts = 0usize;
    for &i in &order {
        table.lookup_into(&q[i], &mut o).unwrap();
        opts += o.len();
    }
    let all_t = t.elapsed().as_secs_f64();
    println!(
        "fst {:.2} us, full {:.2} us, options/lookup {:.2} ({})",
        fst_t,
        all_t,
        opts as f64 / count as f64,
        n % 2
    );
}

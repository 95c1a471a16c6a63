//! Extraction over files: the one-machine runner that picks the path (in memory, partitioned
//! by source range, or map/reduce with spilled runs) and commits the table.

use std::path::Path;
use std::time::Instant;

use crate::error::Result;
use crate::extract::corpus::CorpusPaths;
use crate::extract::score::{MergeOptions, MergeSummary};
use crate::extract::sentences::TallyOptions;
use crate::extract::{self, ExtractOptions, ExtractSummary};
use crate::files::Output;

/// Extracts, scores and counts the corpus at `paths` and writes the table to `out`
/// (`.tsv`, `.tsv.zst`, `.tsv.gz` or `-`); the file appears only when complete.
pub fn extract_file(
    paths: &CorpusPaths,
    options: &ExtractOptions,
    out: &Path,
) -> Result<ExtractSummary> {
    let started = Instant::now();
    for (flag, path) in [("--source", &paths.source), ("--target", &paths.target)] {
        if path.as_os_str() == crate::files::STDIO {
            return Err(crate::Error::invalid(
                flag,
                "the corpus is read twice (extraction, then sentence-level counts): give a file, not -",
            ));
        }
    }
    extract::shard::check_settings(paths, &options.shard)?;
    crate::files::check_output(out, &paths.inputs())?;
    let mut output = Output::create(out)?;
    let summary = |done: extract::resident::ResidentSummary| ExtractSummary {
        corpus: done.info.corpus,
        pair_occurrences: done.info.pair_occurrences,
        pairs: done.pairs,
        sources: done.sources,
        targets: done.targets,
        sentence_count_passes: done.passes,
        seconds: started.elapsed().as_secs_f64(),
        step_seconds: done.step_seconds,
    };
    // A corpus far smaller than the budget goes straight to the resident path; otherwise its
    // first sentence pairs tell whether that path is expected to fit.
    let memory = options.shard.memory;
    let small = std::fs::metadata(&paths.source).is_ok_and(|m| {
        m.len()
            .saturating_mul(extract::partitioned::BYTES_PER_CORPUS_BYTE)
            <= memory
    });
    let mut sample = None;
    if !small {
        sample = Some(extract::partitioned::sample(paths, &options.shard)?);
    }
    let mut word_order_differs = false;
    if small || sample.as_ref().is_some_and(|s| s.resident_fits(memory)) {
        match extract::resident::extract_resident(
            paths,
            &options.shard,
            options.discount,
            &mut output,
            out,
        )? {
            Ok(done) => {
                output.commit()?;
                return Ok(summary(done));
            }
            Err(extract::resident::Declined::WordOrder) => word_order_differs = true,
            Err(extract::resident::Declined::OverBudget) => {}
        }
    }
    if !word_order_differs {
        let sample = match sample {
            Some(sample) => sample,
            None => extract::partitioned::sample(paths, &options.shard)?,
        };
        if let Some(done) = extract::partitioned::extract_partitioned(
            paths,
            &options.shard,
            options.discount,
            &sample,
            &mut output,
            out,
        )? {
            output.commit()?;
            return Ok(summary(done));
        }
    }
    extract_spilling(paths, options, output, started)
}

/// The map/reduce path on one machine: count runs, merge, tally, attach.
fn extract_spilling(
    paths: &CorpusPaths,
    options: &ExtractOptions,
    mut output: Output,
    started: Instant,
) -> Result<ExtractSummary> {
    let out = output.path().to_path_buf();
    let out = out.as_path();
    let work =
        crate::files::TempDir::new(options.shard.temp_dir.as_deref(), "baler-extract-work-")?;
    let merged_path = work.path().join("merged.tsv.zst");
    let index_path = work.path().join("merged.index");
    let mut steps = [0.0; 4];
    let mut lap = Instant::now();
    let mut next_lap = |k: usize| {
        steps[k] = lap.elapsed().as_secs_f64();
        lap = Instant::now();
    };
    let runs = extract::shard::extract_runs(paths, &options.shard)?;
    next_lap(0);
    let MergeSummary {
        info,
        pairs,
        sources,
        targets,
    } = {
        let merge = MergeOptions {
            discount: options.discount,
            memory: options.shard.memory,
            temp_dir: Some(work.path().to_path_buf()),
            index: Some(index_path.clone()),
            target_totals: Vec::new(),
        };
        // A temporary file: fast compression, no sync to disk.
        let werr = |e| crate::Error::io(&merged_path, "writing", e);
        let file = std::fs::File::create(&merged_path).map_err(werr)?;
        let mut merged =
            zstd::stream::write::Encoder::new(std::io::BufWriter::with_capacity(1 << 20, file), 1)
                .map_err(werr)?;
        let summary =
            extract::score::merge_and_score(&runs.runs, &mut merged, &merged_path, &merge)?;
        let mut file = merged.finish().map_err(werr)?;
        std::io::Write::flush(&mut file).map_err(werr)?;
        summary
    };
    drop(runs);
    next_lap(1);
    let tally_path = work.path().join("corpus.tally");
    let tally_options = TallyOptions {
        max_sentence_length: Some(options.shard.corpus.max_sentence_length),
        memory: options.shard.memory,
        threads: options.shard.threads,
        temp_dir: Some(work.path().to_path_buf()),
        progress: options.shard.progress,
        lines: options.shard.corpus.lines,
    };
    let counting = CorpusPaths {
        alignment: None,
        ..paths.clone()
    };
    let tally = extract::sentences::tally(&index_path, &counting, &tally_options, &tally_path)?;
    next_lap(2);
    extract::sentences::attach(&merged_path, &[tally_path], &mut output, out)?;
    output.commit()?;
    next_lap(3);
    Ok(ExtractSummary {
        corpus: info.corpus,
        pair_occurrences: info.pair_occurrences,
        pairs,
        sources,
        targets,
        sentence_count_passes: tally.passes,
        seconds: started.elapsed().as_secs_f64(),
        step_seconds: steps,
    })
}

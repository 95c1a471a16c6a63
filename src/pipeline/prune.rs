//! Pruning a file: input in any order, TSV or packed output; and pruning straight into a pack.

use std::io::BufRead;
use std::path::Path;

use super::{into_pack, Packing, TableInput};
use crate::error::{Error, Result};
use crate::files::{self, Output, TempDir, STDIO};
use crate::pack::PackReport;
use crate::prune::held::{self, Item};
use crate::prune::pipeline::Outcome;
use crate::prune::{CountSource, Filter, PruneOptions, PruneStats, Pruner, SentenceCounts};
use crate::read::is_packed;
use crate::sort::ExternalSorter;
use crate::table::{CountColumn, Header, PhrasePair, TsvReader, TsvWriter};

pub(super) type Records<'a> = Box<dyn Iterator<Item = Result<(PhrasePair, u64)>> + 'a>;

/// Prunes the table at `input` into `output` and returns what each filter did.
///
/// * `input` is an interchange TSV (optionally `.gz`/`.zst`, or `-` for stdin, which is first
///   copied to a temporary file) or, by its `.bale` extension, a packed table.
/// * TSV input sorted by source in byte order (what extraction and `baler dump` write) is
///   streamed in one pass, in memory independent of its size (unless a relative-entropy
///   filter runs, which holds the pairs reaching it). Otherwise the pass stops at the first
///   source out of order, discards its partial output, and starts again through
///   the one external sorter (`crate::sort`) within [`PruneOptions::memory`]; options of a source keep their input
///   order. An output that cannot be taken back (standard output, a pipe) is never restarted:
///   the input's order is checked first.
/// * `output` is TSV (optionally compressed, `-` for stdout) or, by its `.bale` extension, a
///   packed table, written with `packing`'s settings; settings not given there are the input
///   table's when it is packed (and the defaults otherwise), and its provenance is carried
///   forward. It appears only when complete.
/// * [`CountSource::Corpus`] reads the table once more to collect its phrases and then the
///   corpus (holding every distinct phrase and pair of the table in memory);
///   [`CountSource::PhraseCounts`] reads it once more to sum `count`.
///
/// # Examples
/// ```
/// use baler::pipeline::{prune_file, Packing};
/// use baler::prune::{Filter, PruneOptions, Ranking};
/// let dir = tempfile::tempdir().unwrap();
/// let (input, output) = (dir.path().join("in.tsv"), dir.path().join("out.tsv"));
/// std::fs::write(&input, "source\ttarget\tp_t_given_s\n\
///     velero\tsailing ship\t0.6\nvelero\tsailboat\t0.3\nancla\tanchor\t0.9\n").unwrap();
/// let options = PruneOptions {
///     filters: vec![Filter::TopK { k: 1, by: Ranking::default() }],
///     ..Default::default()
/// };
/// let stats = prune_file(&input, &output, &options, &Packing::default())?;
/// assert!(stats.sorted_externally); // "ancla" came after "velero"
/// assert_eq!(std::fs::read_to_string(&output).unwrap(),
///            "# pruned_with=--top-k 1 --by p_t_given_s\nsource\ttarget\tp_t_given_s\n\
///             ancla\tanchor\t0.9\nvelero\tsailing ship\t0.6\n");
/// # Ok::<(), baler::Error>(())
/// ```
pub fn prune_file(
    input: &Path,
    output: &Path,
    options: &PruneOptions,
    packing: &Packing,
) -> Result<PruneStats> {
    let name = input.to_string_lossy().into_owned();
    let memory = if options.memory == 0 {
        crate::settings::DEFAULT_MEMORY
    } else {
        options.memory
    };
    let mut inputs = vec![input];
    if let CountSource::Corpus { source, target } = &options.counts {
        inputs.extend([source.as_path(), target.as_path()]);
    }
    files::check_output(output, &inputs)?;
    // stdin is copied once so that it can be read again (sorting, counting passes)
    let spool_dir;
    let spooled;
    let path: &Path = if input.as_os_str() == STDIO {
        spool_dir = TempDir::new(packing.resources.temp_dir.as_deref(), "baler-stdin-")?;
        spooled = spool_dir.path().join("input");
        let mut file = std::fs::File::create(&spooled)
            .map_err(|e| Error::io(spool_dir.path(), "creating a temporary file in", e))?;
        std::io::copy(&mut files::open_input(input)?, &mut file)
            .map_err(|e| Error::io(&spooled, "writing", e))?;
        &spooled
    } else {
        input
    };
    let source = TableInput::open(path, &name)?;
    let needs_test = options.annotate
        || options
            .filters
            .iter()
            .any(|f| matches!(f, Filter::Significance(_)));
    let header = source.header()?;
    let mut corpus = None;
    let mut occurrences = None;
    if needs_test {
        match &options.counts {
            CountSource::Table => {}
            CountSource::Corpus {
                source: src,
                target,
            } => {
                let mut pairs = Vec::new();
                for r in source.records()? {
                    let (p, _) = r?;
                    pairs.push((p.source, p.target));
                }
                // The sentence pairs the extraction kept: none longer than its limit.
                let max_sentence_length = header
                    .metadata
                    .get("max_sentence_length")
                    .and_then(|v| v.parse().ok())
                    .unwrap_or(usize::MAX);
                corpus = Some(SentenceCounts::count_up_to(
                    pairs.iter().map(|(s, t)| (s.as_str(), t.as_str())),
                    files::open_input(src)?,
                    &src.to_string_lossy(),
                    files::open_input(target)?,
                    &target.to_string_lossy(),
                    max_sentence_length,
                )?);
            }
            CountSource::PhraseCounts => {
                if let Some(i) = header.schema.count_index(CountColumn::Count) {
                    let mut sum = 0u64;
                    for r in source.records()? {
                        sum += r?.0.counts[i];
                    }
                    occurrences = Some(sum);
                }
            }
        }
    }
    let make = |corpus: Option<SentenceCounts>| {
        Pruner::with_counts(&header, &name, options, corpus, occurrences)
    };
    let mut sink = Sink {
        output,
        memory,
        packing,
        input: &source,
    };
    let progress = Progress::new(options.progress);
    // An output that cannot be taken back is only written once the order is known.
    let stream_first = sink.can_restart() || source.sorted_by_source()?;
    let mut pruner = make(corpus.take())?;
    if stream_first {
        let records = source.records()?;
        let header_out = pruner.header().clone();
        let outcome = sink.write(&header_out, |emit| {
            pruner.run_sorted(progress.wrap(records), emit)
        })?;
        if let Outcome::Done = outcome {
            progress.finish();
            return Ok(pruner.stats().clone());
        }
        // second attempt: sort by source, then stream
        let corpus = pruner.take_corpus();
        pruner = make(corpus)?;
        progress.restart("sorting by source");
    }
    let sorted = sort_by_source(source.records()?, memory, packing, &progress)?;
    progress.restart("pruning");
    let header_out = pruner.header().clone();
    let outcome = sink.write(&header_out, |emit| {
        pruner.run_sorted(progress.wrap(sorted), emit)
    })?;
    progress.finish();
    match outcome {
        Outcome::Done => {
            let mut stats = pruner.stats().clone();
            stats.sorted_externally = true;
            Ok(stats)
        }
        Outcome::Unsorted { .. } => Err(Error::Internal(
            "records are still out of order after sorting",
        )),
    }
}

/// `records` in source order through the one external sorter, within `memory`.
fn sort_by_source<'a>(
    records: Records<'a>,
    memory: u64,
    packing: &Packing,
    progress: &Progress,
) -> Result<Records<'a>> {
    let mut sorter = ExternalSorter::new(memory as usize, packing.resources.temp_dir.clone())?;
    let mut value = Vec::new();
    for r in progress.wrap(records) {
        let (pair, line) = r?;
        value.clear();
        let item = Item {
            pair,
            line,
            neg_ln_p: None,
        };
        held::encode(&item, &mut value);
        sorter.push(item.pair.source.as_bytes(), &value)?;
    }
    let mut sorted = sorter.finish()?;
    Ok(Box::new(std::iter::from_fn(move || {
        match sorted.next_record() {
            Ok(Some((_, mut value))) => Some(held::decode(&mut value).map(|i| (i.pair, i.line))),
            Ok(None) => None,
            Err(e) => Some(Err(e)),
        }
    })))
}

/// Prunes `input` (a packed table, or an interchange TSV grouped by source in byte order as
/// extraction, `baler prune` and `baler dump` write it) and packs what is kept straight into
/// `output`: the pruner's output goes through a channel to the packer on another thread,
/// with no intermediate file. The packed file records the filters (`pruned_with`), the
/// input's name (unless `packing.provenance` names an `input` already) and
/// `packing.provenance`; settings not given in `packing` are a packed input's.
///
/// # Examples
/// ```
/// use baler::pipeline::{prune_and_pack, Packing};
/// use baler::prune::{Filter, PruneOptions, Ranking};
/// let dir = tempfile::tempdir().unwrap();
/// let (input, output) = (dir.path().join("in.tsv"), dir.path().join("out.bale"));
/// std::fs::write(&input, "source\ttarget\tp_t_given_s\n\
///     grapa\tstaple\t0.7\ngrapa\tclamp\t0.3\n").unwrap();
/// let prune = PruneOptions {
///     filters: vec![Filter::TopK { k: 1, by: Ranking::default() }],
///     ..Default::default()
/// };
/// let (stats, report) = prune_and_pack(&input, &output, &prune, &Packing::default())?;
/// assert_eq!((stats.pairs_out, report.meta.pairs), (1, 1));
/// assert_eq!(baler::Table::open(&output)?.lookup("grapa")?.len(), 1);
/// # Ok::<(), baler::Error>(())
/// ```
pub fn prune_and_pack(
    input: &Path,
    output: &Path,
    prune: &PruneOptions,
    packing: &Packing,
) -> Result<(PruneStats, PackReport)> {
    files::check_output(output, &[input])?;
    let name = input.display().to_string();
    let source = TableInput::open(input, &name)?;
    let header = source.header()?;
    let mut pruner = Pruner::new(&header, &name, prune)?;
    let header_out = pruner.header().clone();
    let mut options = packing.options(source.table());
    let filters = header_out
        .metadata
        .get("pruned_with")
        .unwrap_or("")
        .to_string();
    options
        .provenance
        .insert(0, ("pruned_with".into(), filters));
    if !options.provenance.iter().any(|(k, _)| k == "input") {
        options.provenance.insert(0, ("input".into(), name.clone()));
    }
    let records = source.records()?;
    let ((), packed) = into_pack(
        &header_out,
        output,
        &options,
        |emit| pruner.run(records, emit),
        |_| true,
    )?;
    let packed = packed.ok_or(Error::Internal("the packer did not finish"))?;
    Ok((pruner.stats().clone(), packed))
}

/// TSV records with their line numbers.
pub(super) struct Numbered<R> {
    pub(super) reader: TsvReader<R>,
}

impl<R: BufRead> Iterator for Numbered<R> {
    type Item = Result<(PhrasePair, u64)>;
    fn next(&mut self) -> Option<Self::Item> {
        let mut pair = PhrasePair::default();
        match self.reader.read_into(&mut pair) {
            Ok(true) => Some(Ok((pair, self.reader.line()))),
            Ok(false) => None,
            Err(e) => Some(Err(e)),
        }
    }
}

type Emit<'e> = dyn FnMut(&PhrasePair) -> Result<()> + 'e;

/// Where pruned pairs go: a TSV [`Output`] or a packer.
struct Sink<'a> {
    output: &'a Path,
    memory: u64,
    packing: &'a Packing,
    input: &'a TableInput,
}

impl Sink<'_> {
    /// Whether a partial output can be discarded and written again: anything but standard
    /// output or a device or pipe.
    fn can_restart(&self) -> bool {
        self.output.as_os_str() != STDIO
            && std::fs::metadata(self.output).map_or(true, |m| m.is_file())
    }

    /// Opens the output, lets `body` emit pairs into it, and commits it only when `body`
    /// reports [`Outcome::Done`].
    fn write<B>(&mut self, header: &Header, body: B) -> Result<Outcome>
    where
        B: FnOnce(&mut Emit<'_>) -> Result<Outcome>,
    {
        let output = self.output;
        if !is_packed(output) {
            let out = Output::create(output)?;
            let mut writer =
                TsvWriter::new(out, header).map_err(|e| Error::io(output, "writing", e))?;
            let outcome = body(&mut |pair: &PhrasePair| {
                writer
                    .write_pair(pair)
                    .map_err(|e| Error::io(output, "writing", e))
            })?;
            if let Outcome::Done = outcome {
                writer.into_inner().commit()?;
            }
            return Ok(outcome);
        }
        let mut options = self.packing.options(self.input.table());
        options.memory = self.memory;
        options
            .provenance
            .insert(0, ("pruned_with".into(), header_filters(header)));
        let (outcome, _) = into_pack(header, output, &options, body, |o| {
            matches!(o, Outcome::Done)
        })?;
        Ok(outcome)
    }
}

fn header_filters(header: &Header) -> String {
    header.metadata.get("pruned_with").unwrap_or("").to_string()
}

/// A spinner with the number of pairs read, on stderr when it is a terminal.
struct Progress {
    bar: indicatif::ProgressBar,
}

impl Progress {
    fn new(show: bool) -> Progress {
        let bar = if show {
            let bar = indicatif::ProgressBar::new_spinner();
            bar.set_style(
                indicatif::ProgressStyle::with_template(
                    "{spinner} {msg}: {human_pos} pairs ({per_sec}, {elapsed})",
                )
                .expect("valid template"),
            );
            bar.set_message("pruning");
            bar
        } else {
            indicatif::ProgressBar::hidden()
        };
        Progress { bar }
    }

    fn wrap<'a>(&self, records: Records<'a>) -> Records<'a> {
        let bar = self.bar.clone();
        let mut pending = 0u64;
        Box::new(records.inspect(move |_| {
            pending += 1;
            if pending == 1 << 14 {
                bar.inc(pending);
                pending = 0;
            }
        }))
    }

    fn restart(&self, message: &'static str) {
        self.bar.set_position(0);
        self.bar.set_message(message);
    }

    fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.bar.finish_and_clear();
    }
}

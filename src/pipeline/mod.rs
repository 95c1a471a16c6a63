//! Orchestration: the one place that wires the stages together over files.
//!
//! The stages (`extract`, `prune`, `pack`, `read`, `measure`) are transformations of streams
//! and know nothing of each other; the runners here open the inputs, check the outputs before
//! any work starts ([`crate::files::check_output`]), connect the stages and commit the outputs:
//!
//! * [`extract_file`]: a word-aligned corpus into a scored table (the one-machine path
//!   chosen by the corpus's size against `--memory`).
//! * [`prune_file`]: a table in any order, TSV or packed, into TSV or a packed table.
//! * [`prune_and_pack`]: a source-grouped table pruned straight into a packed table, with no
//!   intermediate file (what `build` and `sweep` do).
//! * [`build`]: a whole build from a recipe (extract, prune into a pack, report).
//! * [`sweep`]: prune and pack at every setting of a grid and measure each.
//! * [`pack_file`]: a TSV or an already packed table into a packed table (a repack keeps the
//!   input's settings unless others are given).
//!
//! The prune → pack channel exists once (`into_pack`): when the packer stops, its own error
//! is reported, not the pruner's failure to hand it more pairs.

mod build;
mod extract;
mod prune;
mod sweep;

pub use build::{build, BuildReport};
pub use extract::extract_file;
pub use prune::{prune_and_pack, prune_file};
pub use sweep::sweep;

use std::io::BufRead;
use std::path::{Path, PathBuf};
use std::sync::mpsc;

use crate::error::{Error, Result};
use crate::files::{self, TempDir};
use crate::pack::{self, PackOptions, PackReport};
use crate::read::{is_packed, Table};
use crate::settings::{PackSettings, Resources};
use crate::table::{Header, PhrasePair, TsvReader};
use prune::{Numbered, Records};

/// How packed outputs are written: the settings given (the rest come from a packed input, or
/// the defaults), the resources, and provenance to record.
#[derive(Clone, Debug, Default)]
pub struct Packing {
    /// Settings given by the user.
    pub settings: PackSettings,
    /// Memory, threads and temporary directory.
    pub resources: Resources,
    /// Progress bars on stderr.
    pub progress: bool,
    /// Extra provenance entries.
    pub provenance: Vec<(String, String)>,
}

impl Packing {
    /// The pack options for an output made from `input` (a packed table whose settings and
    /// provenance carry forward, or `None`).
    pub fn options(&self, input: Option<&Table>) -> PackOptions {
        let inherited =
            input.map_or_else(PackSettings::default, |t| PackSettings::of_table(t.meta()));
        let mut options = self.resources.pack_options(&self.settings.or(&inherited));
        options.progress = self.progress;
        options.provenance = self.provenance.clone();
        if let Some(t) = input {
            // The earlier table's provenance, one level deeper each time it is carried.
            for (k, v) in &t.meta().provenance {
                options
                    .provenance
                    .push((format!("previous.{k}"), v.clone()));
            }
        }
        options
    }
}

/// An input table: a packed `.bale` or an interchange TSV (read again for every pass).
pub(crate) enum TableInput {
    Packed(Box<Table>),
    Tsv { path: PathBuf, name: String },
}

impl TableInput {
    /// Opens `path` (named `name` in messages), by its extension.
    pub(crate) fn open(path: &Path, name: &str) -> Result<TableInput> {
        Ok(if is_packed(path) {
            TableInput::Packed(Box::new(Table::open(path)?))
        } else {
            TableInput::Tsv {
                path: path.to_path_buf(),
                name: name.to_string(),
            }
        })
    }

    /// The packed table, if that is what the input is.
    pub(crate) fn table(&self) -> Option<&Table> {
        match self {
            TableInput::Packed(t) => Some(t),
            TableInput::Tsv { .. } => None,
        }
    }

    fn reader(&self) -> Result<Option<TsvReader<Box<dyn BufRead + Send>>>> {
        match self {
            TableInput::Packed(_) => Ok(None),
            TableInput::Tsv { path, name } => Ok(Some(TsvReader::new(
                files::open_input(path)?,
                name.clone(),
            )?)),
        }
    }

    /// The header (metadata and columns).
    pub(crate) fn header(&self) -> Result<Header> {
        match self {
            TableInput::Packed(t) => Ok(t.header().clone()),
            TableInput::Tsv { .. } => Ok(self.reader()?.expect("a TSV").header().clone()),
        }
    }

    /// Every record with its line number (0 for a packed table), from the start.
    pub(crate) fn records(&self) -> Result<Records<'_>> {
        match self {
            TableInput::Packed(t) => Ok(Box::new(t.pairs_iter().map(|r| r.map(|p| (p, 0))))),
            TableInput::Tsv { .. } => Ok(Box::new(Numbered {
                reader: self.reader()?.expect("a TSV"),
            })),
        }
    }

    /// Whether sources never decrease in byte order (a packed table's always are). Reads a
    /// TSV once.
    pub(crate) fn sorted_by_source(&self) -> Result<bool> {
        let Some(mut reader) = self.reader()? else {
            return Ok(true);
        };
        let (mut previous, mut pair) = (PhrasePair::default(), PhrasePair::default());
        while reader.read_into(&mut pair)? {
            if pair.source < previous.source {
                return Ok(false);
            }
            std::mem::swap(&mut previous, &mut pair);
        }
        Ok(true)
    }
}

type Emit<'e> = dyn FnMut(&PhrasePair) -> Result<()> + 'e;

/// Runs `body`, which emits pairs following `header`, with a packer on another thread writing
/// them to `output`. The output is committed when `complete` accepts what `body` returned, and
/// abandoned (nothing left behind) otherwise: then the report is `None`. When the packer
/// stops first, its own error is returned.
///
/// The packer's temporary files go to a directory of this run, removed at the end or on an
/// interrupt.
pub(crate) fn into_pack<T>(
    header: &Header,
    output: &Path,
    options: &PackOptions,
    body: impl FnOnce(&mut Emit<'_>) -> Result<T>,
    complete: impl Fn(&T) -> bool,
) -> Result<(T, Option<PackReport>)> {
    let temp = TempDir::new(options.temp_dir.as_deref(), "baler-")?;
    let options = PackOptions {
        temp_dir: Some(temp.path().to_path_buf()),
        ..options.clone()
    };
    std::thread::scope(|scope| {
        let (sender, receiver) = mpsc::sync_channel::<Result<PhrasePair>>(4096);
        let options = &options;
        let packer =
            scope.spawn(move || pack::pack_pairs(header, receiver.into_iter(), output, options));
        let outcome = body(&mut |pair: &PhrasePair| {
            sender
                .send(Ok(pair.clone()))
                .map_err(|_| Error::ConsumerStopped)
        });
        let done = matches!(&outcome, Ok(t) if complete(t));
        if !done {
            // make the packer fail, so that it leaves nothing behind
            let _ = sender.send(Err(Error::Internal("the run was abandoned")));
        }
        drop(sender);
        let packed = packer
            .join()
            .map_err(|_| Error::WorkerPanicked { worker: "packer" })?;
        match outcome {
            Ok(t) if done => Ok((t, Some(packed?))),
            Ok(t) => Ok((t, None)),
            Err(Error::ConsumerStopped) => Err(packed.err().unwrap_or(Error::ConsumerStopped)),
            Err(e) => Err(e),
        }
    })
}

/// Packs the table at `input` — interchange TSV in any order (`.gz`/`.zst`, `-` for standard
/// input) or an already packed table, which is repacked — into `output`.
///
/// A packed input's settings (bits, block size, compression) and provenance carry forward
/// unless `packing` gives others.
///
/// # Examples
/// ```
/// use baler::pipeline::{pack_file, Packing};
/// let dir = tempfile::tempdir().unwrap();
/// let (tsv, first, second) = (dir.path().join("t.tsv"), dir.path().join("a.bale"),
///                             dir.path().join("b.bale"));
/// std::fs::write(&tsv, "source\ttarget\tp_t_given_s\nbarco\tboat\t0.9\nbarco\tship\t0.1\n").unwrap();
/// let mut packing = Packing::default();
/// packing.settings.set("bits", "f32")?;
/// pack_file(&tsv, &first, &packing)?;
/// let report = pack_file(&first, &second, &Packing::default())?; // keeps f32
/// assert_eq!(report.meta.quantization[0].storage, "f32");
/// # Ok::<(), baler::Error>(())
/// ```
pub fn pack_file(input: &Path, output: &Path, packing: &Packing) -> Result<PackReport> {
    files::check_output(output, &[input])?;
    let name = input.display().to_string();
    let temp = TempDir::new(packing.resources.temp_dir.as_deref(), "baler-")?;
    let mut packing = packing.clone();
    packing.resources.temp_dir = Some(temp.path().to_path_buf());
    if is_packed(input) {
        let table = Table::open(input)?;
        let mut options = packing.options(Some(&table));
        options.provenance.insert(0, ("input".into(), name));
        pack::pack_pairs(table.header(), table.pairs_iter(), output, &options)
    } else {
        let options = packing.options(None);
        pack::pack_tsv(files::open_input(input)?, &name, output, &options)
    }
}

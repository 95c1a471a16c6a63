#!/usr/bin/env python3
"""baler extract on Apache Spark: the one-machine job's map and reduce steps as a Spark job.

Run with spark-submit (see README.md beside this file):

    spark-submit --master local[2] spark/baler_spark.py --baler target/release/baler \\
        --source train.en --target train.fr --alignment train.align -o table.tsv

The job, stage by stage (each stage runs the baler binary, shipped to the executors with
SparkContext.addFile):

1. split keys: a sample of the source sentences' phrases gives R-1 split keys, so that the
   R source key ranges hold about equal numbers of phrases;
2. map: the corpus is split into P partitions of consecutive lines; each partition runs
   `baler extract shard --lines FIRST-LAST --start-bytes S,T,A --split-keys KEYS` (the byte
   offsets of line FIRST, found by the driver in one pass over the plain files), which writes one count run per
   source key range and the partition's target totals. The runs are shuffled by range; the
   target totals go to every range;
3. reduce: range r merges its runs from every partition with
   `baler extract merge --target-totals ...`, writing the rows of range r and their phrase
   index to the work directory;
4. map: each (partition, range) runs `baler extract tally --lines FIRST-LAST` against the
   range's index; the tallies are shuffled by range;
5. reduce: range r runs `baler extract attach`;
6. the ranges' tables are concatenated in order (the header once) into a temporary file
   beside the output, renamed into place when complete.

Line numbers: `--lines` makes each partition read the corpus files themselves from its first
line, so an error names the corpus file and its own line number, as on one machine. A failed
task fails the job with baler's message; the work directory and the partial output are
removed, and the driver exits with status 2.

The corpus files, the work directory and the output must be on a file system that the driver
and every executor see under the same paths (a shared or network file system, or an object
store mounted as one).
"""

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import urllib.request

ERROR_MARK = "BALER-TASK-ERROR"


class JobError(Exception):
    """A failure to report as `baler-spark: error: ...` with exit status 2."""


def parse_args(argv):
    p = argparse.ArgumentParser(
        prog="baler_spark.py",
        description="Phrase-pair extraction with baler's map and reduce steps on Apache Spark.",
    )
    p.add_argument("--baler", required=True, help="the baler binary (shipped to the executors)")
    p.add_argument("--source", required=True, help="source side, one tokenized sentence a line")
    p.add_argument("--target", required=True, help="target side, line-parallel")
    p.add_argument("--alignment", required=True, help="word alignment, one line per pair")
    p.add_argument("-o", "--output", required=True, help="the table to write (.tsv)")
    p.add_argument("--partitions", type=int, default=0,
                   help="corpus partitions (default: one per --partition-lines lines, and at "
                        "least Spark's default parallelism)")
    p.add_argument("--partition-lines", type=int, default=200_000,
                   help="lines per corpus partition when --partitions is not given")
    p.add_argument("--ranges", type=int, default=0,
                   help="source key ranges, i.e. reducers (default: Spark's default parallelism)")
    p.add_argument("--sample-lines", type=int, default=20_000,
                   help="source lines sampled to choose the split keys")
    p.add_argument("--max-length", type=int, default=7)
    p.add_argument("--max-sentence-length", type=int, default=100)
    p.add_argument("--no-unaligned-edges", action="store_true")
    p.add_argument("--links-target-first", action="store_true")
    p.add_argument("--memory", default="1G", help="baler's --memory for each task")
    p.add_argument("--work-dir", default=None,
                   help="shared directory for the ranges' tables and indexes "
                        "(default: a new directory beside the output)")
    p.add_argument("--metrics", default=None,
                   help="write the job's timings and exchanged bytes as JSON to this file")
    return p.parse_args(argv)


# ---------------------------------------------------------------- helpers run on executors


def _binary():
    from pyspark import SparkFiles

    path = SparkFiles.get("baler")
    if not os.access(path, os.X_OK):
        os.chmod(path, 0o755)
    return path


def _run(args, what):
    """Runs baler; on failure raises with baler's own message, marked for the driver."""
    done = subprocess.run(args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    if done.returncode != 0:
        lines = done.stderr.strip().splitlines()
        errors = [line for line in lines if re.match(r"(baler: )?error: ", line)]
        message = (errors or lines or [f"exit status {done.returncode}"])[0]
        message = re.sub(r"^(baler: )?error: ", "", message)
        raise RuntimeError(f"{ERROR_MARK}[{what}: {message}]{ERROR_MARK}")


def _read(path):
    with open(path, "rb") as f:
        return f.read()


# ---------------------------------------------------------------- driver side


def count_lines(path):
    """Lines of a corpus file as baler counts them (a last line without a newline counts)."""
    if path.endswith(".zst"):
        proc = subprocess.Popen(["zstd", "-dc", path], stdout=subprocess.PIPE)
        stream = proc.stdout
    elif path.endswith(".gz"):
        import gzip

        stream, proc = gzip.open(path, "rb"), None
    else:
        stream, proc = open(path, "rb"), None
    lines, last = 0, b"\n"
    with stream:
        while True:
            block = stream.read(1 << 22)
            if not block:
                break
            lines += block.count(b"\n")
            last = block[-1:]
    if proc is not None and proc.wait() != 0:
        raise JobError(f"{path}: could not be decompressed with zstd")
    return lines + (last != b"\n")


def line_starts(path, firsts):
    """Byte offsets where the 1-based lines `firsts` (increasing) begin in a plain file: one
    pass over it. A line past the end gets the file's size."""
    offsets, seen, base = [], 0, 0  # newlines seen before `base`
    wanted = list(firsts)
    with open(path, "rb") as f:
        while len(offsets) < len(wanted):
            block = f.read(1 << 22)
            if not block:
                break
            count = block.count(b"\n")
            pos = 0
            while len(offsets) < len(wanted) and wanted[len(offsets)] - 1 <= seen + count:
                need = wanted[len(offsets)] - 1 - seen  # newlines still to pass in this block
                if need == 0:
                    offsets.append(base + pos)
                    continue
                for _ in range(need):
                    pos = block.index(b"\n", pos) + 1
                seen += need
                count -= need
                offsets.append(base + pos)
            seen += count
            base += len(block)
    size = os.path.getsize(path)
    return offsets + [size] * (len(wanted) - len(offsets))


def line_ranges(total, partitions):
    """P ranges of consecutive lines; the last one is open at the end (`FIRST-`), so that it
    checks the three files end together."""
    partitions = max(1, min(partitions, max(total, 1)))
    size = -(-max(total, 1) // partitions)
    ranges = []
    for k in range(partitions):
        first = k * size + 1
        last = min((k + 1) * size, total)
        ranges.append(f"{first}-" if k == partitions - 1 else f"{first}-{last}")
    return ranges


def sample_lines(path, wanted):
    """About `wanted` lines spread evenly over a plain file, read by seeking (the first
    `wanted` lines of a compressed one)."""
    if path.endswith((".gz", ".zst")):
        if path.endswith(".gz"):
            import gzip

            stream = gzip.open(path, "rb")
        else:
            stream = subprocess.Popen(["zstd", "-dc", path], stdout=subprocess.PIPE).stdout
        with stream:
            return [stream.readline().decode("utf-8", "replace") for _ in range(wanted)]
    size = os.path.getsize(path)
    lines = []
    with open(path, "rb") as f:
        for k in range(wanted):
            f.seek(k * size // wanted)
            if k > 0:
                f.readline()  # the rest of a line begun before the offset
            raw = f.readline()
            if raw:
                lines.append(raw.decode("utf-8", "replace"))
    return lines


def source_phrases(line, max_length, max_sentence_length):
    tokens = line.split()
    if not tokens or len(tokens) > max_sentence_length:
        return []
    out = []
    for i in range(len(tokens)):
        for n in range(1, max_length + 1):
            if i + n > len(tokens):
                break
            out.append(" ".join(tokens[i:i + n]))
    return out


def split_keys(sample, ranges):
    """R-1 strictly increasing split keys (byte order) at the quantiles of the sampled source
    phrases."""
    if ranges <= 1 or not sample:
        return []
    sample = sorted(p.encode("utf-8") for p in sample)
    keys = []
    for k in range(1, ranges):
        key = sample[k * len(sample) // ranges]
        if (not keys or key > keys[-1]) and b"\t" not in key and b"\0" not in key:
            keys.append(key)
    return keys


def task_error(exc):
    """baler's message from a failed Spark job, or None."""
    found = re.search(re.escape(ERROR_MARK) + r"\[(.*?)\]" + re.escape(ERROR_MARK), str(exc),
                      re.S)
    return found.group(1) if found else None


def shuffle_bytes(sc):
    """Shuffle bytes written, per stage, from the Spark UI's REST API (None when it is off)."""
    url = sc.uiWebUrl
    if not url:
        return None
    try:
        app = sc.applicationId
        with urllib.request.urlopen(f"{url}/api/v1/applications/{app}/stages", timeout=10) as r:
            stages = json.load(r)
    except OSError:
        return None
    return sum(s.get("shuffleWriteBytes", 0) for s in stages if s.get("status") == "COMPLETE")


def run_job(sc, args, work, metrics):
    started = time.time()
    for path in (args.source, args.target, args.alignment, args.baler):
        if not os.path.isfile(path):
            raise JobError(f"{path}: no such file")
    if not args.output.endswith(".tsv"):
        raise JobError(f"{args.output}: the Spark driver writes plain TSV: name it *.tsv")
    sc.addFile(os.path.abspath(args.baler))
    source = os.path.abspath(args.source)
    target = os.path.abspath(args.target)
    alignment = os.path.abspath(args.alignment)

    total = count_lines(source)
    partitions = args.partitions or max(sc.defaultParallelism, -(-total // args.partition_lines))
    lines = line_ranges(total, partitions)
    ranges = args.ranges or sc.defaultParallelism
    metrics.update(lines=total, partitions=len(lines), ranges_asked=ranges)
    # Where each partition begins in each plain file, so that no task reads the lines before
    # its own (compressed files are read from their start and the lines passed over).
    firsts = [int(r.split("-")[0]) for r in lines]
    starts = [[] for _ in lines]
    files = (source, target, alignment)
    if not any(f.endswith((".gz", ".zst")) for f in files):
        for path in files:
            for k, offset in enumerate(line_starts(path, firsts)):
                starts[k].append(str(offset))
    metrics["seconds_line_offsets"] = round(time.time() - started, 3)

    # 1. split keys from a sample of the source side's phrases.
    sample = []
    for line in sample_lines(source, args.sample_lines):
        sample.extend(source_phrases(line, args.max_length, args.max_sentence_length))
    keys = split_keys(sample, ranges)
    key_text = b"".join(k + b"\n" for k in keys)
    ranges = len(keys) + 1
    metrics["ranges"] = ranges
    metrics["seconds_split_keys"] = round(time.time() - started, 3)

    common = [f"--max-sentence-length={args.max_sentence_length}"]
    shard_flags = common + [f"--max-length={args.max_length}", f"--memory={args.memory}",
                            "--threads=1", "-q"]
    if args.no_unaligned_edges:
        shard_flags.append("--no-unaligned-edges")
    if args.links_target_first:
        shard_flags.append("--links-target-first")
    exchanged = {k: sc.accumulator(0) for k in ("runs", "totals", "tallies")}

    # 2. map: one shard per line range, its counts split by source key range.
    def shard(index, items):
        baler = _binary()
        for p, (line_range, offsets) in items:
            seek = ["--start-bytes", ",".join(offsets)] if offsets else []
            with tempfile.TemporaryDirectory(prefix="baler-spark-") as tmp:
                keys_path = os.path.join(tmp, "keys")
                with open(keys_path, "wb") as f:
                    f.write(key_text)
                prefix = os.path.join(tmp, "part")
                _run([baler, "extract", "shard", "--source", source, "--target", target,
                      "--alignment", alignment, "--lines", line_range,
                      "--split-keys", keys_path, "-o", prefix] + seek + shard_flags,
                     f"extract shard --lines {line_range}")
                totals = _read(prefix + ".targets.run")
                for r in range(ranges):
                    run = _read(f"{prefix}.{r:04d}.run")
                    exchanged["runs"].add(len(run))
                    exchanged["totals"].add(len(totals))
                    yield r, (p, "run", run)
                    yield r, (p, "totals", totals)

    tick = time.time()
    partition_list = [(p, (line_range, starts[p])) for p, line_range in enumerate(lines)]
    counts = sc.parallelize(partition_list, len(partition_list)).mapPartitionsWithIndex(shard)

    # 3. reduce: each range merges its runs with every partition's target totals.
    def merge(r, items):
        baler = _binary()
        items = sorted(items, key=lambda kv: (kv[1][0], kv[1][1]))
        if not items:
            return
        with tempfile.TemporaryDirectory(prefix="baler-spark-") as tmp:
            runs, totals = [], []
            for _, (p, kind, blob) in items:
                path = os.path.join(tmp, f"{kind}-{p:06d}.run")
                with open(path, "wb") as f:
                    f.write(blob)
                (runs if kind == "run" else totals).append(path)
            table = os.path.join(work, f"merged-{r:04d}.tsv")
            index = os.path.join(work, f"merged-{r:04d}.index")
            _run([baler, "extract", "merge", *runs, "--target-totals", *totals,
                  "-o", table, "--index", index, f"--memory={args.memory}",
                  f"--temp-dir={tmp}", "-q"], f"extract merge (range {r})")
        yield r

    merged = counts.partitionBy(ranges, lambda r: r).mapPartitionsWithIndex(merge).collect()
    if sorted(merged) != list(range(ranges)):
        raise JobError(f"ranges merged: {sorted(merged)}, expected 0 to {ranges - 1}")
    metrics["seconds_extract_merge"] = round(time.time() - tick, 3)

    # 4. map: sentence-level counts of each partition against each range's index.
    def tally(index, items):
        baler = _binary()
        for p, r, (line_range, offsets) in items:
            seek = ["--start-bytes", ",".join(offsets[:2])] if offsets else []
            with tempfile.TemporaryDirectory(prefix="baler-spark-") as tmp:
                out = os.path.join(tmp, "tally")
                _run([baler, "extract", "tally",
                      "--index", os.path.join(work, f"merged-{r:04d}.index"),
                      "--source", source, "--target", target, "--lines", line_range,
                      f"--memory={args.memory}", "--threads=1", f"--temp-dir={tmp}", "-q",
                      "-o", out] + seek + common, f"extract tally --lines {line_range} (range {r})")
                blob = _read(out)
                exchanged["tallies"].add(len(blob))
                yield r, (p, blob)

    # 5. reduce: each range attaches its tallies.
    def attach(r, items):
        baler = _binary()
        items = sorted(items, key=lambda kv: kv[1][0])
        if not items:
            return
        with tempfile.TemporaryDirectory(prefix="baler-spark-") as tmp:
            tallies = []
            for _, (p, blob) in items:
                path = os.path.join(tmp, f"tally-{p:06d}")
                with open(path, "wb") as f:
                    f.write(blob)
                tallies.append(path)
            _run([baler, "extract", "attach",
                  "--table", os.path.join(work, f"merged-{r:04d}.tsv"), *tallies,
                  "-o", os.path.join(work, f"final-{r:04d}.tsv")], f"extract attach (range {r})")
        yield r

    tick = time.time()
    jobs = [(p, r, partition) for r in range(ranges) for p, partition in partition_list]
    attached = (sc.parallelize(jobs, len(jobs)).mapPartitionsWithIndex(tally)
                .partitionBy(ranges, lambda r: r).mapPartitionsWithIndex(attach).collect())
    if sorted(attached) != list(range(ranges)):
        raise JobError(f"ranges attached: {sorted(attached)}, expected 0 to {ranges - 1}")
    metrics["seconds_tally_attach"] = round(time.time() - tick, 3)

    # 6. the ranges in order, the header once, into a temporary file renamed into place.
    tick = time.time()
    out_dir = os.path.dirname(os.path.abspath(args.output)) or "."
    fd, partial = tempfile.mkstemp(prefix=".baler-spark-partial-", dir=out_dir)
    try:
        with os.fdopen(fd, "wb") as out:
            for r in range(ranges):
                with open(os.path.join(work, f"final-{r:04d}.tsv"), "rb") as part:
                    if r > 0:  # metadata lines start with '#'; the column header follows
                        for line in part:
                            if not line.startswith(b"#"):
                                break
                    shutil.copyfileobj(part, out, 1 << 22)
            out.flush()
            os.fsync(out.fileno())
        os.replace(partial, args.output)
    except BaseException:
        if os.path.exists(partial):
            os.unlink(partial)
        raise
    metrics["seconds_concatenate"] = round(time.time() - tick, 3)
    metrics["seconds"] = round(time.time() - started, 3)
    metrics["bytes_exchanged"] = {k: v.value for k, v in exchanged.items()}
    metrics["shuffle_write_bytes_spark"] = shuffle_bytes(sc)


def main(argv=None):
    args = parse_args(sys.argv[1:] if argv is None else argv)
    from pyspark import SparkConf, SparkContext

    out_dir = os.path.dirname(os.path.abspath(args.output))
    if not os.path.isdir(out_dir):
        print(f"baler-spark: error: {out_dir}: no such directory", file=sys.stderr)
        return 2
    work = args.work_dir or out_dir
    os.makedirs(work, exist_ok=True)
    work = tempfile.mkdtemp(prefix=".baler-spark-work-", dir=work)
    conf = SparkConf().setAppName("baler extract")
    # A failed task is baler refusing its input: trying again gives the same answer.
    conf.setIfMissing("spark.task.maxFailures", "1")
    sc = SparkContext.getOrCreate(conf)
    metrics = {}
    try:
        run_job(sc, args, work, metrics)
    except JobError as e:
        print(f"baler-spark: error: {e}", file=sys.stderr)
        return 2
    except Exception as e:  # a failed Spark job: show baler's message when there is one
        message = task_error(e)
        if message is None:
            raise
        print(f"baler-spark: error: {message}", file=sys.stderr)
        return 2
    finally:
        shutil.rmtree(work, ignore_errors=True)
        sc.stop()
    if args.metrics:
        with open(args.metrics, "w") as f:
            json.dump(metrics, f, indent=1)
    print(f"baler-spark: {metrics['lines']} lines in {metrics['partitions']} partitions, "
          f"{metrics['ranges']} source key ranges; {metrics['seconds']:.1f} s",
          file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())

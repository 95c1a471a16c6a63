"""The Spark driver in local mode with 2 worker threads, against single-machine `baler extract`.

Needs pyspark (PyPI), Java 17, the release binary (BALER_BIN, default target/release/baler)
and the real corpus ../shared/data/catalogs-en-fr.tar.zst (see its README). Run by .ci/run.
"""

import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
DRIVER = REPO / "spark" / "baler_spark.py"
BALER = Path(os.environ.get("BALER_BIN", REPO / "target" / "release" / "baler"))


def spark_submit():
    """spark-submit from the pyspark installed beside this Python."""
    path = Path(sys.executable).parent / "spark-submit"
    assert path.exists(), f"{path}: pyspark's spark-submit not found (pip install pyspark)"
    return path


def environment():
    env = dict(os.environ)
    bin_dir = str(Path(sys.executable).parent)
    env["PATH"] = bin_dir + os.pathsep + env.get("PATH", "")
    env["PYSPARK_PYTHON"] = sys.executable
    env["PYSPARK_DRIVER_PYTHON"] = sys.executable
    return env


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    """The real corpus, unpacked (train.en, train.fr, train.align)."""
    for data in (REPO / ".." / "shared" / "data", REPO / ".." / ".." / "shared" / "data"):
        archive = data / "catalogs-en-fr.tar.zst"
        if archive.exists():
            break
    else:
        pytest.fail("the real corpus ../shared/data/catalogs-en-fr.tar.zst is missing")
    out = tmp_path_factory.mktemp("catalogs")
    unpack = subprocess.run(f"zstd -dc '{archive}' | tar -x -C '{out}'", shell=True)
    assert unpack.returncode == 0
    return out


def run_driver(corpus, out, extra=(), alignment=None, target=None):
    args = [str(spark_submit()), "--master", "local[2]", str(DRIVER), "--baler", str(BALER),
            "--source", str(corpus / "train.en"),
            "--target", str(target or corpus / "train.fr"),
            "--alignment", str(alignment or corpus / "train.align"),
            "-o", str(out), *extra]
    started = time.time()
    done = subprocess.run(args, env=environment(), capture_output=True, text=True)
    return done, time.time() - started


def test_local_mode_matches_single_machine(corpus, tmp_path):
    one = tmp_path / "one.tsv"
    started = time.time()
    subprocess.run([str(BALER), "extract", "-q", "--source", str(corpus / "train.en"),
                    "--target", str(corpus / "train.fr"),
                    "--alignment", str(corpus / "train.align"), "-o", str(one)], check=True)
    single = time.time() - started
    out = tmp_path / "spark.tsv"
    metrics = tmp_path / "metrics.json"
    done, seconds = run_driver(corpus, out, ["--partitions", "4", "--ranges", "3",
                                             "--metrics", str(metrics)])
    assert done.returncode == 0, done.stderr[-4000:]
    print(f"single machine {single:.1f} s, Spark local[2] {seconds:.1f} s; "
          f"{metrics.read_text()}")
    assert out.read_bytes() == one.read_bytes(), "the Spark table differs from baler extract"
    # Nothing left beside the output but the two tables and the metrics.
    assert sorted(p.name for p in tmp_path.iterdir()) == ["metrics.json", "one.tsv",
                                                          "spark.tsv"]


def test_bad_input_names_file_and_line_and_leaves_nothing(corpus, tmp_path):
    lines = (corpus / "train.align").read_text().splitlines(keepends=True)
    lines[30_000] = "0-0 3:4\n"  # line 30001, in the third of four partitions
    bad = tmp_path / "broken.align"
    bad.write_text("".join(lines))
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    done, _ = run_driver(corpus, out_dir / "table.tsv", ["--partitions", "4", "--ranges", "2"],
                         alignment=bad)
    assert done.returncode == 2, done.stderr[-4000:]
    assert f"{bad}:30001: malformed link \"3:4\"" in done.stderr, done.stderr[-4000:]
    assert list(out_dir.iterdir()) == []


def test_files_of_different_lengths_fail_the_job(corpus, tmp_path):
    short = tmp_path / "short.fr"
    with open(corpus / "train.fr", "rb") as f:
        short.write_bytes(b"".join(f.readlines()[:-1]))
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    done, _ = run_driver(corpus, out_dir / "table.tsv", ["--partitions", "3", "--ranges", "2"],
                         target=short)
    assert done.returncode == 2, done.stderr[-4000:]
    assert ":47597: line counts differ" in done.stderr, done.stderr[-4000:]
    assert list(out_dir.iterdir()) == []

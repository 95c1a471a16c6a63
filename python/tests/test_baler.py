"""Tests of the `baler` Python module against the `baler` command line on the demo table.

The demo table is packed from demo-data/toolshed.tsv by the `baler` binary: $BALER_BIN, or
target/release/baler, or target/debug/baler (build it first: `cargo build --release`).
"""

import ast
import os
import subprocess
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

import baler

ROOT = Path(__file__).resolve().parents[2]
PHRASES = [
    "the cordless drill",
    "please",
    "the workshop",
    "a spaceship",
    ".",
    "the",
    "return the drill",
    "clean the",
    "can i borrow the",
    "of the",
    "will be ready",
    "no such phrase here",
]


def baler_bin():
    for candidate in [os.environ.get("BALER_BIN"), ROOT / "target/release/baler",
                      ROOT / "target/debug/baler"]:
        if candidate and Path(candidate).is_file():
            return str(candidate)
    pytest.fail("no baler binary: run `cargo build --release` or set BALER_BIN")


def run(*args):
    out = subprocess.run([baler_bin(), *map(str, args)], capture_output=True, text=True)
    assert out.returncode in (0, 1), out.stderr
    return out.stdout


@pytest.fixture(scope="session")
def table_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "toolshed.bale"
    subprocess.run([baler_bin(), "pack", str(ROOT / "demo-data/toolshed.tsv"), "-o", str(path),
                    "--bits", "8", "--compression", "rans"], check=True, capture_output=True)
    return path


@pytest.fixture(scope="session")
def table(table_path):
    return baler.Table(table_path)


def parse_tsv(text):
    """Interchange TSV (as `baler lookup` and `baler dump` print it) into a header and rows of
    (source, target, alignment, scores, counts)."""
    lines = [line for line in text.splitlines() if not line.startswith("#")]
    header = lines[0].split("\t")
    score_cols = [i for i, c in enumerate(header) if i >= 2 and c != "alignment"
                  and c not in COUNT_COLUMNS]
    count_cols = [i for i, c in enumerate(header) if c in COUNT_COLUMNS]
    rows = []
    for line in lines[1:]:
        f = line.split("\t")
        alignment = []
        if "alignment" in header and f[header.index("alignment")]:
            alignment = [tuple(int(x) for x in link.split("-"))
                         for link in f[header.index("alignment")].split(" ")]
        rows.append((f[0], f[1], alignment,
                     {header[i]: float(f[i]) for i in score_cols},
                     {header[i]: int(f[i]) for i in count_cols}))
    return header, rows


COUNT_COLUMNS = {"count", "count_source", "count_target", "cooc", "df_source", "df_target"}


def row(source, o):
    return (source, o.target, list(o.alignment), o.scores, o.counts)


def test_lookup_equals_baler_lookup(table, table_path):
    _, expected = parse_tsv(run("lookup", table_path, *PHRASES))
    got = [row(p, o) for p in PHRASES for o in table.lookup(p)]
    assert len(got) > 30
    assert got == expected
    assert table.lookup("a spaceship") == []


def test_schema_and_length_equal_the_dump(table, table_path):
    header, rows = parse_tsv(run("dump", table_path))
    assert table.score_names == [c for c in header[2:]
                                 if c != "alignment" and c not in COUNT_COLUMNS]
    assert table.count_names == [c for c in header if c in COUNT_COLUMNS]
    assert table.has_alignment
    assert len(table) == len(rows) == 5107
    assert table.sources == len({r[0] for r in rows})


def test_iteration_equals_baler_dump(table, table_path):
    _, expected = parse_tsv(run("dump", table_path))
    got = [(p.source, p.target, list(p.alignment), p.scores, p.counts) for p in table]
    assert got == expected


def test_target_ids_spell_the_target(table):
    for phrase in PHRASES:
        for o in table.lookup(phrase):
            assert " ".join(table.word(i) for i in o.target_ids) == o.target
    assert table.word(table.vocabulary_size) is None


def sentences(n):
    text = (ROOT / "demo-data/toolshed.test.en").read_text(encoding="utf-8")
    return [line.split() for line in text.splitlines()[:n]]


def test_spans_equal_baler_lookup_of_every_sub_phrase(table, table_path):
    for tokens in sentences(8):
        subs = [" ".join(tokens[s:e]) for s in range(len(tokens))
                for e in range(s + 1, min(s + 7, len(tokens)) + 1)]
        _, expected = parse_tsv(run("lookup", table_path, *subs))
        got = [row(" ".join(tokens[sp.start:sp.end]), o)
               for sp in table.spans(tokens) for o in sp.options]
        assert got == expected
    short = table.spans(sentences(1)[0], max_len=1)
    assert all(sp.end - sp.start == 1 for sp in short)
    with pytest.raises(baler.InvalidArgumentError):
        table.spans(["the"], max_len=0)


def test_from_bytes_equals_open(table, table_path):
    in_memory = baler.Table.from_bytes(table_path.read_bytes())
    for phrase in PHRASES:
        assert [row(phrase, o) for o in in_memory.lookup(phrase)] == \
               [row(phrase, o) for o in table.lookup(phrase)]


def test_missing_and_corrupted_files_raise(table_path, tmp_path):
    with pytest.raises(baler.FileAccessError):
        baler.Table(tmp_path / "no-such.bale")
    good = table_path.read_bytes()
    damaged = {
        "empty": b"",
        "cut-header": good[:40],
        "cut-third": good[: len(good) // 3],
        "cut-end": good[:-16],
        "magic": bytes([good[0] ^ 0xFF]) + good[1:],
        "section-table": good[:60] + bytes([good[60] ^ 0x5A]) + good[61:],
        "metadata": good[:300] + bytes([good[300] ^ 0x5A]) + good[301:],
    }
    for name, data in damaged.items():
        path = tmp_path / f"{name}.bale"
        path.write_bytes(data)
        with pytest.raises(baler.CorruptTableError) as caught:
            baler.Table(path)
        assert isinstance(caught.value, baler.Error)
        assert str(path) in str(caught.value), name
        with pytest.raises(baler.CorruptTableError):
            baler.Table.from_bytes(data)
    # Flips in the bulk of the file: an error of baler's when read, or a complete read;
    # never another exception or a crash.
    for k in range(1, 6):
        at = len(good) * k // 6
        data = good[:at] + bytes([good[at] ^ 0x5A]) + good[at + 1:]
        try:
            t = baler.Table.from_bytes(data)
            for phrase in PHRASES:
                t.lookup(phrase)
            sum(1 for _ in t)
        except baler.Error:
            pass


def test_thread_pool_agrees_with_single_thread(table):
    phrases = sorted({p.source for p in table})
    single = [[row(p, o) for o in table.lookup(p)] for p in phrases]
    with ThreadPoolExecutor(max_workers=8) as pool:
        pooled = list(pool.map(lambda p: [row(p, o) for o in table.lookup(p)], phrases))
    assert pooled == single
    sents = sentences(40)
    one = [[(s.start, s.end, [o.target for o in s.options]) for s in table.spans(t)]
           for t in sents]
    with ThreadPoolExecutor(max_workers=8) as pool:
        many = list(pool.map(lambda t: [(s.start, s.end, [o.target for o in s.options])
                                        for s in table.spans(t)], sents))
    assert many == one


def test_type_hints_name_what_the_module_has():
    stub = ast.parse((Path(baler.__file__).parent / "_baler.pyi").read_text())
    for node in stub.body:
        if isinstance(node, ast.ClassDef):
            cls = getattr(baler, node.name)
            assert cls.__doc__, node.name
            for item in node.body:
                if isinstance(item, ast.FunctionDef) and not item.name.startswith("__"):
                    assert hasattr(cls, item.name), f"{node.name}.{item.name}"
                    assert getattr(cls, item.name).__doc__, f"{node.name}.{item.name}"
    public = {n for n in dir(baler._baler) if not n.startswith("_")}
    stubbed = {n.name for n in stub.body if isinstance(n, ast.ClassDef)}
    assert public <= stubbed

#!/usr/bin/env python3
"""An independent reader of packed `.bale` tables, written from format-spec/bale-format.md.

Python 3 standard library only. It parses a packed file section by section, verifies every
checksum (zlib.crc32 for the sections and the table, CRC-32C for the fst's own trailer), decodes
every record except the nodes of the fst source index, and writes the table as interchange TSV,
which must equal `baler dump` byte for byte.

The fst is not decoded, so the source phrases come from elsewhere: either a file of the phrases
in byte order (`--sources`, one per line) or the TSV that was packed (`--sources-from-tsv`, whose
distinct `source` values are sorted by their UTF-8 bytes).

zstd blocks (RFC 8878) are decompressed by the reference `zstd` command-line tool (`--zstd`,
default `zstd`), with the file's dictionary section as `-D` when present; the frame headers are
parsed here first. Section numbers in comments refer to bale-format.md.

Usage:
    reference_reader.py TABLE (--sources FILE|- | --sources-from-tsv FILE) [-o OUT]
        [--zstd PROGRAM] [--extract-block N PATH] [--dictionary-out PATH]

Exit status: 0 on success, 2 on any error (message on stderr naming the file and the reason).
"""

import argparse
import json
import os
import struct
import subprocess
import sys
import tempfile
import zlib
from decimal import Decimal

MAGIC = b"BALER\r\n\x1a"
HEADER_LEN = 24
ENTRY_LEN = 32
MAX_SECTIONS = 64
KINDS = {
    1: "metadata",
    2: "codebooks",
    3: "vocabulary",
    4: "targets",
    5: "source-index",
    6: "block-index",
    7: "options",
    8: "dictionary",
}
REQUIRED = {1, 2, 3, 4, 5, 6, 7}
COUNT_COLUMNS = ["count", "count_source", "count_target", "cooc", "df_source", "df_target"]
FORMAT_NAME = "baler packed phrase table"
ZSTD_FRAME_MAGIC = 0xFD2FB528
ZSTD_DICT_MAGIC = 0xEC30A437


class FormatError(Exception):
    """The file does not follow the specification."""


def fail(reason):
    raise FormatError(reason)


# ---------------------------------------------------------------- primitives (section 1)


def u16(b, at):
    return struct.unpack_from("<H", b, at)[0]


def u32(b, at):
    return struct.unpack_from("<I", b, at)[0]


def u64(b, at):
    return struct.unpack_from("<Q", b, at)[0]


class Varints:
    """A cursor over LEB128 varints in `data[pos:end]`."""

    def __init__(self, data, pos=0, end=None, what="data"):
        self.data = data
        self.pos = pos
        self.end = len(data) if end is None else end
        self.what = what

    def next(self):
        value = 0
        shift = 0
        for count in range(10):
            if self.pos >= self.end:
                fail(f"a varint in the {self.what} runs past its end")
            byte = self.data[self.pos]
            self.pos += 1
            if count == 9 and byte > 1:
                fail(f"a varint in the {self.what} does not fit in 64 bits")
            value |= (byte & 0x7F) << shift
            if byte < 0x80:
                return value
            shift += 7
        fail(f"a varint in the {self.what} is longer than 10 bytes")


def crc32c(data):
    """CRC-32C (Castagnoli, reflected polynomial 0x82F63B78), as used by the fst trailer."""
    table = crc32c.table
    if table is None:
        table = []
        for n in range(256):
            c = n
            for _ in range(8):
                c = (c >> 1) ^ 0x82F63B78 if c & 1 else c >> 1
            table.append(c)
        crc32c.table = table
    crc = 0xFFFFFFFF
    for byte in data:
        crc = table[(crc ^ byte) & 0xFF] ^ (crc >> 8)
    return crc ^ 0xFFFFFFFF


crc32c.table = None


# ---------------------------------------------------------------- numbers (section 9)


def format_score(x):
    """Shortest round-trip digits; positional for zero and 1e-4 <= |x| < 1e15, else d.ddde-N."""
    if x == 0.0:
        return "-0" if str(x).startswith("-") else "0"
    text = repr(x)  # shortest round-trip digits, e.g. '1.5e-07', '0.25', '1e+16', '-3.0'
    sign = ""
    if text.startswith("-"):
        sign, text = "-", text[1:]
    mantissa, _, exponent = text.partition("e")
    whole, _, fraction = mantissa.partition(".")
    digits = whole + fraction
    point = len(whole) + (int(exponent) if exponent else 0)  # x = 0.digits * 10^point
    zeros = len(digits) - len(digits.lstrip("0"))
    digits = digits[zeros:].rstrip("0")
    e = point - zeros - 1  # x = d1.d2... * 10^e
    # When x lies exactly halfway between two shortest candidates, repr rounds to the even last
    # digit but the format takes the candidate of larger magnitude (section 9).
    n = len(digits)
    if Decimal(abs(x)) - Decimal(f"{digits}e{e - n + 1}") == Decimal(f"5e{e - n}"):
        digits = str(int(digits) + 1)
        if len(digits) > n:
            e += 1
        digits = digits.rstrip("0")
    if 1e-4 <= abs(x) < 1e15:
        if e >= 0:
            if len(digits) <= e + 1:
                body = digits + "0" * (e + 1 - len(digits))
            else:
                body = digits[: e + 1] + "." + digits[e + 1 :]
        else:
            body = "0." + "0" * (-e - 1) + digits
    else:
        body = digits[0] + ("." + digits[1:] if len(digits) > 1 else "") + "e" + str(e)
    return sign + body


# ---------------------------------------------------------------- the file


class Table:
    def __init__(self, data, zstd_program="zstd"):
        self.data = data
        self.zstd_program = zstd_program
        self.read_header()
        self.read_metadata()
        self.read_codebooks()
        self.read_dictionary()
        self.read_vocabulary()
        self.read_targets()
        self.read_block_index()
        self.check_source_index()

    # section 3 and 4
    def read_header(self):
        d = self.data
        if len(d) < HEADER_LEN or d[:8] != MAGIC:
            fail("missing the magic bytes BALER\\r\\n\\x1a")
        self.major, self.minor = u16(d, 8), u16(d, 10)
        if self.major != 1:
            fail(f"format version {self.major}.{self.minor} is not 1.x")
        count = u32(d, 12)
        if not 1 <= count <= MAX_SECTIONS:
            fail(f"implausible section count {count}")
        if u32(d, 20) != 0:
            fail("the header's reserved bytes are not zero")
        table_end = HEADER_LEN + count * ENTRY_LEN
        if table_end > len(d):
            fail("the section table is cut off")
        if zlib.crc32(d[0:16] + d[HEADER_LEN:table_end]) != u32(d, 16):
            fail("the header and section table fail their checksum")
        self.sections = {}
        self.unknown = []
        spans = []
        for i in range(count):
            at = HEADER_LEN + i * ENTRY_LEN
            kind, flags, offset, length, crc, reserved = struct.unpack_from("<IIQQII", d, at)
            name = KINDS.get(kind, f"unknown kind {kind}")
            if offset + length > len(d):
                fail(f"the {name} section runs past the end of the file")
            if offset < table_end:
                fail(f"the {name} section overlaps the header")
            if self.minor == 0 and (flags != 0 or reserved != 0):
                fail(f"the {name} entry has non-zero flags or reserved bytes in a 1.0 file")
            if offset % 8 != 0:
                fail(f"the {name} section does not start on an 8-byte boundary")
            body = d[offset : offset + length]
            if zlib.crc32(body) != crc:
                fail(f"the {name} section fails its checksum")
            spans.append((offset, offset + length, name))
            if kind in KINDS:
                if kind in self.sections:
                    fail(f"the {name} section appears twice")
                self.sections[kind] = body
            else:
                self.unknown.append(kind)
        for kind in REQUIRED:
            if kind not in self.sections:
                fail(f"the {KINDS[kind]} section is missing")
        spans.sort()
        for (_, end, a), (start, _, b) in zip(spans, spans[1:]):
            if start < end:
                fail(f"the {a} and {b} sections overlap")
        # Padding (section 2): zero bytes between and after sections, file length a multiple of 8.
        position = table_end
        for start, end, name in spans:
            if any(d[position:start]):
                fail(f"non-zero padding before the {name} section")
            position = end
        if any(d[position:]) or len(d) % 8 != 0 or len(d) - position >= 8:
            fail("the file does not end with at most 7 zero padding bytes")
        self.section_count = count

    # section 5.1
    def read_metadata(self):
        try:
            meta = json.loads(self.sections[1].decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as e:
            fail(f"the metadata section is not UTF-8 JSON: {e}")
        if not isinstance(meta, dict):
            fail("the metadata is not a JSON object")
        expect = {
            "format": str,
            "pairs": int,
            "sources": int,
            "targets": int,
            "vocabulary": int,
            "scores": list,
            "counts": list,
            "alignment": bool,
            "option_order": dict,
            "sources_per_block": int,
            "block_compression": str,
            "max_block_bytes": int,
            "table_metadata": list,
            "provenance": list,
            "quantization": list,
        }
        for key, kind in expect.items():
            if not isinstance(meta.get(key), kind) or (kind is int and isinstance(meta[key], bool)):
                fail(f"metadata member {key!r} is missing or not a {kind.__name__}")
        if meta["format"] != FORMAT_NAME:
            fail(f"the metadata names the format {meta['format']!r}")
        if meta["block_compression"] not in ("zstd", "none"):
            fail(f"unknown block compression {meta['block_compression']!r}")
        if meta["sources_per_block"] < 1:
            fail("zero sources per block")
        pairs, sources, targets = meta["pairs"], meta["sources"], meta["targets"]
        if sources > pairs or targets > pairs or (pairs > 0 and sources == 0):
            fail(f"inconsistent counts: {pairs} pairs, {sources} sources, {targets} targets")
        positions = []
        for name in meta["counts"]:
            if name not in COUNT_COLUMNS:
                fail(f"unknown count column {name!r}")
            positions.append(COUNT_COLUMNS.index(name))
        if positions != sorted(set(positions)):
            fail("count columns out of canonical order")
        keys = set()
        for entry in meta["table_metadata"]:
            if not isinstance(entry, list) or len(entry) != 2:
                fail("table metadata entries are not [key, value] pairs")
            key, value = entry
            if not isinstance(key, str) or not isinstance(value, str) or key in keys:
                fail(f"table metadata key {key!r} is not a string or appears twice")
            keys.add(key)
        order = meta["option_order"]
        if order.get("by") is not None and order["by"] not in meta["scores"]:
            fail(f"the option order names an unknown column {order['by']!r}")
        self.meta = meta

    # section 5.2
    def read_codebooks(self):
        b = self.sections[2]
        pos = 0
        self.codecs = []  # (width, values or None for f32)
        for name in self.meta["scores"]:
            if pos + 8 > len(b):
                fail(f"the codebook section ends before column {name!r}")
            mode, bits, domain, reserved, entries = struct.unpack_from("<BBBBI", b, pos)
            pos += 8
            if reserved != 0 or domain not in (0, 1):
                fail(f"column {name!r} has a bad domain or reserved byte")
            if mode == 0:
                if bits != 32 or entries != 0:
                    fail(f"column {name!r} is stored as f32 but has {bits} bits, {entries} entries")
                self.codecs.append((4, None))
            elif mode == 1:
                if not 1 <= bits <= 16 or not 1 <= entries <= 1 << bits:
                    fail(f"column {name!r} has a codebook of {entries} entries for {bits} bits")
                if pos + 8 * entries > len(b):
                    fail(f"the codebook of column {name!r} is cut off")
                values = list(struct.unpack_from(f"<{entries}d", b, pos))
                pos += 8 * entries
                if any(v != v or v in (float("inf"), float("-inf")) for v in values):
                    fail(f"the codebook of column {name!r} holds a non-finite value")
                if any(a > c for a, c in zip(values, values[1:])):
                    fail(f"the codebook of column {name!r} is not ascending")
                self.codecs.append((1 if bits <= 8 else 2, values))
            else:
                fail(f"column {name!r} has unknown storage mode {mode}")
        if pos != len(b):
            fail(f"the codebook section has {len(b) - pos} trailing bytes")

    # section 5.3
    def read_dictionary(self):
        self.dictionary = self.sections.get(8)
        self.dictionary_id = 0
        if self.dictionary is None:
            return
        if self.meta["block_compression"] != "zstd":
            fail("a dictionary is present but blocks are not compressed")
        if len(self.dictionary) >= 8 and u32(self.dictionary, 0) == ZSTD_DICT_MAGIC:
            self.dictionary_id = u32(self.dictionary, 4)

    # section 5.4
    def read_vocabulary(self):
        v = self.sections[3]
        if len(v) < 8 or u64(v, 0) != self.meta["vocabulary"]:
            fail("the vocabulary section does not match the metadata")
        n = u64(v, 0)
        text_start = 8 + 8 * (n + 1)
        if text_start > len(v):
            fail("the vocabulary's offset array is cut off")
        offsets = struct.unpack_from(f"<{n + 1}Q", v, 8)
        text = v[text_start:]
        if offsets[0] != 0 or offsets[n] != len(text):
            fail("the vocabulary's offsets do not span its text")
        self.words = []
        for i in range(n):
            a, c = offsets[i], offsets[i + 1]
            if a > c:
                fail(f"word {i} has decreasing offsets")
            try:
                word = text[a:c].decode("utf-8")
            except UnicodeDecodeError:
                fail(f"word {i} is not UTF-8")
            if not word or any(ch in word for ch in " \t\n\r\0"):
                fail(f"word {i} ({word!r}) is empty or holds a separator")
            self.words.append(word)

    # section 5.5
    def read_targets(self):
        t = self.sections[4]
        if len(t) < 8 or u64(t, 0) != self.meta["targets"]:
            fail("the targets section does not match the metadata")
        m = u64(t, 0)
        data_start = 8
        cursor = Varints(t, data_start, len(t), "targets")
        # reference (offset from the start of data) -> (text, token count)
        self.targets = {}
        for i in range(m):
            reference = cursor.pos - data_start
            k = cursor.next()
            if k == 0:
                fail(f"target {i} has no tokens")
            ids = [cursor.next() for _ in range(min(k, len(t)))]
            if len(ids) != k:
                fail(f"target {i} is cut off")
            if any(w >= len(self.words) for w in ids):
                fail(f"target {i} uses a word outside the vocabulary")
            self.targets[reference] = (" ".join(self.words[w] for w in ids), k)
        if cursor.pos != len(t):
            fail("the target data has trailing bytes")

    # section 5.6
    def read_block_index(self):
        per = self.meta["sources_per_block"]
        self.blocks = -(-self.meta["sources"] // per)
        b = self.sections[6]
        if len(b) != 8 * (self.blocks + 1):
            fail(f"the block index holds {len(b)} bytes; {self.blocks} blocks need "
                 f"{8 * (self.blocks + 1)}")
        self.block_offsets = struct.unpack_from(f"<{self.blocks + 1}Q", b, 0)
        if self.block_offsets[0] != 0 or self.block_offsets[-1] != len(self.sections[7]):
            fail("the block index does not span the options section")
        if any(a > c for a, c in zip(self.block_offsets, self.block_offsets[1:])):
            fail("the block index decreases")

    # section 5.7: the framing only; the nodes are the fst crate's.
    def check_source_index(self):
        f = self.sections[5]
        if len(f) < 36:
            fail("the source index is too short to be an fst")
        if u64(f, 0) != 3 or u64(f, 8) != 0:
            fail(f"the source index is fst version {u64(f, 0)} type {u64(f, 8)}, not 3 and 0")
        if u64(f, len(f) - 20) != self.meta["sources"]:
            fail(f"the source index holds {u64(f, len(f) - 20)} keys, the metadata says "
                 f"{self.meta['sources']}")
        c = crc32c(f[:-4])
        masked = (((c >> 15) | (c << 17)) + 0xA282EAD8) & 0xFFFFFFFF
        if masked != u32(f, len(f) - 4):
            fail("the source index fails the fst's own checksum")

    # section 5.8
    def stored_block(self, i):
        return self.sections[7][self.block_offsets[i] : self.block_offsets[i + 1]]

    def frame_content_size(self, frame, i):
        """Parses an RFC 8878 frame header (section 3.1.1.1); returns Frame_Content_Size."""
        if len(frame) < 6 or u32(frame, 0) != ZSTD_FRAME_MAGIC:
            fail(f"block {i} is not a zstd frame")
        descriptor = frame[4]
        fcs_flag = descriptor >> 6
        single_segment = (descriptor >> 5) & 1
        if (descriptor >> 3) & 1:
            fail(f"block {i}'s frame header sets the reserved bit")
        dict_id_size = [0, 1, 2, 4][descriptor & 3]
        pos = 5 + (0 if single_segment else 1)  # Window_Descriptor
        if pos + dict_id_size > len(frame):
            fail(f"block {i}'s frame header is cut off")
        dict_id = int.from_bytes(frame[pos : pos + dict_id_size], "little")
        pos += dict_id_size
        fcs_size = [1 if single_segment else 0, 2, 4, 8][fcs_flag]
        if fcs_size == 0:
            fail(f"block {i}'s frame does not state its content size")
        if pos + fcs_size > len(frame):
            fail(f"block {i}'s frame header is cut off")
        size = int.from_bytes(frame[pos : pos + fcs_size], "little")
        if fcs_size == 2:
            size += 256
        if dict_id not in (0, self.dictionary_id) or (dict_id != 0 and self.dictionary is None):
            fail(f"block {i} names dictionary {dict_id}, the file holds {self.dictionary_id}")
        if size > self.meta["max_block_bytes"]:
            fail(f"block {i} decompresses to {size} bytes, over max_block_bytes")
        return size

    def raw_blocks(self):
        """Every raw block, in order (zstd frames decompressed by the zstd CLI)."""
        if self.meta["block_compression"] == "none":
            for i in range(self.blocks):
                yield self.stored_block(i)
            return
        with tempfile.TemporaryDirectory(prefix="bale-reference-") as tmp:
            command = [self.zstd_program, "-d", "-c", "-q"]
            if self.dictionary is not None:
                path = os.path.join(tmp, "dictionary")
                with open(path, "wb") as f:
                    f.write(self.dictionary)
                command += ["-D", path]
            for i in range(self.blocks):
                frame = self.stored_block(i)
                size = self.frame_content_size(frame, i)
                try:
                    done = subprocess.run(command, input=frame, capture_output=True, check=False)
                except OSError as e:
                    fail(f"cannot run {self.zstd_program!r}: {e}")
                if done.returncode != 0:
                    fail(f"zstd cannot decompress block {i}: "
                         f"{done.stderr.decode(errors='replace').strip()}")
                if len(done.stdout) != size:
                    fail(f"block {i} decompressed to {len(done.stdout)} bytes, its frame says {size}")
                yield done.stdout

    # section 6
    def decode_block(self, raw, i):
        """The options of each source of block `i`: lists of (target id, scores, links, counts)."""
        per = self.meta["sources_per_block"]
        sources = min(per, self.meta["sources"] - i * per)
        cursor = Varints(raw, 0, len(raw), f"block {i}")
        option_counts = [cursor.next() for _ in range(sources)]
        if any(c < 1 for c in option_counts):
            fail(f"block {i} has a source without options")
        n = sum(option_counts)
        if n > len(raw):
            fail(f"block {i} claims more options than it has bytes")
        scores = [[] for _ in range(n)]
        pos = cursor.pos
        for width, values in self.codecs:
            if pos + width * n > len(raw):
                fail(f"block {i}'s score columns are cut off")
            for k in range(n):
                at = pos + k * width
                if values is None:
                    scores[k].append(struct.unpack_from("<f", raw, at)[0])
                else:
                    code = raw[at] if width == 1 else u16(raw, at)
                    if code >= len(values):
                        fail(f"block {i} has a score code outside its codebook")
                    scores[k].append(values[code])
            pos += width * n
        cursor.pos = pos
        target_refs = [cursor.next() for _ in range(n)]
        if any(t not in self.targets for t in target_refs):
            fail(f"block {i} refers to a target reference that starts no target record")
        links = [[] for _ in range(n)]
        if self.meta["alignment"]:
            for k in range(n):
                a = cursor.next()
                if a > len(raw):
                    fail(f"block {i} has an implausible link count")
                for _ in range(a):
                    s, t = cursor.next(), cursor.next()
                    if s > 65535 or t > 65535:
                        fail(f"block {i} has a link index over 65535")
                    links[k].append((s, t))
        counts = [[] for _ in range(n)]
        for _ in self.meta["counts"]:
            for k in range(n):
                counts[k].append(cursor.next())
        if cursor.pos != len(raw):
            fail(f"block {i} has {len(raw) - cursor.pos} trailing bytes")
        options = list(zip(target_refs, scores, links, counts))
        per_source = []
        start = 0
        for c in option_counts:
            per_source.append(options[start : start + c])
            start += c
        return per_source

    # section 9
    def dump(self, sources, out):
        meta = self.meta
        if len(sources) != meta["sources"]:
            fail(f"{len(sources)} source phrases were given, the table has {meta['sources']}")
        encoded = [s.encode("utf-8") for s in sources]
        if any(a >= b for a, b in zip(encoded, encoded[1:])):
            fail("the given source phrases are not strictly increasing in byte order")
        for key, value in meta["table_metadata"]:
            out.write(f"# {key}={value}\n".encode("utf-8"))
        columns = ["source", "target"]
        if meta["alignment"]:
            columns.append("alignment")
        columns += meta["scores"] + meta["counts"]
        out.write(("\t".join(columns) + "\n").encode("utf-8"))
        by = meta["option_order"].get("by")
        order_column = meta["scores"].index(by) if by is not None else None
        pairs = 0
        for i, raw in enumerate(self.raw_blocks()):
            for rank, options in enumerate(self.decode_block(raw, i)):
                source = sources[i * meta["sources_per_block"] + rank]
                source_len = source.count(" ") + 1
                previous = None
                for target_ref, scores, links, counts in options:
                    target, target_len = self.targets[target_ref]
                    if any(s >= source_len or t >= target_len for s, t in links):
                        fail(f"the pair ({source!r}, {target!r}) has a link outside its phrases")
                    if order_column is not None:  # section 8: non-increasing decoded values
                        if previous is not None and scores[order_column] > previous:
                            fail(f"the options of {source!r} are not in {by} order")
                        previous = scores[order_column]
                    fields = [source, target]
                    if meta["alignment"]:
                        fields.append(" ".join(f"{s}-{t}" for s, t in links))
                    fields += [format_score(v) for v in scores]
                    fields += [str(c) for c in counts]
                    out.write(("\t".join(fields) + "\n").encode("utf-8"))
                    pairs += 1
        if pairs != meta["pairs"]:
            fail(f"{pairs} pairs decoded, the metadata says {meta['pairs']}")


def sources_from_tsv(path):
    """The distinct `source` values of an interchange TSV, in UTF-8 byte order."""
    with open(path, "rb") as f:
        lines = f.read().decode("utf-8").split("\n")
    rows = iter(line[:-1] if line.endswith("\r") else line for line in lines)
    for header in rows:
        if not header.startswith("#"):
            break
    else:
        fail(f"{path}: no header line")
    columns = header.split("\t")
    if "source" not in columns:
        fail(f"{path}: the header has no source column")
    at = columns.index("source")
    found = {row.split("\t")[at] for row in rows if row}
    return sorted(found, key=lambda s: s.encode("utf-8"))


def sources_from_list(path):
    if path == "-":
        text = sys.stdin.buffer.read().decode("utf-8")
    else:
        with open(path, "rb") as f:
            text = f.read().decode("utf-8")
    return [line for line in text.split("\n") if line]


def main(argv):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("table")
    given = parser.add_mutually_exclusive_group(required=True)
    given.add_argument("--sources", help="the source phrases in byte order, one per line "
                       "(`-`: standard input)")
    given.add_argument("--sources-from-tsv", help="the interchange TSV that was packed")
    parser.add_argument("-o", "--output", default="-", help="TSV output (default: stdout)")
    parser.add_argument("--zstd", default="zstd", help="the zstd command-line program")
    parser.add_argument("--extract-block", nargs=2, metavar=("N", "PATH"),
                        help="also write stored block N (as it is in the file) to PATH")
    parser.add_argument("--dictionary-out", metavar="PATH",
                        help="also write the dictionary section to PATH, if the file has one")
    args = parser.parse_args(argv)
    try:
        with open(args.table, "rb") as f:
            data = f.read()
        table = Table(data, args.zstd)
        if args.sources is not None:
            sources = sources_from_list(args.sources)
        else:
            sources = sources_from_tsv(args.sources_from_tsv)
        if args.extract_block:
            n = int(args.extract_block[0])
            if not 0 <= n < table.blocks:
                fail(f"block {n} is outside the {table.blocks} blocks")
            with open(args.extract_block[1], "wb") as f:
                f.write(table.stored_block(n))
        if args.dictionary_out and table.dictionary is not None:
            with open(args.dictionary_out, "wb") as f:
                f.write(table.dictionary)
        if args.output == "-":
            table.dump(sources, sys.stdout.buffer)
            sys.stdout.buffer.flush()
        else:
            with open(args.output, "wb") as out:
                table.dump(sources, out)
    except FormatError as e:
        print(f"reference_reader: {args.table}: {e}", file=sys.stderr)
        return 2
    except (OSError, ValueError, struct.error) as e:
        print(f"reference_reader: {args.table}: {e}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

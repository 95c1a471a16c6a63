#!/usr/bin/env python3
"""An independent reader of packed `.bale` tables (format 2.0 and 2.1, both layouts), written
from format-spec/bale-format.md.

Python 3 standard library only. It parses a packed file section by section, verifies every
checksum (zlib.crc32 for the sections, the table, every source block and every target group,
every chunk of a direct table), decodes every record (the rANS decoder included; for a direct
table also every hash slot and prefix flag) and writes the table as interchange TSV, which
must equal `baler dump` byte for byte. Section numbers in comments refer to bale-format.md.

Usage:
    reference_reader.py TABLE [--sources FILE|- | --sources-from-tsv FILE] [-o OUT]
        [--extract-block N PATH]

`--sources` / `--sources-from-tsv` are optional cross-checks: the decoded source phrases must
equal the given list (or the distinct `source` values of the packed TSV, in byte order).

Exit status: 0 on success, 2 on any error (message on stderr naming the file and the reason).
"""

import argparse
import json
import struct
import sys
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
    4: "models",
    5: "target-index",
    6: "targets",
    7: "block-index",
    8: "block-keys",
    9: "blocks",
    10: "hash",
    11: "records",
    12: "text",
    13: "chunks",
    14: "block-skips",
    15: "group-skips",
}
REQUIRED = {
    "compact": {1, 2, 3, 5, 6, 7, 8, 9},
    "direct": {1, 2, 3, 10, 11, 12, 13},
}
CHUNKED = (6, 9, 10, 11, 12)  # checked block by block, group by group or chunk by chunk
CHUNK = 4096
M64 = (1 << 64) - 1
COUNT_COLUMNS = ["count", "count_source", "count_target", "cooc", "df_source", "df_target"]
FORMAT_NAME = "baler packed phrase table"

# Model ids (section 7.2)
KEY_LCP, KEY_LEN, KEY_BYTE, OPTION_COUNT, TARGET_REF = 0, 1, 2, 3, 4
WIDE_SCORE, LINK_COUNT, LINK_INDEX, COUNT, TARGET_LEN, TARGET_WORD, SCORE = 8, 9, 10, 11, 12, 13, 14
SCORE_CONTEXTS = 24
PROB_BITS = 12
RANS_L = 1 << 23


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


# ---------------------------------------------------------------- symbol coding (section 7)


def class_base(c):
    """(leading value, extra bits) of a number class."""
    if c < 16:
        return c, 0
    c -= 16
    nb = c // 4 + 5
    if nb > 64:
        fail("a number class no number has")
    return (4 | (c % 4)) << (nb - 3), nb - 3


class Plain:
    """Coding `none`: bytes as they are, numbers as LEB128 varints."""

    def __init__(self, data, what):
        self.v = Varints(data, what=what)
        self.what = what

    def byte(self, model):
        if self.v.pos >= self.v.end:
            fail(f"{self.what} runs past its end")
        b = self.v.data[self.v.pos]
        self.v.pos += 1
        return b

    def number(self, model):
        return self.v.next()

    def finished(self):
        return self.v.pos == self.v.end


class Rans:
    """Coding `rans`: static-model rANS, 32-bit state, byte renormalization."""

    def __init__(self, models, data, what):
        if len(data) < 4:
            fail(f"{what} is too short for a coder state")
        self.models, self.data, self.what = models, data, what
        self.x = int.from_bytes(data[:4], "big")
        self.pos = 4
        if self.x < RANS_L:
            fail(f"{what} starts with an impossible coder state")

    def renormalize(self):
        while self.x < RANS_L:
            if self.pos >= len(self.data):
                fail(f"{self.what} runs past its end")
            self.x = (self.x << 8) | self.data[self.pos]
            self.pos += 1

    def byte(self, model):
        freq, start, slots = self.models[model]
        if slots is None:
            fail(f"{self.what} uses an empty model ({model})")
        slot = self.x & ((1 << PROB_BITS) - 1)
        sym = slots[slot]
        self.x = freq[sym] * (self.x >> PROB_BITS) + slot - start[sym]
        self.renormalize()
        return sym

    def bits(self, n):
        v = 0
        while n > 0:
            k = min(n, 8)
            n -= k
            slot = self.x & ((1 << PROB_BITS) - 1)
            chunk = slot >> (PROB_BITS - k)
            f = 1 << (PROB_BITS - k)
            self.x = f * (self.x >> PROB_BITS) + slot - chunk * f
            self.renormalize()
            v = (v << k) | chunk
        return v

    def number(self, model):
        base, extra = class_base(self.byte(model))
        return base | self.bits(extra)

    def finished(self):
        return self.pos == len(self.data) and self.x == RANS_L


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
    def __init__(self, data):
        self.data = data
        self.read_header()
        self.read_metadata()
        for kind in REQUIRED[self.layout]:
            if kind not in self.sections:
                fail(f"the {KINDS[kind]} section is missing")
        self.read_codebooks()
        self.read_models()
        self.read_vocabulary()
        if self.layout == "direct":
            self.read_direct()
        else:
            self.read_indexes()
            self.read_targets()

    # section 3 and 4
    def read_header(self):
        d = self.data
        if len(d) < HEADER_LEN or d[:8] != MAGIC:
            fail("missing the magic bytes BALER\\r\\n\\x1a")
        self.major, self.minor = u16(d, 8), u16(d, 10)
        if self.major != 2:
            fail(f"format version {self.major}.{self.minor} is not 2.x")
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
                fail(f"the {name} entry has non-zero flags or reserved bytes in a 2.0 file")
            if offset % 8 != 0:
                fail(f"the {name} section does not start on an 8-byte boundary")
            body = d[offset : offset + length]
            if zlib.crc32(body) != crc and kind not in CHUNKED:
                fail(f"the {name} section fails its checksum")
            spans.append((offset, offset + length, name))
            if kind in KINDS:
                if kind in self.sections:
                    fail(f"the {name} section appears twice")
                self.sections[kind] = body
            else:
                self.unknown.append(kind)
        if 1 not in self.sections:
            fail("the metadata section is missing")
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
            "targets_per_group": int,
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
        if meta["block_compression"] not in ("rans", "none"):
            fail(f"unknown block coding {meta['block_compression']!r}")
        # Section 5.1: `layout` is absent in 2.0 files (compact); "direct" needs version 2.1.
        self.layout = meta.get("layout", "compact")
        if self.layout not in REQUIRED:
            fail(f"unknown layout {self.layout!r}")
        if self.layout == "direct" and (self.minor < 1 or meta["block_compression"] != "none"):
            fail("a direct table must be version 2.1 or later with block coding none")
        if meta["sources_per_block"] < 1 or meta["targets_per_group"] < 1:
            fail("zero sources per block or targets per group")
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
    def read_models(self):
        n = SCORE + len(self.meta["scores"]) * SCORE_CONTEXTS
        coding = self.meta["block_compression"]
        b = self.sections.get(4)
        if self.layout == "direct" and b is not None:
            fail("a models section is present in a direct table")
        if coding == "none":
            if b is not None:
                fail("a models section is present but blocks are not coded")
            self.models = None
            return
        if b is None:
            fail("the models section is missing")
        if len(b) != n * 512:
            fail(f"the models section holds {len(b)} bytes; {n} models need {n * 512}")
        self.models = []
        for m in range(n):
            freq = list(struct.unpack_from("<256H", b, m * 512))
            total = sum(freq)
            if total == 0:
                self.models.append((freq, None, None))
                continue
            if total != 1 << PROB_BITS:
                fail(f"model {m}'s frequencies sum to {total}")
            start, slots, acc = [], bytearray(), 0
            for sym, f in enumerate(freq):
                start.append(acc)
                slots += bytes([sym]) * f
                acc += f
            self.models.append((freq, start, slots))

    def source(self, data, what):
        if self.models is None:
            return Plain(data, what)
        return Rans(self.models, data, what)

    # section 5.4
    def read_vocabulary(self):
        b = self.sections[3]
        n = self.meta["vocabulary"]
        if len(b) < 8 or u64(b, 0) != n:
            fail("the vocabulary section does not match the metadata")
        if 8 + 4 * (n + 1) > len(b):
            fail("the vocabulary's offset array is cut off")
        offsets = struct.unpack_from(f"<{n + 1}I", b, 8)
        text = b[8 + 4 * (n + 1):]
        if offsets[0] != 0 or offsets[-1] != len(text):
            fail("the vocabulary's offsets do not cover its text")
        self.words = []
        for a, c in zip(offsets, offsets[1:]):
            if c < a:
                fail("the vocabulary's offsets are out of order")
            try:
                self.words.append(text[a:c].decode("utf-8"))
            except UnicodeDecodeError:
                fail("a vocabulary word is not UTF-8")
        self.word_set = set(self.words)

    # sections 5.5 and 5.6
    def read_indexes(self):
        meta = self.meta
        self.blocks = -(-meta["sources"] // meta["sources_per_block"])
        self.groups = -(-meta["targets"] // meta["targets_per_group"])
        bi, keys, data = self.sections[7], self.sections[8], self.sections[9]
        if len(bi) != 16 * (self.blocks + 1):
            fail(f"the block index holds {len(bi)} bytes for {self.blocks} blocks")
        self.block_entries = [struct.unpack_from("<QII", bi, 16 * i) for i in range(self.blocks + 1)]
        last_off, last_key = 0, 0
        for i, (off, key, crc) in enumerate(self.block_entries):
            if (i == 0 and (off or key)) or off < last_off or key < last_key:
                fail(f"block {i}'s offsets are out of order")
            last_off, last_key = off, key
        if last_off != len(data) or last_key != len(keys):
            fail("the block index does not end at the ends of its sections")
        ti = self.sections[5]
        if len(ti) != 12 * self.groups + 8:
            fail(f"the target index holds {len(ti)} bytes for {self.groups} groups")
        self.group_entries = [struct.unpack_from("<QI", ti, 12 * g) for g in range(self.groups)]
        self.group_entries.append((u64(ti, 12 * self.groups), 0))
        last = 0
        for g, (off, _) in enumerate(self.group_entries):
            if (g == 0 and off) or off < last:
                fail(f"target group {g}'s offset is out of order")
            last = off
        if last != len(self.sections[6]):
            fail("the target index does not end at the end of the targets")
        # section 5.9: one resume point per target group, checked in read_targets
        self.group_skips = None
        if 15 in self.sections:
            gs = self.sections[15]
            if meta["block_compression"] != "rans":
                fail("a group-skips section is present but groups are not rANS coded")
            if len(gs) != 6 * self.groups:
                fail(f"the group-skips section holds {len(gs)} bytes for {self.groups} groups")
            self.group_skips = []
            for g in range(self.groups):
                state, pos = struct.unpack_from("<IH", gs, 6 * g)
                if (state == 0 and pos != 0) or (state != 0 and state < RANS_L):
                    fail("the group-skips section is malformed: a coder state")
                self.group_skips.append((state, pos) if state else None)
        # section 5.8: resume points, checked against the streams in decode_block
        self.skips = [[] for _ in range(self.blocks)]
        if 14 in self.sections:
            sk = self.sections[14]
            if meta["block_compression"] != "rans":
                fail("a block-skips section is present but blocks are not rANS coded")
            anchors = -(-self.blocks // 64) + 1
            head = 4 * anchors + self.blocks
            if len(sk) < head or (len(sk) - head) % 8:
                fail("the block-skips section is malformed: its length")
            counts = sk[4 * anchors:head]
            total = (len(sk) - head) // 8
            at = 0
            for i in range(self.blocks):
                if i % 64 == 0 and u32(sk, 4 * (i // 64)) != at:
                    fail("the block-skips section is malformed: its counts")
                for p in range(at, at + counts[i]):
                    if p >= total:
                        fail("the block-skips section is malformed: its counts")
                    state, word = struct.unpack_from("<II", sk, head + 8 * p)
                    if word >> 24 <= (self.skips[i][-1][0] if self.skips[i] else 0):
                        fail("the block-skips section is malformed: a source rank")
                    if state < RANS_L:
                        fail("the block-skips section is malformed: a coder state")
                    self.skips[i].append((word >> 24, word & 0xFFFFFF, state))
                at += counts[i]
            if u32(sk, 4 * (anchors - 1)) != at or at != total:
                fail("the block-skips section is malformed: its counts")

    # section 6.2
    def read_targets(self):
        meta, data = self.meta, self.sections[6]
        per = meta["targets_per_group"]
        self.targets = []
        for g in range(self.groups):
            start, crc = self.group_entries[g]
            stored = data[start:self.group_entries[g + 1][0]]
            if zlib.crc32(stored) != crc:
                fail(f"target group {g} fails its checksum")
            src = self.source(stored, f"target group {g}")
            point = self.group_skips[g] if self.group_skips else None
            for t in range(min(per, meta["targets"] - g * per)):
                if point and t == per // 2:
                    if (src.pos, src.x) != (point[1], point[0]):
                        fail(f"target group {g}'s resume point disagrees with its stream")
                    point = None
                n = src.number(TARGET_LEN) + 1
                ids = [src.number(TARGET_WORD) for _ in range(n)]
                if any(w >= len(self.words) for w in ids):
                    fail(f"target group {g} uses a word outside the vocabulary")
                self.targets.append((" ".join(self.words[w] for w in ids), n))
            if point:
                fail(f"target group {g} has a resume point past its targets")
            if not src.finished():
                fail(f"target group {g} has unexplained trailing data")

    def stored_block(self, i):
        a, b = self.block_entries[i][0], self.block_entries[i + 1][0]
        return self.sections[9][a:b]

    # section 6.1
    def decode_block(self, i):
        """Yields (source, options) of block i; options: (target_rank, codes, links, counts)."""
        meta = self.meta
        stored = self.stored_block(i)
        if zlib.crc32(stored) != self.block_entries[i][2]:
            fail(f"block {i} fails its checksum")
        keys = self.sections[8]
        first = keys[self.block_entries[i][1]:self.block_entries[i + 1][1]]
        n = min(meta["sources_per_block"], meta["sources"] - i * meta["sources_per_block"])
        src = self.source(stored, f"block {i}")
        sources, counts_of = [first], []
        for r in range(n):
            if r > 0:
                prev = sources[-1]
                lcp = src.number(KEY_LCP)
                length = src.number(KEY_LEN)
                if lcp > len(prev):
                    fail(f"block {i} has a key sharing more than its predecessor")
                key = prev[:lcp] + bytes(src.byte(KEY_BYTE) for _ in range(length))
                if key <= prev:
                    fail(f"block {i}'s keys are out of order")
                sources.append(key)
            counts_of.append(src.number(OPTION_COUNT) + 1)
        out = []
        points = list(self.skips[i])
        for r in range(n):
            if points and points[0][0] == r:
                rank, pos, state = points.pop(0)
                if (src.pos, src.x) != (pos, state):
                    fail(f"block {i}'s resume point before source {rank} disagrees with its stream")
            options, previous = [], None
            m = counts_of[r]
            for j in range(m):
                ref = src.number(TARGET_REF + min(j, 3))
                codes = []
                for c, (width, _) in enumerate(self.codecs):
                    if width == 1:
                        ctx = 16 + min(m, 8) - 1 if j == 0 else previous[c] >> 4
                        codes.append(src.byte(SCORE + c * SCORE_CONTEXTS + ctx))
                    else:
                        raw = bytes(src.byte(WIDE_SCORE) for _ in range(width))
                        codes.append(int.from_bytes(raw, "little"))
                links = []
                if meta["alignment"]:
                    for _ in range(src.number(LINK_COUNT)):
                        links.append((src.number(LINK_INDEX), src.number(LINK_INDEX)))
                cts = [src.number(COUNT) for _ in meta["counts"]]
                previous = codes
                options.append((ref, codes, links, cts))
            try:
                out.append((sources[r].decode("utf-8"), options))
            except UnicodeDecodeError:
                fail(f"a source phrase in block {i} is not UTF-8")
        if points:
            fail(f"block {i} has a resume point at no source boundary")
        if not src.finished():
            fail(f"block {i} has unexplained trailing data")
        return out

    def value(self, c, code):
        width, values = self.codecs[c]
        if values is None:
            return struct.unpack("<f", struct.pack("<I", code))[0]
        if code >= len(values):
            fail("a score code is outside its codebook")
        return values[code]

    # section 12
    def read_direct(self):
        s = self.sections
        hashed, records, text, sums = s[10], s[11], s[12], s[13]
        slots = len(hashed) // 8
        if len(hashed) % 8 or slots < 2 or slots & (slots - 1):
            fail(f"the hash section holds {len(hashed)} bytes, not a power of two of slots")
        parts = (("hash", hashed), ("records", records), ("text", text))
        total = sum(-(-len(body) // CHUNK) for _, body in parts)
        if len(sums) != 4 * total:
            fail(f"the chunks section holds {len(sums)} bytes; {total} chunks need {4 * total}")
        at = 0
        for name, body in parts:
            for c in range(-(-len(body) // CHUNK)):
                if zlib.crc32(body[c * CHUNK:(c + 1) * CHUNK]) != u32(sums, 4 * at):
                    fail(f"{name} chunk {c} fails its checksum")
                at += 1
        try:
            text.decode("utf-8")
        except UnicodeDecodeError:
            fail("the text section is not UTF-8")
        self.slots = struct.unpack_from(f"<{slots}Q", hashed)

    def direct_record(self, at):
        """(start, key, n, ordinal, options, end) of the record at `at`; options: (target,
        target word count, codes, links, counts)."""
        records, text = self.sections[11], self.sections[12]
        v = Varints(records, at, what="records")
        key_len = v.next()
        key = records[v.pos:v.pos + key_len]
        if len(key) != key_len:
            fail(f"the key of the record at {at} runs past the records")
        v.pos += key_len
        head = v.next()
        n, wide = head >> 1, head & 1
        if n == 0:
            if wide:
                fail(f"the record at {at} has a bad option count")
            return at, key, 0, None, [], v.pos
        ordinal, text_start = v.next(), v.next()
        widths = [4 if values is None else width for width, values in self.codecs]
        pos = v.pos
        codes = []
        for _ in range(n):
            row = []
            for w in widths:
                if pos + w > len(records):
                    fail(f"the record at {at} runs past the records")
                row.append(int.from_bytes(records[pos:pos + w], "little"))
                pos += w
            codes.append(row)
        ew = 4 if wide else 2
        if pos + ew * n > len(records):
            fail(f"the record at {at} runs past the records")
        ends = [int.from_bytes(records[pos + ew * i:pos + ew * (i + 1)], "little") for i in range(n)]
        pos += ew * n
        links_of, counts_of = [[] for _ in range(n)], [[] for _ in range(n)]
        if self.meta["alignment"] or self.meta["counts"]:
            v = Varints(records, pos, what="records")
            length = v.next()
            v = Varints(records, v.pos, v.pos + length, what=f"extras of the record at {at}")
            if v.end > len(records):
                fail(f"the record at {at} runs past the records")
            for i in range(n):
                if self.meta["alignment"]:
                    links_of[i] = [(v.next(), v.next()) for _ in range(v.next())]
                counts_of[i] = [v.next() for _ in self.meta["counts"]]
            if v.pos != v.end:
                fail(f"the extras of the record at {at} have trailing bytes")
            pos = v.end
        options, previous = [], 0
        for i in range(n):
            if ends[i] < previous or text_start + ends[i] > len(text):
                fail(f"the text ends of the record at {at} are out of order or place")
            try:
                target = text[text_start + previous:text_start + ends[i]].decode("utf-8")
            except UnicodeDecodeError:
                fail(f"a target of the record at {at} is not on character boundaries")
            previous = ends[i]
            options.append((target, target.count(" ") + 1, codes[i], links_of[i], counts_of[i]))
        return at, key, n, ordinal, options, pos

    @staticmethod
    def key_hash(key):
        h = 0xCBF29CE484222325
        for b in key:
            h = ((h ^ b) * 0x100000001B3) & M64
        h = ((h ^ (h >> 31)) * 0x9E3779B97F4A7C15) & M64
        return h ^ (h >> 32)

    def direct_sources(self):
        """Yields (where, source, options) of a direct table and checks its hash (section 12)."""
        records, pos = self.sections[11], 0
        keys, prefixes = [], set()
        for i in range(self.meta["sources"]):
            start, key, n, ordinal, options, pos = self.direct_record(pos)
            if n == 0 or ordinal != i:
                fail(f"the record at {start} is not source {i}")
            keys.append((start, key))
            for j, b in enumerate(key):
                if b == 0x20:
                    prefixes.add(key[:j])
            try:
                source = key.decode("utf-8")
            except UnicodeDecodeError:
                fail(f"the source phrase at {start} is not UTF-8")
            yield f"the record at {start}", source, options
        while pos < len(records):
            start, key, n, _, _, pos = self.direct_record(pos)
            if n != 0:
                fail(f"the record at {start} has options but follows the last source")
            if key not in prefixes:
                fail(f"the prefix record at {start} is no source's first words")
            keys.append((start, key))
        mask = len(self.slots) - 1
        if sum(1 for s in self.slots if s & ((1 << 40) - 1)) != len(keys):
            fail("the hash does not hold exactly one slot per record")
        for start, key in keys:
            h = self.key_hash(key)
            i = h & mask
            for _ in range(len(self.slots)):
                s = self.slots[i]
                if s & ((1 << 40) - 1) == 0:
                    fail(f"the hash does not lead to the record at {start}")
                if (s & ((1 << 40) - 1)) - 1 == start:
                    if s >> 41 != h >> 41:
                        fail(f"the slot of the record at {start} has a wrong tag")
                    if bool(s >> 40 & 1) != (key in prefixes):
                        fail(f"the slot of the record at {start} has a wrong prefix flag")
                    break
                i = (i + 1) & mask

    def compact_sources(self):
        """Yields (where, source, options) of a compact table."""
        for i in range(self.blocks):
            for source, options in self.decode_block(i):
                resolved = []
                for ref, codes, links, counts in options:
                    if ref >= len(self.targets):
                        fail(f"block {i} refers to target {ref} of {len(self.targets)}")
                    target, target_len = self.targets[ref]
                    resolved.append((target, target_len, codes, links, counts))
                yield f"block {i}", source, resolved

    # section 9
    def dump(self, given, out):
        meta = self.meta
        for key, value in meta["table_metadata"]:
            out.write(f"# {key}={value}\n".encode("utf-8"))
        columns = ["source", "target"]
        if meta["alignment"]:
            columns.append("alignment")
        columns += meta["scores"] + meta["counts"]
        out.write(("\t".join(columns) + "\n").encode("utf-8"))
        by = meta["option_order"].get("by")
        order_column = meta["scores"].index(by) if by is not None else None
        pairs, sources, last, targets = 0, [], None, set()
        walk = self.direct_sources() if self.layout == "direct" else self.compact_sources()
        for where, source, options in walk:
            if last is not None and source.encode("utf-8") <= last:
                fail(f"{where}'s first key is out of order")
            last = source.encode("utf-8")
            sources.append(source)
            source_len = source.count(" ") + 1
            previous = None
            for target, target_len, codes, links, counts in options:
                targets.add(target)
                if self.layout == "direct" and any(w not in self.word_set for w in target.split(" ")):
                    fail(f"the target {target!r} has a word outside the vocabulary")
                scores = [self.value(c, code) for c, code in enumerate(codes)]
                if any(s >= source_len or t >= target_len for s, t in links):
                    fail(f"the pair ({source!r}, {target!r}) has a link outside its phrases")
                if order_column is not None:
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
        if pairs != meta["pairs"] or len(sources) != meta["sources"]:
            fail(f"{pairs} pairs of {len(sources)} sources decoded, the metadata says "
                 f"{meta['pairs']} of {meta['sources']}")
        if self.layout == "direct" and len(targets) != meta["targets"]:
            fail(f"{len(targets)} distinct targets, the metadata says {meta['targets']}")
        if given is not None and given != sources:
            fail("the decoded source phrases differ from the given ones")


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
    given = parser.add_mutually_exclusive_group()
    given.add_argument("--sources", help="cross-check: the source phrases in byte order, one "
                       "per line (`-`: standard input)")
    given.add_argument("--sources-from-tsv", help="cross-check: the interchange TSV packed")
    parser.add_argument("-o", "--output", default="-", help="TSV output (default: stdout)")
    parser.add_argument("--extract-block", nargs=2, metavar=("N", "PATH"),
                        help="also write stored block N (as it is in the file) to PATH")
    args = parser.parse_args(argv)
    try:
        with open(args.table, "rb") as f:
            data = f.read()
        table = Table(data)
        sources = None
        if args.sources is not None:
            sources = sources_from_list(args.sources)
        elif args.sources_from_tsv is not None:
            sources = sources_from_tsv(args.sources_from_tsv)
        if args.extract_block:
            if table.layout != "compact":
                fail("--extract-block: a direct table has no blocks")
            n = int(args.extract_block[0])
            if not 0 <= n < table.blocks:
                fail(f"block {n} is outside the {table.blocks} blocks")
            with open(args.extract_block[1], "wb") as f:
                f.write(table.stored_block(n))
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

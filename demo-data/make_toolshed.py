#!/usr/bin/env python3
"""Composes the `toolshed` demo corpus: English-Spanish messages of an invented neighbourhood
tool-lending library, with word alignments derived from the grammar that builds each sentence.

Standard library only; deterministic. Run from anywhere:

    python3 demo-data/make_toolshed.py           # (re)writes the corpus files next to this script
    python3 demo-data/make_toolshed.py --check   # verifies the committed files are what it makes

Every sentence pair is built from *pieces*: a piece is a pair of token lists (English, Spanish)
with the word links between them. Pieces are joined with an English order and a separate Spanish
order, so word-order differences (adjective after the noun, "is not" -> "no está") carry their
links along, and an alignment is never typed by hand.
"""

import random
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
NAME = "toolshed"
TRAIN_PAIRS = 500
TEST_PAIRS = 50
RANDOM_STATE = 7


class Piece:
    """English tokens, Spanish tokens, and links (English index, Spanish index)."""

    def __init__(self, en, es, links=None):
        self.en = en.split() if isinstance(en, str) else list(en)
        self.es = es.split() if isinstance(es, str) else list(es)
        if links is None:  # token-by-token when lengths match, else every pair is a mistake
            assert len(self.en) == len(self.es), (self.en, self.es)
            links = [(i, i) for i in range(len(self.en))]
        self.links = list(links)
        for i, j in self.links:
            assert i < len(self.en) and j < len(self.es), (self.en, self.es, self.links)


def join(pieces, es_order=None):
    """Concatenates pieces in the given order on the English side and `es_order` on the Spanish."""
    pieces = [p for p in pieces if p is not None]
    if es_order is None:
        es_order = list(range(len(pieces)))
    en_off, es_off = [], [0] * len(pieces)
    n = 0
    for p in pieces:
        en_off.append(n)
        n += len(p.en)
    n = 0
    for k in es_order:
        es_off[k] = n
        n += len(pieces[k].es)
    en = [t for p in pieces for t in p.en]
    es = [t for k in es_order for t in pieces[k].es]
    links = [(en_off[k] + i, es_off[k] + j) for k, p in enumerate(pieces) for i, j in p.links]
    return Piece(en, es, links)


def lit(en, es, links=None):
    return Piece(en, es, links)


# ---------------------------------------------------------------------------------------------
# Lexicon. Nouns: English singular, English plural, Spanish singular, Spanish plural, gender,
# links within the noun (same for both numbers), tool kind (power tools take a battery).
NOUNS = [
    ("drill", "drills", "taladro", "taladros", "m", [(0, 0)], "power"),
    ("ladder", "ladders", "escalera", "escaleras", "f", [(0, 0)], "hand"),
    ("saw", "saws", "sierra", "sierras", "f", [(0, 0)], "hand"),
    ("hammer", "hammers", "martillo", "martillos", "m", [(0, 0)], "hand"),
    ("wheelbarrow", "wheelbarrows", "carretilla", "carretillas", "f", [(0, 0)], "hand"),
    ("lawn mower", "lawn mowers", "cortacésped", "cortacéspedes", "m", [(0, 0), (1, 0)], "power"),
    ("sewing machine", "sewing machines", "máquina de coser", "máquinas de coser", "f",
     [(0, 2), (1, 0)], "power"),
    ("pressure washer", "pressure washers", "hidrolimpiadora", "hidrolimpiadoras", "f",
     [(0, 0), (1, 0)], "power"),
    ("tent", "tents", "tienda de campaña", "tiendas de campaña", "f", [(0, 0), (0, 2)], "hand"),
    ("screwdriver", "screwdrivers", "destornillador", "destornilladores", "m", [(0, 0)], "power"),
    ("paint roller", "paint rollers", "rodillo de pintura", "rodillos de pintura", "m",
     [(0, 2), (1, 0)], "hand"),
    ("toolbox", "toolboxes", "caja de herramientas", "cajas de herramientas", "f",
     [(0, 0), (0, 2)], "hand"),
    ("hedge trimmer", "hedge trimmers", "cortasetos", "cortasetos", "m", [(0, 0), (1, 0)], "power"),
    ("glue gun", "glue guns", "pistola de pegamento", "pistolas de pegamento", "f",
     [(0, 2), (1, 0)], "power"),
    ("extension cord", "extension cords", "alargador", "alargadores", "m", [(0, 0), (1, 0)], "hand"),
    ("tile cutter", "tile cutters", "cortador de azulejos", "cortadores de azulejos", "m",
     [(0, 2), (1, 0)], "hand"),
]
# Popularity of each tool at the desk: a few are asked for far more often.
NOUN_WEIGHTS = [9, 8, 5, 5, 3, 4, 2, 2, 3, 4, 2, 2, 2, 1, 3, 1]

# Adjectives: English, Spanish m.sg, f.sg, m.pl, f.pl; which nouns they suit (None: all).
POWER = {n[0] for n in NOUNS if n[6] == "power"}
ADJECTIVES = [
    ("small", "pequeño", "pequeña", "pequeños", "pequeñas", None),
    ("big", "grande", "grande", "grandes", "grandes", None),
    ("new", "nuevo", "nueva", "nuevos", "nuevas", None),
    ("old", "viejo", "vieja", "viejos", "viejas", None),
    ("red", "rojo", "roja", "rojos", "rojas", None),
    ("heavy", "pesado", "pesada", "pesados", "pesadas", None),
    ("electric", "eléctrico", "eléctrica", "eléctricos", "eléctricas", POWER | {"saw"}),
    ("cordless", "inalámbrico", "inalámbrica", "inalámbricos", "inalámbricas", POWER),
    ("long", "largo", "larga", "largos", "largas", {"ladder", "extension cord"}),
    ("folding", "plegable", "plegable", "plegables", "plegables", {"ladder", "saw", "wheelbarrow"}),
]

DAYS = [("monday", "lunes"), ("tuesday", "martes"), ("wednesday", "miércoles"),
        ("thursday", "jueves"), ("friday", "viernes"), ("saturday", "sábado"),
        ("sunday", "domingo")]
HOURS = [("eight", "ocho"), ("nine", "nueve"), ("ten", "diez"), ("eleven", "once"),
         ("four", "cuatro"), ("five", "cinco")]
COUNTS = [("two", "dos"), ("three", "tres"), ("four", "cuatro"), ("five", "cinco"),
          ("six", "seis")]
EUROS = [("five", "cinco"), ("ten", "diez"), ("fifteen", "quince"), ("twenty", "veinte"),
         ("thirty", "treinta")]

ARTICLES = {  # determiner -> Spanish by (gender, plural)
    "the": {("m", False): "el", ("f", False): "la", ("m", True): "los", ("f", True): "las"},
    "your": {("m", False): "su", ("f", False): "su", ("m", True): "sus", ("f", True): "sus"},
    "this": {("m", False): "este", ("f", False): "esta", ("m", True): "estos",
             ("f", True): "estas"},
}


def agree(forms, gender, plural):
    """Picks the Spanish form of a four-form word (m.sg, f.sg, m.pl, f.pl)."""
    return forms[(2 if plural else 0) + (1 if gender == "f" else 0)]


class Np:
    """A noun phrase with the agreement facts that the rest of the sentence needs."""

    def __init__(self, piece, gender, plural, kind):
        self.piece, self.gender, self.plural, self.kind = piece, gender, plural, kind


def noun_phrase(rng, det="the", prep=None, plural=None, adjective=None, kind=None):
    """`[prep] det [adjective] noun` -> `[prep] det noun [adjective]`, with de+el -> del."""
    choices = [n for n in NOUNS if kind is None or n[6] == kind]
    weights = [NOUN_WEIGHTS[NOUNS.index(n)] for n in choices]
    en_sg, en_pl, es_sg, es_pl, gender, noun_links, tool_kind = rng.choices(choices, weights)[0]
    if plural is None:
        plural = rng.random() < 0.2
    noun = lit(en_pl if plural else en_sg, es_pl if plural else es_sg, noun_links)
    adj = None
    if adjective is None:
        adjective = rng.random() < 0.45
    if adjective:
        suitable = [a for a in ADJECTIVES if a[5] is None or en_sg in a[5]]
        a = rng.choice(suitable)
        adj = lit(a[0], agree(a[1:5], gender, plural))
    article = ARTICLES[det][(gender, plural)]
    det = "these" if det == "this" and plural else det
    if prep is not None and prep[1] == "de" and article == "el":
        head = lit([prep[0], det], ["del"], [(0, 0), (1, 0)])
    elif prep is not None and prep[1] == "a" and article == "el":
        head = lit([prep[0], det], ["al"], [(0, 0), (1, 0)])
    elif prep is not None:
        head = join([lit(prep[0], prep[1]), lit(det, article)])
    else:
        head = lit(det, article)
    if adj is None:
        piece = join([head, noun])
    else:
        piece = join([head, adj, noun], es_order=[0, 2, 1])
    return Np(piece, gender, plural, tool_kind)


def time_phrase(rng):
    r = rng.random()
    if r < 0.35:
        en, es = rng.choice(DAYS)
        return lit(["on", en], ["el", es])
    if r < 0.5:
        return lit("today", "hoy")
    if r < 0.65:
        return lit("tomorrow", "mañana")
    if r < 0.75:
        return lit("this weekend", "este fin de semana", [(0, 0), (1, 1), (1, 3)])
    if r < 0.85:
        return lit("next week", "la próxima semana", [(0, 1), (1, 2)])
    if r < 0.93:
        return lit("in the morning", "por la mañana")
    return lit("in the afternoon", "por la tarde")


def deadline_phrase(rng):
    r = rng.random()
    if r < 0.6:
        en, es = rng.choice(DAYS)
        return lit(["before", en], ["antes", "del", es], [(0, 0), (0, 1), (1, 2)])
    if r < 0.8:
        return lit("by tomorrow", "antes de mañana", [(0, 0), (0, 1), (1, 2)])
    return lit("before noon", "antes del mediodía", [(0, 0), (0, 1), (1, 2)])


def verb_be(plural, en_sg="is", en_pl="are", es_sg="está", es_pl="están"):
    return lit(en_pl if plural else en_sg, es_pl if plural else es_sg)


DOT = lit(".", ".")
QMARK = lit("?", "?")
OPEN_Q = lit([], ["¿"], [])  # Spanish opening question mark, unaligned
PLEASE = lit("please", "por favor ,", [(0, 0), (0, 1)])  # the comma stays unaligned


def t_available(rng):
    np = noun_phrase(rng)
    return join([np.piece, verb_be(np.plural), lit("available", agree(
        ["disponible", "disponible", "disponibles", "disponibles"], np.gender, np.plural)),
        time_phrase(rng), DOT])


def t_broken(rng):
    np = noun_phrase(rng)
    return join([np.piece, verb_be(np.plural),
                 lit("broken", agree(["roto", "rota", "rotos", "rotas"], np.gender, np.plural)),
                 DOT])


def t_return(rng):
    np = noun_phrase(rng, det=rng.choice(["the", "the", "your"]))
    return join([PLEASE, lit("return", "devuelva"), np.piece, deadline_phrase(rng), DOT])


def t_borrow(rng):
    np = noun_phrase(rng)
    return join([OPEN_Q, lit("can i", "puedo", [(0, 0), (1, 0)]),
                 lit("borrow", "llevarme"), np.piece, time_phrase(rng), QMARK])


def t_reservation(rng):
    np = noun_phrase(rng, prep=("for", "de"), plural=False)
    return join([lit("your reservation", "su reserva"), np.piece,
                 lit("is confirmed", "está confirmada"), DOT])


def t_we_have(rng):
    gender_np = noun_phrase(rng, plural=True, adjective=False)  # picks the noun
    noun = gender_np.piece
    noun = Piece(noun.en[1:], noun.es[1:], [(i - 1, j - 1) for i, j in noun.links if i and j])
    count = lit(*rng.choice(COUNTS))
    pieces = [lit("we have", "tenemos", [(0, 0), (1, 0)]), count]
    if rng.random() < 0.5:
        suitable = [a for a in ADJECTIVES if a[5] is None or
                    any(n[1] == " ".join(noun.en) and n[0] in a[5] for n in NOUNS)]
        a = rng.choice(suitable)
        pieces.append(lit(a[0], agree(a[1:5], gender_np.gender, True)))
        pieces.append(noun)
        order = [0, 1, 3, 2]
    else:
        pieces.append(noun)
        order = [0, 1, 2]
    pieces.append(lit("in the workshop", "en el taller"))
    pieces.append(DOT)
    order += [len(order), len(order) + 1]
    return join(pieces, es_order=order)


def t_battery(rng):
    np = noun_phrase(rng, kind="power", plural=False)
    return join([np.piece, lit("needs a", "necesita una"), lit("new", "nueva"),
                 lit("battery", "batería"), DOT], es_order=[0, 1, 3, 2, 4])


def t_opens(rng):
    hour_en, hour_es = rng.choice(HOURS)
    day_en, day_es = rng.choice(DAYS)
    return join([lit("the workshop", "el taller"), lit("opens", "abre"),
                 lit(["at", hour_en], ["a", "las", hour_es], [(0, 0), (1, 2)]),
                 lit(["on", day_en], ["el", day_es]), DOT])


def t_closed(rng):
    if rng.random() < 0.7:
        day_en, day_es = rng.choice(DAYS)
        when = lit(["on", day_en], ["el", day_es])
    else:
        when = rng.choice([lit("today", "hoy"), lit("tomorrow", "mañana")])
    return join([lit("the workshop", "el taller"), lit("is closed", "está cerrado"), when, DOT])


def t_do_you_have(rng):
    np = noun_phrase(rng, det="the", plural=False)
    # "the" -> "a"/"una": rebuild the determiner on both sides
    indefinite = "un" if np.gender == "m" else "una"
    article = "an" if np.piece.en[1][0] in "aeiou" else "a"
    piece = Piece([article] + np.piece.en[1:], [indefinite] + np.piece.es[1:], np.piece.links)
    return join([OPEN_Q, lit("do you have", "tiene", [(1, 0), (2, 0)]), piece, QMARK])


def t_returned_late(rng):
    np = noun_phrase(rng)
    verb = (lit("were returned", "se devolvieron") if np.plural
            else lit("was returned", "se devolvió"))
    return join([np.piece, verb, lit("late", "tarde"), DOT])


def t_thanks(rng):
    np = noun_phrase(rng, det=rng.choice(["the", "your"]))
    return join([lit("thank you", "gracias", [(0, 0), (1, 0)]),
                 lit("for returning", "por devolver"), np.piece, DOT])


def t_deposit(rng):
    np = noun_phrase(rng, prep=("for", "de"), plural=False)
    euros_en, euros_es = rng.choice(EUROS)
    return join([lit("the deposit", "la fianza"), np.piece,
                 lit("is", "es de", [(0, 0)]), lit([euros_en, "euros"], [euros_es, "euros"]),
                 DOT])


def t_not_here(rng):
    np = noun_phrase(rng)
    verb = (lit("are not", "no están", [(0, 1), (1, 0)]) if np.plural
            else lit("is not", "no está", [(0, 1), (1, 0)]))
    return join([np.piece, verb, lit("in the workshop", "en el taller"), DOT])


def t_left_outside(rng):
    np = noun_phrase(rng, det=rng.choice(["the", "your", "this"]))
    return join([lit("someone left", "alguien dejó"), np.piece, lit("outside", "fuera"), DOT])


def t_clean(rng):
    np = noun_phrase(rng, det=rng.choice(["the", "this"]))
    pronoun = agree(["devolverlo", "devolverla", "devolverlos", "devolverlas"], np.gender,
                    np.plural)
    it = "them" if np.plural else "it"
    return join([PLEASE, lit("clean", "limpie"), np.piece,
                 lit(["before", "returning", it], ["antes", "de", pronoun],
                     [(0, 0), (0, 1), (1, 2), (2, 2)]), DOT])


def t_where(rng):
    np = noun_phrase(rng)
    return join([OPEN_Q, lit("where", "dónde"), verb_be(np.plural), np.piece, QMARK])


def t_ready(rng):
    np = noun_phrase(rng, det=rng.choice(["the", "your"]))
    ready = agree(["listo", "lista", "listos", "listas"], np.gender, np.plural)
    verb = lit("will be", "estarán" if np.plural else "estará", [(0, 0), (1, 0)])
    return join([np.piece, verb, lit("ready", ready), time_phrase(rng), DOT])


TEMPLATES = [
    (t_available, 10), (t_broken, 5), (t_return, 9), (t_borrow, 9), (t_reservation, 6),
    (t_we_have, 5), (t_battery, 4), (t_opens, 4), (t_closed, 4), (t_do_you_have, 6),
    (t_returned_late, 4), (t_thanks, 6), (t_deposit, 4), (t_not_here, 5),
    (t_left_outside, 3), (t_clean, 4), (t_where, 5), (t_ready, 5),
]


def sentence(rng):
    template = rng.choices([t for t, _ in TEMPLATES], [w for _, w in TEMPLATES])[0]
    return template(rng)


def compose():
    """Returns (train, test): lists of Pieces; English sides are distinct across both."""
    rng = random.Random(RANDOM_STATE)
    train, test, seen_test = [], [], set()
    while len(test) < TEST_PAIRS:  # held-out sentences first, each one different
        p = sentence(rng)
        key = " ".join(p.en)
        if key not in seen_test:
            seen_test.add(key)
            test.append(p)
    while len(train) < TRAIN_PAIRS:  # training text repeats itself, but never a test sentence
        p = sentence(rng)
        if " ".join(p.en) not in seen_test:
            train.append(p)
    return train, test


def render(pieces):
    en = "".join(" ".join(p.en) + "\n" for p in pieces)
    es = "".join(" ".join(p.es) + "\n" for p in pieces)
    align = "".join(" ".join(f"{i}-{j}" for i, j in sorted(p.links)) + "\n" for p in pieces)
    return {"en": en, "es": es, "align": align}


def validate(files):
    """Equal line counts, no empty lines, every link inside its sentence pair."""
    lines = {k: v.split("\n")[:-1] for k, v in files.items()}
    n = len(lines["en"])
    assert n == len(lines["es"]) == len(lines["align"]), "line counts differ"
    for k, (en, es, al) in enumerate(zip(lines["en"], lines["es"], lines["align"]), 1):
        assert en and es and al, f"line {k}: empty line"
        en_len, es_len = len(en.split(" ")), len(es.split(" "))
        for link in al.split(" "):
            i, j = map(int, link.split("-"))
            assert 0 <= i < en_len and 0 <= j < es_len, f"line {k}: link {link} out of range"
    return n


def main():
    check = "--check" in sys.argv[1:]
    train, test = compose()
    outputs = {}
    for stem, pieces in [(NAME, train), (f"{NAME}.test", test)]:
        files = render(pieces)
        validate(files)
        for ext, text in files.items():
            outputs[HERE / f"{stem}.{ext}"] = text
    if check:
        stale = [p.name for p, text in outputs.items()
                 if not p.exists() or p.read_text(encoding="utf-8") != text]
        if stale:
            print("out of date: " + ", ".join(stale), file=sys.stderr)
            sys.exit(1)
        print(f"{len(outputs)} files up to date")
        return
    for path, text in outputs.items():
        path.write_text(text, encoding="utf-8")
    print(f"wrote {len(train)} training and {len(test)} held-out sentence pairs")


if __name__ == "__main__":
    main()

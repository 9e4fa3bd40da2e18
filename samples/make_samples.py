"""Write the bundled sample data for `agree`: invented, synthetic, reproducible.

Scenario (invented): a study of a neighbourhood repair café and community tool library.
Volunteers, coordinators and visitors were interviewed; three coders (amara, bastien, chen)
coded short excerpts with an 8-code codebook in two rounds, rated answers on a 1-5 scale, and
two of them applied several codes per excerpt. The three also highlighted coded passages in four
whole transcripts (written as a span table and as a REFI-QDA project package). Nothing here comes
from real people: every sentence is composed from the templates below, every code is drawn from
the model below.

Usage::

    python samples/make_samples.py            # rewrites the files beside this script
    python samples/make_samples.py OUTDIR     # writes them to OUTDIR

or, from Python, ``write_samples(Path(outdir), seed=SEED)``. The same seed gives
byte-identical CSV files (the workbook's cells are identical too; its zip container carries
write times, so its bytes are not).

Generative model (nominal rounds, after METHODS.md section 8.2): each excerpt has a true code
T drawn from the prevalences; coder i reports T with probability theta_i (shifted a little per
interview), otherwise makes an error. An error on 'Time pressure' or 'Burnout' lands on the
other one of the pair with probability CONFUSION; bastien's errors land on 'Coordination'
with probability OVERUSE; all other errors are drawn from the prevalences.
"""

from __future__ import annotations

import datetime as _dt
import os
import re
import sys
import tempfile
import uuid
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd

SEED = 20240611
CODERS = ("amara", "bastien", "chen")

# -- codebook -------------------------------------------------------------------------------
CODEBOOK = {
    "Belonging": "Taking part for the sense of community: friendships, feeling at home, "
                 "being part of the neighbourhood.",
    "Skills learning": "Learning or passing on practical know-how: repairing, testing, using "
                       "tools, teaching others.",
    "Time pressure": "Lack of hours: fitting shifts around work or family, rushing repairs, "
                     "queues that cannot be served before closing. About the clock, not about "
                     "how the person feels.",
    "Burnout": "Emotional or physical exhaustion from volunteering: feeling drained, dreading "
               "shifts, taking a break to recover. About how the person feels, not the clock.",
    "Coordination": "Organising the work: rotas, sign-up sheets, bookings, matching visitors "
                    "with fixers, communication between volunteers.",
    "Recognition": "Being thanked, noticed or credited by visitors, organisers or the "
                   "wider public.",
    "Material resources": "Tools, spare parts, consumables, space or money: having them, "
                          "lacking them, or how they were obtained.",
    "Conflict": "Open disagreement or tension between people involved: arguments, rows, "
                "falling out over rules or decisions.",
}
CODES = tuple(CODEBOOK)
PREVALENCE = np.array([0.17, 0.16, 0.14, 0.12, 0.15, 0.10, 0.13, 0.03])  # 'Conflict' is rare
CONFUSED = ("Time pressure", "Burnout")
OVERUSER, OVERUSED = "bastien", "Coordination"

RATING_LEVELS = {
    1: "No commitment: the answer says the person may stop or does not mind either way.",
    2: "Weak commitment: takes part when convenient, no plans to continue.",
    3: "Moderate commitment: comes regularly, intends to carry on for now.",
    4: "Strong commitment: takes on extra duties or promises future involvement.",
    5: "Very strong commitment: sees themself as responsible for keeping the project going.",
}

# -- text templates -------------------------------------------------------------------------
FILL = {
    "place": ["repair café", "tool library", "community hall", "workshop", "Saturday café"],
    "item": ["toaster", "lamp", "bicycle", "sewing machine", "kettle", "radio",
             "vacuum cleaner", "drill", "hair dryer", "coffee grinder"],
    "part": ["plug", "cable", "drive belt", "switch", "fuse", "bearing"],
    "name": ["Zoë", "Marek", "Priya", "Tomasz", "Inès", "Kofi", "Ruth", "Dev"],
    "duty": ["my job", "the school run", "night shifts", "caring for my mum", "my studies"],
    "supply": ["fuses", "sandpaper", "cable ties", "screws", "solder", "inner tubes"],
    "n": ["three", "four", "five", "six"],
}

TEMPLATES = {
    "Belonging": [
        "Coming to the {place} on a Saturday feels like seeing family.",
        "I moved here last year and the {place} is where I met half my neighbours.",
        "People wave at me in the street now, all because of the {place}.",
        "We share tea and biscuits after closing; that's the part I'd miss most.",
        "It's the one place where nobody asks what you do for a living.",
        "{name} said I was part of the furniture now, and I liked that.",
    ],
    "Skills learning": [
        "I had never opened a {item} before; now I can replace the {part} myself.",
        "{name} showed me how to test a {part}, and it finally clicked.",
        "I was pretty naïve about electrics when I started, and I've learned loads.",
        "Watching the older volunteers solder is better than any evening class.",
        "Now I teach visitors to fix their own {item} instead of doing it for them.",
    ],
    "Time pressure": [
        "I can only do two hours between {duty} and the doors closing.",
        "There's always a queue, and we rush the last {item} before six.",
        "With {duty} I squeeze the shifts in whenever I can.",
        "We never have enough time to finish the {item}, so people come back next month.",
        "Saturday mornings go so fast that half the tickets are still open at noon.",
    ],
    "Burnout": [
        "By the end of the month I'm running on empty.",
        "I took a break in spring because I was exhausted and dreading Saturdays.",
        "Some weeks I feel I give more than I have left.",
        "After fixing {n} of them in a row I just wanted to go home and sleep.",
        "I love the {place}, but lately it drains me more than it fills me up.",
    ],
    "Coordination": [
        "The rota lives in a group chat and nobody knows who's on.",
        "{name} keeps the sign-up sheet, otherwise it would be chaos.",
        "We double-booked the {place} twice, so now there's a shared calendar.",
        "Matching visitors with the right fixer is the hard part of the morning.",
        "Someone has to decide who takes the {item} and who takes the {part} jobs.",
    ],
    "Recognition": [
        "A visitor brought a card to thank us for the {item}, and that stayed with me.",
        "The council mentioned the {place} in its newsletter and we were all chuffed.",
        "It's nice when people notice the work, even just a quick thank-you.",
        "{name} put my name on the board for the most repairs this year.",
    ],
    "Material resources": [
        "We're always short of {supply}.",
        "Half the tools in the library came from a house clearance.",
        "Spare parts for an old {item} are impossible to find.",
        "The soldering station is broken again and there's no budget for a new one.",
        "A hardware shop gave us a box of {supply}, which kept us going for months.",
    ],
    "Conflict": [
        "Two volunteers argued about whether to accept the {item} at all.",
        "There was a row over who gets the good workbench.",
        "{name} and I disagree about asking for donations, and it got tense.",
    ],
}
OPENERS = ["", "", "", "", "Honestly? ", "Mm. ", "Good question. ", "Where do I start. ",
           "To be fair, it's mixed. ", "Oh, yes. ", "Right. ", "Let me think. "]
CLOSERS = ["", "", "", "", " That's just how it is.", " If that makes sense.", " Anyway.",
           " You know?", " I'm not complaining.", " Ask anyone.", " Same as last year, really."]

ANSWERS = {
    1: ["I'm not sure I'll still be here next year.",
        "It's fine, but I could take it or leave it.",
        "I only came because a friend dragged me along.",
        "If the {place} closed tomorrow I wouldn't really notice."],
    2: ["I come when nothing else is on.",
        "Now and then, if the weather's bad and I'm free.",
        "I drop in to the {place} sometimes, no promises.",
        "When {duty} allows it, which isn't often."],
    3: ["I try to make most Saturdays.",
        "It's part of my month now, I'd say.",
        "I'll keep coming as long as I enjoy it, and I do.",
        "I come every other week to help with the {item} repairs."],
    4: ["I've told the coordinator I'll cover the winter rota.",
        "I took on the tool loans on Tuesdays as well.",
        "I'm training two new volunteers on the {item} bench.",
        "I've promised to run the stall at the summer fête."],
    5: ["I'd keep the {place} going on my own if I had to.",
        "It's my project as much as anyone's; I'm not going anywhere.",
        "I've rearranged {duty} around it for three years now.",
        "If it needs a key holder, a treasurer or a fixer, it's me."],
}

# Fixed texts that exercise spreadsheet formula safety: a round-1 excerpt starting with '=',
# a round-2 excerpt starting with '-'.
FORMULA_LIKE = {
    1: ("Time pressure", "=2 hours a week is all I can promise, honestly."),
    2: ("Material resources",
        "- and then the drill broke again, so we borrowed one from next door."),
}


def _fill(template: str, rng: np.random.Generator) -> str:
    slots = {k: v[rng.integers(len(v))] for k, v in FILL.items()}
    return template.format(**slots)


def _sentence(code: str, rng: np.random.Generator, opener: bool = True) -> str:
    templates = TEMPLATES[code]
    text = _fill(templates[rng.integers(len(templates))], rng)
    if opener:
        text = OPENERS[rng.integers(len(OPENERS))] + text + CLOSERS[rng.integers(len(CLOSERS))]
    return text


# -- corpus ---------------------------------------------------------------------------------
N_INTERVIEWS = 40
N_CORPUS = 600
ROLES = ("volunteer", "coordinator", "visitor")


def make_corpus(rng: np.random.Generator) -> pd.DataFrame:
    """~600 excerpts from 40 interviews, each with a hidden true code (kept in `true_code`)."""
    sizes = rng.integers(10, 21, size=N_INTERVIEWS)
    while sizes.sum() != N_CORPUS:  # nudge random interviews until the total is exact
        i = rng.integers(N_INTERVIEWS)
        step = 1 if sizes.sum() < N_CORPUS else -1
        if 8 <= sizes[i] + step <= 24:
            sizes[i] += step
    roles = rng.choice(len(ROLES), size=N_INTERVIEWS, p=[0.65, 0.15, 0.20])
    interview = np.repeat([f"INT{i + 1:02d}" for i in range(N_INTERVIEWS)], sizes)
    role = np.repeat(np.array(ROLES)[roles], sizes)
    # coordinators talk more about organising, visitors more about thanks and learning
    tilt = np.ones((len(ROLES), len(CODES)))
    tilt[ROLES.index("coordinator"), CODES.index("Coordination")] = 2.0
    tilt[ROLES.index("visitor"), [CODES.index("Recognition"), CODES.index("Skills learning")]] = 1.8
    tilt[ROLES.index("visitor"), CODES.index("Burnout")] = 0.4
    weights = PREVALENCE[None, :] * tilt
    weights /= weights.sum(axis=1, keepdims=True)
    unit_role = np.repeat(roles, sizes)
    true = np.array([rng.choice(len(CODES), p=weights[r]) for r in unit_role])
    text = [_sentence(CODES[t], rng) for t in true]
    return pd.DataFrame({
        "unit_id": [f"EX{i + 1:04d}" for i in range(N_CORPUS)],
        "interview": interview,
        "participant_role": role,
        "text": text,
        "true_code": np.array(CODES)[true],
    })


# -- nominal rounds -------------------------------------------------------------------------
ROUNDS = {
    # interviews used, excerpts sampled, per-coder theta, P(error lands on the partner code),
    # P(bastien's error lands on 'Coordination'), skipped excerpts per coder
    1: dict(interviews=range(1, 13), n=120, theta=(0.78, 0.64, 0.76), confusion=0.75,
            overuse=0.90, skipped=(2, 0, 4)),
    2: dict(interviews=range(13, 25), n=150, theta=(0.90, 0.82, 0.89), confusion=0.75,
            overuse=0.80, skipped=(0, 1, 3)),
}


def _code_round(true: np.ndarray, interview: np.ndarray, spec: dict,
                rng: np.random.Generator) -> np.ndarray:
    """Codes (N, 3) as indices into CODES, -1 where a coder skipped the excerpt."""
    n, m = len(true), len(CODERS)
    groups, inverse = np.unique(interview, return_inverse=True)
    shift = rng.normal(0.0, 0.04, size=len(groups))[inverse]  # some interviews are harder
    theta = np.clip(np.asarray(spec["theta"])[None, :] + shift[:, None], 0.0, 1.0)
    correct = rng.random((n, m)) < theta
    errors = rng.choice(len(CODES), size=(n, m), p=PREVALENCE)
    a, b = CODES.index(CONFUSED[0]), CODES.index(CONFUSED[1])
    partner = np.where(true == a, b, np.where(true == b, a, -1))
    to_partner = (partner[:, None] >= 0) & (rng.random((n, m)) < spec["confusion"])
    errors = np.where(to_partner, partner[:, None], errors)
    over = np.zeros((n, m), dtype=bool)
    over[:, CODERS.index(OVERUSER)] = rng.random(n) < spec["overuse"]
    errors = np.where(over & ~to_partner, CODES.index(OVERUSED), errors)
    codes = np.where(correct, true[:, None], errors)
    # each skipped excerpt is skipped by one coder only, so every excerpt stays pairable
    skipped = rng.choice(n, size=sum(spec["skipped"]), replace=False)
    who = np.repeat(np.arange(m), spec["skipped"])
    codes[skipped, who] = -1
    return codes


def make_rounds(corpus: pd.DataFrame, rng: np.random.Generator,
                plant_rng: np.random.Generator) -> dict[int, pd.DataFrame]:
    """Sample each round's excerpts from its interviews and code them (changes corpus texts
    of the two formula-like excerpts)."""
    out = {}
    for number, spec in ROUNDS.items():
        names = [f"INT{i:02d}" for i in spec["interviews"]]
        pool = np.flatnonzero(corpus["interview"].isin(names).to_numpy())
        picked = np.sort(rng.choice(pool, size=spec["n"], replace=False))
        # one excerpt per round starts like a spreadsheet formula; it replaces the text of a
        # picked excerpt with the same true code, in the corpus too
        code, text = FORMULA_LIKE[number]
        same = picked[corpus["true_code"].to_numpy()[picked] == code]
        corpus.loc[same[plant_rng.integers(len(same))], "text"] = text
        part = corpus.iloc[picked]
        true = np.array([CODES.index(c) for c in part["true_code"]])
        codes = _code_round(true, part["interview"].to_numpy(), spec, rng)
        labels = np.array(list(CODES) + [""], dtype=object)[codes]
        frame = pd.DataFrame({"excerpt_id": part["unit_id"].to_numpy(),
                              "interview": part["interview"].to_numpy(),
                              "excerpt": part["text"].to_numpy()})
        for i, coder in enumerate(CODERS):
            frame[coder] = labels[:, i]
        out[number] = frame
    return out


def long_layout(rounds: dict[int, pd.DataFrame]) -> pd.DataFrame:
    """Both rounds stacked, one row per (round, excerpt, coder) value; skipped values: no row."""
    frames = []
    for number, frame in rounds.items():
        long = frame.melt(id_vars=["excerpt_id"], value_vars=list(CODERS),
                          var_name="coder", value_name="code")
        long.insert(0, "round", number)
        frames.append(long[long["code"] != ""])
    stacked = pd.concat(frames, ignore_index=True)
    order = {c: i for i, c in enumerate(CODERS)}
    stacked["_coder"] = stacked["coder"].map(order)
    stacked = stacked.sort_values(["round", "excerpt_id", "_coder"], kind="stable")
    return stacked.drop(columns="_coder").reset_index(drop=True)


# -- ordinal ratings ------------------------------------------------------------------------
N_RATINGS = 80
CUTS = np.array([-1.3, -0.45, 0.45, 1.3])
RATING_BIAS = np.array([0.0, -0.1, 0.45])   # chen rates about half a level higher
RATING_NOISE = np.array([0.40, 0.45, 0.40])
RATING_SKIPPED = (1, 2, 2)


def make_ratings(rng: np.random.Generator) -> pd.DataFrame:
    latent = rng.normal(0.0, 1.0, size=N_RATINGS)
    level = 1 + np.searchsorted(CUTS, latent)
    answers = [_fill(ANSWERS[int(k)][rng.integers(len(ANSWERS[int(k)]))], rng) for k in level]
    noisy = latent[:, None] + RATING_BIAS[None, :] + rng.normal(size=(N_RATINGS, 3)) * RATING_NOISE
    ratings = (1 + np.searchsorted(CUTS, noisy)).astype(object)
    skipped = rng.choice(N_RATINGS, size=sum(RATING_SKIPPED), replace=False)
    ratings[skipped, np.repeat(np.arange(3), RATING_SKIPPED)] = ""
    frame = pd.DataFrame({"response_id": [f"R{i + 1:03d}" for i in range(N_RATINGS)],
                          "answer": answers})
    for i, coder in enumerate(CODERS):
        frame[coder] = [str(v) for v in ratings[:, i]]
    return frame


# -- set-valued workbook --------------------------------------------------------------------
N_MULTI = 60
MULTI_CODERS = ("amara", "bastien")
SEPARATOR = "; "


def make_multicode(rng: np.random.Generator) -> dict[str, pd.DataFrame]:
    q = len(CODES)
    a, b = CODES.index(CONFUSED[0]), CODES.index(CONFUSED[1])
    size = rng.choice([1, 2, 3], size=N_MULTI, p=[0.35, 0.45, 0.20])
    truth = [rng.choice(q, size=k, replace=False, p=PREVALENCE) for k in size]
    texts = [" ".join(_sentence(CODES[c], rng, opener=(j == 0)) for j, c in enumerate(t))
             for t in truth]
    formula_like = rng.integers(N_MULTI)
    texts[formula_like] = "=1 in 3 things gets fixed, and we're always short of screws."
    truth[formula_like] = np.array([CODES.index("Material resources")])
    sheets = {}
    for coder in MULTI_CODERS:
        cells = []
        for t in truth:
            kept = [c for c in t if rng.random() < 0.85]
            kept = [{a: b, b: a}.get(c, c) if rng.random() < 0.25 else c for c in kept]
            extra_p = 0.30 if coder == OVERUSER else 0.12
            if rng.random() < extra_p:
                kept.append(CODES.index(OVERUSED) if coder == OVERUSER else rng.integers(q))
            if not kept:
                kept = [t[0]]
            chosen = sorted(set(int(c) for c in kept))
            cells.append(SEPARATOR.join(CODES[c] for c in chosen))
        sheets[coder] = pd.DataFrame({"excerpt_id": [f"M{i + 1:03d}" for i in range(N_MULTI)],
                                      "excerpt": texts, "codes": cells})
    return sheets


# -- coded passages (highlighted spans in whole transcripts) --------------------------------------
# Four interview transcripts, coded by highlighting passages as coders do in analysis software.
# The code book nests the codes under three themes; the spans are written both as a REFI-QDA
# project package (passages.qdpx) and as a span table (passages_spans.csv + passages/*.txt).
PASSAGE_THEMES = {
    "Motivation": ("Belonging", "Skills learning"),
    "Strain": ("Time pressure", "Burnout"),
    "Organisation": ("Coordination", "Material resources"),
}
PASSAGE_CODES = tuple(f"{t}/{c}" for t, cs in PASSAGE_THEMES.items() for c in cs)
PASSAGE_CODERS = ("amara", "bastien", "chen")
PASSAGE_PEOPLE = (("T01", "Zoë"), ("T02", "Marek"), ("T03", "Inès"), ("T04", "Kofi"))
QUESTIONS = ["What brought you to the repair café?", "How do the Saturday shifts work for you?",
             "What happens when a repair goes wrong?", "Tell me about the tool library.",
             "What would make it easier to keep going?", "How is the work organised?"]
# planted: a passage in T03 with a character outside the Basic Multilingual Plane (positions
# after it differ for software counting UTF-16 units), coded by chen only
PASSAGE_EMOJI = ("Skills learning",
                 "The first time I fixed a lamp myself I felt like a magician 🪄, naïve as that sounds.")
PASSAGE_THETA = (0.85, 0.70, 0.82)  # P(a coder applies the passage's true code)
PASSAGE_MISS = 0.08  # P(a coder leaves a codable passage unmarked)


def make_passages(rng: np.random.Generator) -> tuple[dict[str, str], pd.DataFrame]:
    """Transcripts (id -> text, '\\n' line ends) and the coded spans: one row per coder, code
    and span (document, coder, code, start, end exclusive, in code points)."""
    texts, records = {}, []
    codes = [c.split("/")[1] for c in PASSAGE_CODES]
    for doc, person in PASSAGE_PEOPLE:
        text = ""
        sentences = []  # (start, end, true code, planted)
        for q in rng.permutation(len(QUESTIONS))[:5]:
            text += f"Interviewer: {QUESTIONS[q]}\n{person}: "
            for k in range(int(rng.integers(1, 3))):
                code = codes[int(rng.integers(len(codes)))]
                sentence = _sentence(code, rng, opener=False)
                if k:
                    text += " "
                sentences.append((len(text), len(text) + len(sentence), code, False))
                text += sentence
            text += "\n"
            if doc == "T03" and len(sentences) <= 2 and not any(s[3] for s in sentences):
                code, sentence = PASSAGE_EMOJI
                text += f"{person}: "
                sentences.append((len(text), len(text) + len(sentence), code, True))
                text += sentence + "\n"
        texts[doc] = text
        for start, end, code, planted in sentences:
            words = [m.span() for m in _WORD.finditer(text, start, end)]
            for c, coder in enumerate(PASSAGE_CODERS):
                if planted and coder != "chen" or not planted and rng.random() < PASSAGE_MISS:
                    continue
                if rng.random() < PASSAGE_THETA[c]:
                    given = code
                elif coder == OVERUSER:
                    given = OVERUSED
                else:
                    given = codes[int(rng.integers(len(codes)))]
                # boundaries drift by whole words: coders highlight a little more or less
                first = min(int(rng.choice([0, 0, 0, 1, 2])), len(words) - 1)
                last = max(first, len(words) - 1 - int(rng.choice([0, 0, 0, 1, 2])))
                s, e = words[first][0], words[last][1]
                if rng.random() < 0.15 and s > 0:  # the speaker's name marked too
                    s = text.rfind("\n", 0, s) + 1
                theme = next(t for t, cs in PASSAGE_THEMES.items() if given in cs)
                records.append((doc, coder, f"{theme}/{given}", s, e))
                if rng.random() < 0.10:  # a second, theme-level code on the same span
                    records.append((doc, coder, theme, s, e))
    spans = pd.DataFrame(records, columns=["document", "coder", "code", "start", "end"])
    spans = spans.drop_duplicates().sort_values(["document", "start", "coder", "code"], kind="stable")
    spans["excerpt"] = [texts[d][s:e] for d, s, e in zip(spans["document"], spans["start"], spans["end"])]
    return texts, spans.reset_index(drop=True)


_WORD = re.compile(r"\S+")


def _guid(rng: np.random.Generator) -> str:
    return str(uuid.UUID(bytes=rng.bytes(16), version=4))


def passages_project(texts: dict[str, str], spans: pd.DataFrame, rng: np.random.Generator,
                     seed: int) -> dict[str, bytes]:
    """The REFI-QDA package's entries: project.qde (namespace urn:QDA-XML:project:1.0) and one
    plain-text file per transcript in sources/. Positions are code points, end exclusive."""
    from xml.sax.saxutils import escape, quoteattr

    users = {c: _guid(rng) for c in PASSAGE_CODERS}
    themes = {t: _guid(rng) for t in PASSAGE_THEMES}
    codes = {c: _guid(rng) for c in PASSAGE_CODES}
    docs = {d: _guid(rng) for d in texts}
    out = ['<?xml version="1.0" encoding="utf-8"?>',
           f'<Project xmlns="urn:QDA-XML:project:1.0" name="Repair café passages (synthetic)" '
           f'origin="agree samples/make_samples.py, seed {seed}">',
           "<Users>" + "".join(f'<User guid="{g}" name="{c}"/>' for c, g in users.items()) + "</Users>",
           "<CodeBook><Codes>"]
    for theme, children in PASSAGE_THEMES.items():
        inner = "".join(f'<Code guid="{codes[f"{theme}/{c}"]}" name={quoteattr(c)} isCodable="true"/>'
                        for c in children)
        out.append(f'<Code guid="{themes[theme]}" name="{theme}" isCodable="true">{inner}</Code>')
    out.append("</Codes></CodeBook><Sources>")
    entries = {}
    for doc, text in texts.items():
        out.append(f'<TextSource guid="{docs[doc]}" name="{doc}" plainTextPath="internal://{docs[doc]}.txt">')
        rows = spans[spans["document"] == doc]
        for (coder, start, end), group in rows.groupby(["coder", "start", "end"], sort=True):
            sel = _guid(rng)
            name = text[start:end]
            name = name if len(name) <= 60 else name[:59] + "…"
            out.append(f'<PlainTextSelection guid="{sel}" name={quoteattr(name)} startPosition="{start}" '
                       f'endPosition="{end}" creatingUser="{users[coder]}">')
            for code in group["code"]:
                target = codes.get(code) or themes[code]
                out.append(f'<Coding guid="{_guid(rng)}" creatingUser="{users[coder]}">'
                           f'<CodeRef targetGUID="{target}"/></Coding>')
            out.append("</PlainTextSelection>")
        out.append("</TextSource>")
        entries[f"sources/{docs[doc]}.txt"] = text.encode("utf-8")
    out.append("</Sources>")
    out.append(f"<Description>{escape('Synthetic: invented interview transcripts, not real people.')}"
               "</Description></Project>")
    return {"project.qde": ("\n".join(out) + "\n").encode("utf-8"), **entries}


def _write_zip(entries: dict[str, bytes], path: Path) -> None:
    def write(tmp):
        with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as z:
            for name, data in entries.items():
                info = zipfile.ZipInfo(name, date_time=(2024, 1, 1, 0, 0, 0))
                info.compress_type = zipfile.ZIP_DEFLATED
                z.writestr(info, data)
    _write_atomic(path, write)


def write_passages(outdir: Path, seed: int = SEED) -> list[Path]:
    """The coded-passage samples: passages/*.txt, passages_spans.csv and passages.qdpx."""
    text_rng, guid_rng = (np.random.default_rng(s) for s in np.random.SeedSequence([seed, 9]).spawn(2))
    texts, spans = make_passages(text_rng)
    folder = outdir / "passages"
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for doc, text in texts.items():
        _write_atomic(folder / f"{doc}.txt", lambda tmp, t=text: Path(tmp).write_bytes(t.encode("utf-8")))
        written.append(folder / f"{doc}.txt")
    _write_csv(spans, outdir / "passages_spans.csv")
    _write_zip(passages_project(texts, spans, guid_rng, seed), outdir / "passages.qdpx")
    return written + [outdir / "passages_spans.csv", outdir / "passages.qdpx"]


# -- writing --------------------------------------------------------------------------------
def _write_atomic(path: Path, write) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    try:
        write(tmp)
        os.chmod(tmp, 0o666 & ~umask)   # mkstemp makes owner-only files; give ordinary ones
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def _write_csv(frame: pd.DataFrame, path: Path) -> None:
    _write_atomic(path, lambda tmp: frame.to_csv(tmp, index=False, encoding="utf-8",
                                                 lineterminator="\n"))


def _write_workbook(sheets: dict[str, pd.DataFrame], path: Path, seed: int) -> None:
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, frame in sheets.items():
        ws = wb.create_sheet(name)
        ws.append(list(frame.columns))
        for row in frame.itertuples(index=False):
            ws.append([str(v) for v in row])
        for row in ws.iter_rows(min_row=2):
            for cell in row:
                cell.data_type = "s"   # text stays text, even when it starts with '='
        ws.column_dimensions["B"].width = 70
        ws.column_dimensions["C"].width = 40
    fixed = _dt.datetime(2024, 1, 1)
    wb.properties.creator = "agree samples/make_samples.py"
    wb.properties.title = "Synthetic sample: set-valued coding"
    wb.properties.description = (f"Synthetic data invented by samples/make_samples.py "
                                 f"(seed {seed}); no real people or interviews.")
    wb.properties.created = fixed
    wb.properties.modified = fixed
    _write_atomic(path, wb.save)


def write_samples(outdir: Path, seed: int = SEED) -> list[Path]:
    """Generate every sample file into `outdir` and return their paths."""
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    corpus_rng, rounds_rng, ratings_rng, multi_rng, plant_rng = (
        np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(5))
    corpus = make_corpus(corpus_rng)
    rounds = make_rounds(corpus, rounds_rng, plant_rng)
    files = {
        "codebook.csv": pd.DataFrame({"code": list(CODEBOOK),
                                      "description": list(CODEBOOK.values())}),
        "round1.csv": rounds[1],
        "round2.csv": rounds[2],
        "rounds_long.csv": long_layout(rounds),
        "ratings.csv": make_ratings(ratings_rng),
        "ratings_codebook.csv": pd.DataFrame({"code": list(RATING_LEVELS),
                                              "order": list(range(1, len(RATING_LEVELS) + 1)),
                                              "description": list(RATING_LEVELS.values())}),
        "corpus.csv": corpus.drop(columns="true_code"),
    }
    written = []
    for name, frame in files.items():
        _write_csv(frame, outdir / name)
        written.append(outdir / name)
    _write_workbook(make_multicode(multi_rng), outdir / "multicode.xlsx", seed)
    written.append(outdir / "multicode.xlsx")
    return written + write_passages(outdir, seed)


def main(argv: list[str]) -> int:
    outdir = Path(argv[1]) if len(argv) > 1 else Path(__file__).resolve().parent
    for path in write_samples(outdir):
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))

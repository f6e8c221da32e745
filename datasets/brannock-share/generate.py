"""Generate the Brannock Vale Water demo share: originals, files derived from them, and files
that only look alike (one template, one system's log), with the truth of which came from which.

Output: ``share/<folder>/<file>`` and ``truth.tsv``. The same seed gives byte-identical files.
Standard library only.
"""

from __future__ import annotations

import argparse
import random
import textwrap
from collections.abc import Callable
from pathlib import Path

DEFAULT_SEED = 2718

SUBJECTS = ["the duty operator", "the shift lead", "the site engineer", "the control room",
            "the sampling team", "the contractor", "the reservoir keeper", "the night crew",
            "the quality officer", "the pump technician"]  # fmt: skip
VERBS = ["checks", "records", "isolates", "flushes", "inspects", "calibrates", "reports",
         "confirms", "logs", "restarts", "drains", "samples", "signs off", "escalates"]  # fmt: skip
OBJECTS = ["the inlet screen", "valve V-{n}", "the chlorine dosing line", "pump P-{n}",
           "the turbidity meter", "the backwash cycle", "filter bed {n}", "the sludge tank",
           "the overflow weir", "the pH probe", "booster station {n}", "the standby generator",
           "the telemetry outstation", "the contact tank",
           "main {n} at the river crossing"]  # fmt: skip
TAILS = ["before the morning peak", "within two hours of the alarm", "at every shift change",
         "when the level falls below the lower mark", "after heavy rain", "once a week",
         "unless the reading is steady", "and notes the result in the site book",
         "with a second person present", "before any chemical delivery is accepted",
         "if the flow exceeds {n} litres per second", "until the readings agree"]  # fmt: skip
TOPICS = ["chlorine dosing", "filter backwash", "reservoir inspection", "pump changeover",
          "sample handling", "storm overflow", "generator testing", "valve exercising",
          "mains flushing", "lone working", "chemical deliveries", "telemetry faults"]  # fmt: skip
WORDS = [
    "flow",
    "level",
    "dose",
    "alarm",
    "screen",
    "filter",
    "sample",
    "tank",
    "valve",
    "meter",
    "reading",
    "shift",
    "log",
    "pressure",
    "turbidity",
    "residual",
    "intake",
    "outfall",
]


def sentence(rng: random.Random) -> str:
    n = rng.randint(1, 40)
    parts = [rng.choice(SUBJECTS).capitalize(), rng.choice(VERBS), rng.choice(OBJECTS),
             rng.choice(TAILS)]  # fmt: skip
    return " ".join(parts).format(n=n * 5 if "litres" in parts[-1] else n) + "."


def procedure(rng: random.Random, number: int) -> str:
    """A procedure document: a title, numbered sections of wrapped prose."""
    topic = TOPICS[number % len(TOPICS)]
    lines = [f"BRANNOCK VALE WATER - OPERATING PROCEDURE OP-{100 + number}",
             f"Subject: {topic}", f"Revision {rng.randint(1, 9)}", ""]  # fmt: skip
    for section in range(1, rng.randint(5, 8)):
        lines.append(f"{section}. {rng.choice(WORDS).capitalize()} and {rng.choice(WORDS)}")
        text = " ".join(sentence(rng) for _ in range(rng.randint(4, 9)))
        lines += [*textwrap.wrap(text, 78), ""]
    return "\n".join(lines)


def script(rng: random.Random, number: int) -> str:
    """A small Python-like tool of the control room, indented with four spaces."""
    name = f"{rng.choice(WORDS)}_{rng.choice(WORDS)}"
    out = [f'"""{name}: {rng.choice(TOPICS)} helper for site {number}."""', "", "import csv",
           "import sys", ""]  # fmt: skip
    functions = []
    for f in range(rng.randint(4, 7)):
        word, other = rng.choice(WORDS), rng.choice(WORDS)
        functions.append(f"{word}_{other}_{f}")
        limit = rng.randint(2, 90)
        out += [
            f"def {word}_{other}_{f}(rows, limit={limit}):",
            f'    """Return the {word} rows whose {other} is above the limit."""',
            "    found = []",
            "    for row in rows:",
            f'        value = float(row["{other}"])',
            f'        if value > limit and row.get("{word}") != "{rng.choice(WORDS)}":',
            f'            found.append((row["site"], value * {rng.randint(2, 9)}))',
            "    return found",
            "",
        ]
    out += ["", 'if __name__ == "__main__":', "    rows = list(csv.DictReader(sys.stdin))",
            f"    print(len({functions[0]}(rows)))"]  # fmt: skip
    return "\n".join(out) + "\n"


def settings(rng: random.Random, number: int) -> str:
    """An INI-like settings file of one outstation."""
    out = [f"; outstation {number} settings", ""]
    for section in rng.sample(WORDS, 6):
        out.append(f"[{section}]")
        for key in rng.sample(WORDS, rng.randint(3, 6)):
            out.append(f"{key}_limit = {rng.randint(1, 999)}")
            out.append(f"{key}_unit = {rng.choice(['l/s', 'mg/l', 'bar', 'm', 'NTU', 'pH'])}")
        out.append("")
    return "\n".join(out)


def monthly_report(rng: random.Random, month: str) -> str:
    """One month's pumping report: the same template every month, other numbers and notes."""
    out = ["BRANNOCK VALE WATER", f"MONTHLY PUMPING REPORT - {month} 2025", "",
           "Prepared by the operations desk for the board. Figures are provisional until the",
           "quarterly reconciliation is signed off.", "", "Site        Hours   Volume (Ml)  Faults",
           "----------  ------  -----------  ------"]  # fmt: skip
    for site in ("Aldmere", "Brannock", "Coldharbour", "Dunsey", "Eastwold", "Fennick"):
        out.append(f"{site:<10}  {rng.randint(300, 744):>6}  {rng.uniform(5, 90):>11.1f}"
                   f"  {rng.randint(0, 7):>6}")  # fmt: skip
    out += ["", "Notes", ""]
    out += textwrap.wrap(" ".join(sentence(rng) for _ in range(rng.randint(3, 6))), 78)
    return "\n".join(out) + "\n"


def telemetry_log(rng: random.Random, day: int) -> str:
    """A day of the telemetry system's log: one system, its templates and hosts every day."""
    out = []
    seconds = 0
    for _ in range(rng.randint(150, 220)):
        seconds += rng.randint(5, 600)
        clock = f"{seconds // 3600 % 24:02d}:{seconds // 60 % 60:02d}:{seconds % 60:02d}"
        stamp = f"2025-05-{day:02d} {clock}"
        host = rng.choice(["os-aldmere", "os-dunsey", "os-fennick"])
        kind = rng.random()
        if kind < 0.6:
            out.append(
                f"{stamp} {host} poll ok tag={rng.choice(WORDS)} value={rng.uniform(0, 99):.2f}"
            )
        elif kind < 0.85:
            out.append(f"{stamp} {host} alarm {rng.choice(['raised', 'cleared'])}"
                       f" point={rng.randint(1, 64)} {rng.choice(WORDS)}")  # fmt: skip
        else:
            out.append(
                f"{stamp} {host} link retry={rng.randint(1, 5)} rtt_ms={rng.randint(20, 900)}"
            )
    return "\n".join(out) + "\n"


# --- derivations ----------------------------------------------------------------------------


def edited(rng: random.Random, text: str, share: float) -> str:
    """`text` with about `share` of its words replaced by other words."""
    words = text.split(" ")
    for k in rng.sample(range(len(words)), max(1, int(share * len(words)))):
        words[k] = rng.choice(WORDS)
    return " ".join(words)


def excerpt(rng: random.Random, text: str) -> str:
    lines = text.splitlines(keepends=True)
    size = max(6, int(len(lines) * rng.uniform(0.3, 0.5)))
    start = rng.randint(0, len(lines) - size)
    return "".join(lines[start : start + size])


def crlf(text: str) -> str:
    return text.replace("\n", "\r\n")


def tabbed(text: str) -> str:
    return "\n".join(line.replace("    ", "\t") for line in text.split("\n"))


def rewrapped(text: str) -> str:
    """Paragraphs re-wrapped at 60 columns: every line break moves."""
    out = []
    for block in text.split("\n\n"):
        out.append("\n".join(textwrap.wrap(" ".join(block.split()), 60)))
    return "\n\n".join(out) + "\n"


def reordered(rng: random.Random, text: str) -> str:
    blocks = text.split("\n\n")
    head, rest = blocks[0], blocks[1:]
    rng.shuffle(rest)
    return "\n\n".join([head, *rest])


def generate(out: Path, seed: int) -> None:
    rng = random.Random(seed)
    files: dict[str, str] = {}
    truth: list[tuple[str, str, str, str]] = []

    def derive(source: str, target: str, how: str, relation: str, make: Callable[[str], str]):
        files[target] = make(files[source])
        truth.append((target, source, relation, how))

    for k in range(8):
        files[f"procedures/OP-{100 + k}.txt"] = procedure(rng, k)
    for k in range(5):
        files[f"tools/{k}_{rng.choice(WORDS)}.py"] = script(rng, k)
    for k in range(4):
        files[f"outstations/os{k}.ini"] = settings(rng, k)
    for month in ("January", "February", "March", "April", "May", "June"):
        files[f"reports/pumping-{month.lower()}.txt"] = monthly_report(rng, month)
    for day in range(3, 9):
        files[f"telemetry/{day:02d}-may.log"] = telemetry_log(rng, day)

    names = sorted(files)
    procedures = [n for n in names if n.startswith("procedures/")]
    tools = [n for n in names if n.startswith("tools/")]
    derive(procedures[0], "archive/OP-100 copy.txt", "copy", "identical", lambda t: t)
    derive(procedures[1], "drafts/OP-101-draft.txt", "edited 2 % of words", "near_copy",
           lambda t: edited(rng, t, 0.02))  # fmt: skip
    derive(procedures[2], "drafts/OP-102-review.txt", "edited 8 % of words", "near_copy",
           lambda t: edited(rng, t, 0.08))  # fmt: skip
    derive(procedures[3], "handbook/chapter-3.txt", "excerpt", "b_contains_a",
           lambda t: excerpt(rng, t))  # fmt: skip
    derive(procedures[4], "handbook/OP-104-with-annex.txt", "extended by an annex",
           "a_contains_b", lambda t: t + "\nANNEX\n" + procedure(rng, 40))  # fmt: skip
    derive(procedures[5], "exports/OP-105-windows.txt", "CRLF line ends", "near_copy", crlf)
    derive(procedures[6], "exports/OP-106-narrow.txt", "re-wrapped at 60 columns", "near_copy",
           rewrapped)  # fmt: skip
    derive(procedures[7], "drafts/OP-107-reordered.txt", "sections reordered", "near_copy",
           lambda t: reordered(rng, t))  # fmt: skip
    derive(tools[0], "backup/tool-copy-tabs.py", "indentation as tabs", "near_copy", tabbed)
    derive(tools[1], "backup/tool-patched.py", "edited 3 % of words", "near_copy",
           lambda t: edited(rng, t, 0.03))  # fmt: skip

    for name, text in files.items():
        path = out / "share" / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(text.encode("utf-8"))
    rows = ["derived\tsource\trelation\thow"]
    rows += ["\t".join(row) for row in truth]
    (out / "truth.tsv").write_text("\n".join(rows) + "\n", encoding="utf-8")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent)
    args = parser.parse_args()
    generate(args.out, args.seed)


if __name__ == "__main__":
    main()

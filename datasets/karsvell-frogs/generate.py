"""Generate the Karsvell torrent frog demo set: synthetic mitochondrion-like genomes.

Genomes evolve down a fixed rooted tree under HKY85 with discrete-gamma rate heterogeneity
across sites and a few short insertions and deletions per branch. Two records are deposited
as reverse complements and one from a rotated origin. Output: ``genomes/*.fasta``,
``truth.nwk`` and ``labels.tsv``. The same seed gives byte-identical files.
"""

from __future__ import annotations

import argparse
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

DEFAULT_SEED = 20240917
BASES = np.frombuffer(b"ACGT", dtype=np.uint8)
COMPLEMENT = bytes.maketrans(b"ACGT", b"TGCA")

# Model parameters (order A, C, G, T).
BASE_FREQS = np.array([0.31, 0.27, 0.13, 0.29])
KAPPA = 12.0  # transition/transversion rate ratio
GAMMA_ALPHA = 0.45  # shape of the rate distribution across sites
GAMMA_CATEGORIES = 4
ROOT_LENGTH = 16_240
INDELS_PER_UNIT = 90.0  # expected indel events per unit of branch length (plus one)
MAX_INDEL = 12
WRAP = 60


@dataclass
class Node:
    """A node of the true tree; leaves carry a species record."""

    length: float
    children: list[Node] = field(default_factory=list)
    item: str = ""
    species: str = ""
    clade: str = ""
    group: str = ""
    strand: str = "+"
    rotate: bool = False


def leaf(
    item: str,
    species: str,
    clade: str,
    group: str,
    length: float,
    strand: str = "+",
    rotate: bool = False,
) -> Node:
    """Build a leaf node."""
    return Node(length, [], item, species, clade, group, strand, rotate)


def join(length: float, *children: Node) -> Node:
    """Build an internal node."""
    return Node(length, list(children))


def true_tree() -> Node:
    """The rooted tree of the 14 species; branch lengths in expected substitutions per site."""
    fum, riv, aur, sax, sol = "fumosa", "rivalis", "aurimana", "saxatrix", "solitaria"
    west, east = "western", "eastern"
    return join(
        0.0,
        leaf("KVM30418", "Obrunella antiqua", "outgroup", "outgroup", 0.31),
        join(
            0.05,
            join(
                0.045,
                join(
                    0.03,
                    leaf("KVM31207", "Karsvellia fumosa", west, fum, 0.021),
                    join(
                        0.009,
                        leaf("KVM31562", "Karsvellia cinerella", west, fum, 0.012),
                        leaf("KVM31990", "Karsvellia velata", west, fum, 0.014),
                    ),
                ),
                join(
                    0.026,
                    join(
                        0.016,
                        leaf("KVM32044", "Karsvellia rivalis", west, riv, 0.018),
                        leaf("KVM32471", "Karsvellia stillans", west, riv, 0.022),
                    ),
                    leaf("KVM32815", "Karsvellia umbricola", west, riv, 0.041, strand="-"),
                ),
            ),
            join(
                0.032,
                leaf("KVM33109", "Karsvellia solitaria", east, sol, 0.088),
                join(
                    0.021,
                    join(
                        0.034,
                        leaf("KVM33650", "Karsvellia aurimana", east, aur, 0.029, rotate=True),
                        join(
                            0.013,
                            leaf("KVM33872", "Karsvellia gelida", east, aur, 0.015),
                            leaf("KVM34126", "Karsvellia nitens", east, aur, 0.017),
                        ),
                    ),
                    join(
                        0.019,
                        join(
                            0.021,
                            leaf("KVM34593", "Karsvellia saxatrix", east, sax, 0.011),
                            leaf("KVM34708", "Karsvellia crepitans", east, sax, 0.013),
                        ),
                        leaf("KVM35261", "Karsvellia montivaga", east, sax, 0.036, strand="-"),
                    ),
                ),
            ),
        ),
    )


def hky_matrix() -> np.ndarray:
    """HKY85 rate matrix, scaled to one expected substitution per unit time."""
    q = np.tile(BASE_FREQS, (4, 1))
    for i, j in ((0, 2), (2, 0), (1, 3), (3, 1)):  # A<->G, C<->T transitions
        q[i, j] *= KAPPA
    np.fill_diagonal(q, 0.0)
    np.fill_diagonal(q, -q.sum(axis=1))
    scaled: np.ndarray = q / -(BASE_FREQS @ np.diag(q))
    return scaled


def transition_probs(q: np.ndarray, t: float) -> np.ndarray:
    """P(t) = exp(Qt) via the eigen decomposition of the reversible matrix."""
    root_pi = np.sqrt(BASE_FREQS)
    sym = root_pi[:, None] * q / root_pi[None, :]
    vals, vecs = np.linalg.eigh((sym + sym.T) / 2)
    p = (vecs * np.exp(vals * t)) @ vecs.T
    p = p / root_pi[:, None] * root_pi[None, :]
    p = np.clip(p, 0.0, None)
    probs: np.ndarray = p / p.sum(axis=1, keepdims=True)
    return probs


def lower_gamma_reg(s: float, x: float) -> float:
    """Regularized lower incomplete gamma P(s, x) by its power series."""
    if x <= 0.0:
        return 0.0
    term = 1.0 / s
    total = term
    k = 0
    while term > total * 1e-15 and k < 10_000:
        k += 1
        term *= x / (s + k)
        total += term
    return min(1.0, total * math.exp(s * math.log(x) - x - math.lgamma(s)))


def gamma_quantile(alpha: float, p: float) -> float:
    """Quantile of Gamma(shape=alpha, rate=alpha) by bisection."""
    lo, hi = 0.0, 100.0
    for _ in range(200):
        mid = (lo + hi) / 2
        if lower_gamma_reg(alpha, mid * alpha) < p:
            lo = mid
        else:
            hi = mid
    return (lo + hi) / 2


def gamma_rates(alpha: float, k: int) -> np.ndarray:
    """Mean rate of each of k equiprobable discrete-gamma categories (mean 1)."""
    cuts = [0.0] + [gamma_quantile(alpha, i / k) for i in range(1, k)] + [math.inf]
    cdf1 = [1.0 if math.isinf(c) else lower_gamma_reg(alpha + 1.0, c * alpha) for c in cuts]
    rates = np.array([(cdf1[i + 1] - cdf1[i]) * k for i in range(k)])
    normed: np.ndarray = rates / rates.mean()
    return normed


def root_genome(rng: np.random.Generator) -> np.ndarray:
    """Ancestral genome: stationary bases plus a tandem-repeat block in a control region."""
    body = rng.choice(4, size=ROOT_LENGTH - 600, p=BASE_FREQS).astype(np.uint8)
    unit = rng.choice(4, size=75, p=BASE_FREQS).astype(np.uint8)
    repeats = np.tile(unit, 8)
    mutate = rng.random(repeats.size) < 0.04
    repeats[mutate] = rng.choice(4, size=int(mutate.sum()), p=BASE_FREQS)
    tail = rng.choice(4, size=ROOT_LENGTH - body.size - repeats.size, p=BASE_FREQS)
    return np.concatenate([body, repeats, tail.astype(np.uint8)])


def substitute(
    seq: np.ndarray,
    cats: np.ndarray,
    t: float,
    q: np.ndarray,
    rates: np.ndarray,
    rng: np.random.Generator,
) -> np.ndarray:
    """Apply HKY85 substitutions over branch length t, per rate category."""
    out = seq.copy()
    draws = rng.random(seq.size)
    for c, rate in enumerate(rates):
        mask = cats == c
        cum = np.cumsum(transition_probs(q, t * rate), axis=1)
        new = (draws[mask, None] > cum[seq[mask]]).sum(axis=1)
        out[mask] = np.minimum(new, 3).astype(np.uint8)
    return out


def indels(
    seq: np.ndarray, cats: np.ndarray, t: float, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray, int, int]:
    """Apply a few short insertions and deletions; return new arrays and event counts."""
    n_events = int(rng.poisson(1.0 + INDELS_PER_UNIT * t))
    n_ins = n_del = 0
    for _ in range(n_events):
        size = min(int(rng.geometric(0.35)), MAX_INDEL)
        pos = int(rng.integers(0, seq.size - size))
        if rng.random() < 0.5:
            seq = np.delete(seq, np.s_[pos : pos + size])
            cats = np.delete(cats, np.s_[pos : pos + size])
            n_del += 1
            continue
        if rng.random() < 0.5:  # tandem duplication of the preceding bases
            new = seq[max(0, pos - size) : pos].copy()
        else:
            new = rng.choice(4, size=size, p=BASE_FREQS).astype(np.uint8)
        new_cats = rng.integers(0, GAMMA_CATEGORIES, size=new.size).astype(np.uint8)
        seq = np.insert(seq, pos, new)
        cats = np.insert(cats, pos, new_cats)
        n_ins += 1
    return seq, cats, n_ins, n_del


def evolve(root: Node, rng: np.random.Generator) -> tuple[dict[str, np.ndarray], int, int]:
    """Evolve the root genome down the tree in preorder.

    Returns the leaf genomes by item id and the total numbers of insertions and deletions.
    """
    q = hky_matrix()
    rates = gamma_rates(GAMMA_ALPHA, GAMMA_CATEGORIES)
    seq = root_genome(rng)
    cats = rng.integers(0, GAMMA_CATEGORIES, size=seq.size).astype(np.uint8)
    leaves: dict[str, np.ndarray] = {}
    n_ins = n_del = 0
    stack: list[tuple[Node, np.ndarray, np.ndarray]] = [(root, seq, cats)]
    while stack:
        node, seq, cats = stack.pop()
        if node.length > 0:
            seq = substitute(seq, cats, node.length, q, rates, rng)
            seq, cats, ins, dels = indels(seq, cats, node.length, rng)
            n_ins, n_del = n_ins + ins, n_del + dels
        if not node.children:
            leaves[node.item] = seq
        for child in reversed(node.children):
            stack.append((child, seq, cats))
    return leaves, n_ins, n_del


def iter_leaves(node: Node) -> list[Node]:
    """Leaves in left-to-right order."""
    if not node.children:
        return [node]
    return [lf for child in node.children for lf in iter_leaves(child)]


def newick(node: Node) -> str:
    """Newick text of a subtree, leaves labelled by item id."""
    if not node.children:
        return f"{node.item}:{node.length:.5f}"
    inner = ",".join(newick(child) for child in node.children)
    return f"({inner}):{node.length:.5f}" if node.length > 0 else f"({inner})"


def write_fasta(path: Path, item: str, species: str, seq: bytes) -> None:
    """Write one record, wrapped at WRAP columns."""
    lines = [f">{item} {species}"]
    lines += [seq[i : i + WRAP].decode("ascii") for i in range(0, len(seq), WRAP)]
    path.write_text("\n".join(lines) + "\n", encoding="ascii", newline="\n")


def generate(seed: int, out: Path) -> None:
    """Write genomes, truth tree and labels under out."""
    rng = np.random.default_rng(seed)
    tree = true_tree()
    genomes, n_ins, n_del = evolve(tree, rng)
    gdir = out / "genomes"
    gdir.mkdir(parents=True, exist_ok=True)
    for old in gdir.glob("*.fasta"):
        old.unlink()
    rows = ["item\tspecies\tgenus\tclade\tgroup\tstrand\trotation\tlength"]
    for lf in iter_leaves(tree):
        seq = BASES[genomes[lf.item]].tobytes()
        offset = int(rng.integers(len(seq) // 5, 4 * len(seq) // 5)) if lf.rotate else 0
        seq = seq[offset:] + seq[:offset]
        if lf.strand == "-":
            seq = seq.translate(COMPLEMENT)[::-1]
        write_fasta(gdir / f"{lf.item}.fasta", lf.item, lf.species, seq)
        genus = lf.species.split()[0]
        rows.append(
            f"{lf.item}\t{lf.species}\t{genus}\t{lf.clade}\t{lf.group}\t{lf.strand}"
            f"\t{offset}\t{len(seq)}"
        )
    (out / "labels.tsv").write_text("\n".join(rows) + "\n", encoding="utf-8", newline="\n")
    (out / "truth.nwk").write_text(newick(tree) + ";\n", encoding="ascii", newline="\n")
    print(f"{len(genomes)} genomes, {n_ins} insertions, {n_del} deletions -> {out}")


def main() -> None:
    """Command-line entry point."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed")
    parser.add_argument(
        "--out", type=Path, default=Path(__file__).resolve().parent, help="output folder"
    )
    args = parser.parse_args()
    generate(args.seed, args.out)


if __name__ == "__main__":
    main()

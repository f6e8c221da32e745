"""The tree, groups and heatmap commands end to end, on the demo sets and on real genomes."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from Bio import Phylo

from conftest import ADA_GO_RUST_NCD, DATASETS
from kinpress import LocalEngine, cli, distance_matrix, load_items
from kinpress.support import replicate_items, resample_blocks
from kinpress.trees import build_tree, leaf_order, parse_newick, splits

FROGS = DATASETS / "karsvell-frogs"
LOGS = DATASETS / "quendle-logs"
FAST = ["-c", "zstd:level=9", "--no-cache", "--quiet"]


def run(args: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    code = cli.main(args)
    out, err = capsys.readouterr()
    return code, out, err


def test_frog_tree_recovers_the_true_topology(tmp_path: Path) -> None:
    # Ground truth: the generator's own tree (datasets/karsvell-frogs/truth.nwk); two records are
    # reverse-complemented and one rotated, so both strands must be compared.
    out = tmp_path / "frogs.nwk"
    code = cli.main(
        [
            "tree", str(FROGS / "genomes"), "--strand", "both", "--outgroup", "KVM30418",
            "-o", str(out), *FAST,
        ]
    )  # fmt: skip
    assert code == 0
    truth = parse_newick((FROGS / "truth.nwk").read_text())
    assert splits(parse_newick(out.read_text())) == splits(truth)


def test_tree_newick_reads_with_biopython(tmp_path: Path) -> None:
    # reference: Biopython's Newick parser reads what we write
    out = tmp_path / "t.nwk"
    assert (
        cli.main(["tree", str(FROGS / "genomes"), "--strand", "both", "-o", str(out), *FAST]) == 0
    )
    parsed = Phylo.read(io.StringIO(out.read_text()), "newick")
    assert sorted(t.name for t in parsed.get_terminals()) == sorted(
        p.stem for p in (FROGS / "genomes").glob("*.fasta")
    )


def test_tree_from_a_saved_matrix_with_average_linkage(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    phy = tmp_path / "d.phy"
    assert cli.main(["matrix", str(FROGS / "genomes"), "-o", str(phy), *FAST]) == 0
    code, out, _ = run(["tree", "--matrix", str(phy), "--method", "average", "--json"], capsys)
    assert code == 0
    report = json.loads(out)
    assert report["method"] == "average" and report["rooting"] == "by construction"
    assert 0.5 < report["fit"] <= 1.0
    assert sorted(leaf_order(parse_newick(report["newick"]))) == sorted(
        p.stem for p in (FROGS / "genomes").glob("*.fasta")
    )


def test_bootstrap_puts_reproducible_support_on_internal_branches(
    capsys: pytest.CaptureFixture[str],
) -> None:
    args = ["tree", str(FROGS / "genomes"), "--strand", "both", "--outgroup", "KVM30418",
            "--bootstrap", "4", "--seed", "7", *FAST]  # fmt: skip
    code, first, _ = run(args, capsys)
    assert code == 0
    tree = parse_newick(first)
    supports = [n.support for n in _internal(tree)]
    assert supports and all(s is not None and 0 <= s <= 100 for s in supports)
    assert any(s == 100 for s in supports)  # the western/eastern split holds in every replicate
    _, again, _ = run(args, capsys)
    assert again == first


def _internal(tree):  # type: ignore[no-untyped-def]
    from kinpress.trees import preorder

    return [n for n in preorder(tree) if n.children and n is not tree and n.support is not None]


def test_block_resampling_keeps_length_and_draws_whole_blocks() -> None:
    import numpy as np

    data = bytes(range(256)) * 40
    out = resample_blocks(data, 64, np.random.default_rng(3))
    assert len(out) == len(data)
    blocks = {data[k : k + 64] for k in range(0, len(data), 64)}
    assert all(out[k : k + 64] in blocks for k in range(0, len(out) - 64, 64))
    items = load_items([FROGS / "genomes"])
    again = replicate_items(items, 0.05, np.random.default_rng(3))
    assert [len(i.data) for i in again] == [len(i.data) for i in items]
    assert any(a.data != b.data for a, b in zip(items, again, strict=True))


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--matrix", "{phy}", "--bootstrap", "3"], "needs inputs"),
        (["{genomes}", "--outgroup", "KVM3041"], "did you mean KVM30418"),
        (["{genomes}", "--plot", "tree.gif"], "--plot tree.gif"),
        (["{genomes}", "--method", "average", "--outgroup", "KVM30418"], "rooted by construction"),
        ([], "give inputs"),
    ],
)
def test_tree_usage_errors_are_one_line(
    args: list[str], message: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    phy = tmp_path / "d.phy"
    assert cli.main(["matrix", str(FROGS / "genomes"), "-o", str(phy), *FAST]) == 0
    capsys.readouterr()
    filled = [a.format(phy=phy, genomes=FROGS / "genomes") for a in args]
    code, _, err = run(["tree", *filled, *FAST], capsys)
    assert code == 2
    assert message in err and err.count("\n") == 1 and "Traceback" not in err


def test_groups_of_demo_logs_match_their_systems(capsys: pytest.CaptureFixture[str]) -> None:
    # Ground truth: datasets/quendle-logs/labels.tsv (the generator's file-to-system map).
    code, out, _ = run(
        ["groups", str(LOGS / "logs"), "--split", "lines:200", "--k", "4",
         "--labels", str(LOGS / "labels.tsv"), "--json", *FAST],
        capsys,
    )  # fmt: skip
    assert code == 0
    report = json.loads(out)
    assert report["k"] == 4
    assert report["agreement"]["adjusted_rand"] == 1.0
    assert sum(g["size"] for g in report["groups"]) == len(report["items"])
    assert all(any(i["item"] == g["medoid"] and i["medoid"] for i in report["items"])
               for g in report["groups"])  # fmt: skip


def test_groups_tsv_has_item_group_medoid_columns(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "g.tsv"
    code, stdout, _ = run(
        ["groups", str(LOGS / "logs"), "--split", "lines:400", "-o", str(out), *FAST], capsys
    )
    assert code == 0 and stdout == ""
    rows = list(csv.reader(out.open(), delimiter="\t"))
    assert rows[0] == ["item", "group", "medoid", "outlier"]
    groups = {r[1] for r in rows[1:]}
    assert all(sum(r[2] == "yes" for r in rows[1:] if r[1] == g) == 1 for g in groups)


def test_groups_say_what_the_silhouette_and_agreement_scores_mean(
    capsys: pytest.CaptureFixture[str],
) -> None:
    args = ["groups", str(LOGS / "logs"), "--split", "lines:400", "--k", "4",
            "-c", "zstd:level=9", "--no-cache"]  # fmt: skip
    code, _, err = run(args, capsys)
    assert code == 0, err
    assert "mean silhouette" in err
    assert any(line.startswith("kinpress: silhouette: from -1 to 1") for line in err.splitlines())
    assert "adjusted Rand index:" not in err  # no known labels, no agreement to explain
    code, _, err = run([*args, "--labels", str(LOGS / "labels.tsv")], capsys)
    assert code == 0, err
    assert "adjusted Rand index: how the groups agree" in err and "purity: the share" in err


def test_groups_show_a_lone_group_among_files_that_share_nothing(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # 9 real source files (conftest.ADA_GO_RUST_NCD): three Ada files alike, three Go and three
    # Rust files that share nothing with anything. No split leaves two groups; the Ada files
    # are one and the rest outliers (group -1 with --outliers).
    names = ["a1.adb", "a2.adb", "a3.adb", "g1.go", "g2.go", "g3.go", "r1.rs", "r2.rs", "r3.rs"]
    rows = ADA_GO_RUST_NCD
    matrix = tmp_path / "m.tsv"
    matrix.write_text(
        "\t".join(["", *names])
        + "\n"
        + "".join("\t".join([n, *map(str, r)]) + "\n" for n, r in zip(names, rows, strict=True))
    )
    code, out, err = run(["groups", "--matrix", str(matrix), "--outliers"], capsys)
    assert code == 0, err
    groups = dict(line.split("\t")[:2] for line in out.splitlines()[1:])
    assert groups == {n: "0" if n.endswith(".adb") else "-1" for n in names}
    assert "groups: 1 by density; no silhouette (one group); 6 outliers reported" in err
    code, out, err = run(["groups", "--matrix", str(matrix)], capsys)
    assert {line.split("\t")[1] for line in out.splitlines()[1:]} == {"0"}
    assert "6 outliers joined their nearest group" in err


def test_groups_refuse_k_and_cut_together(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run(["groups", str(LOGS / "logs"), "--k", "2", "--cut", "0.5", *FAST], capsys)
    assert code == 2 and "not both" in err


def test_matrix_plot_draws_a_heatmap_and_refuses_unknown_formats(tmp_path: Path) -> None:
    png = tmp_path / "heat.png"
    assert cli.main(["matrix", str(FROGS / "genomes"), "-o", str(tmp_path / "d.tsv"),
                     "--plot", str(png), *FAST]) == 0  # fmt: skip
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert cli.main(["matrix", str(FROGS / "genomes"), "--plot", str(tmp_path / "x.bmp"),
                     *FAST]) == 2  # fmt: skip
    assert not (tmp_path / "x.bmp").exists()


def _orders(root: Path) -> tuple[dict[str, str], dict[str, str]]:
    with open(root / "labels.tsv", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    return (
        {r["file"].removesuffix(".fa"): r["order"] for r in rows},
        {r["file"].removesuffix(".fa"): r["class"] for r in rows},
    )


@pytest.mark.shared
def test_real_mitogenome_tree_keeps_mammalian_orders_together(shared_data: Path) -> None:
    # Taxonomy: NCBI Taxonomy orders and classes, as given in the dataset's labels.tsv; accepted
    # facts (textbook vertebrate phylogeny): orders are clades, placental mammals (Eutheria) are a
    # clade apart from the opossum, and mammals a clade apart from the chicken when the zebrafish
    # roots the tree.
    root = shared_data / "genomes" / "mitogenomes"
    order, klass = _orders(root)
    items = load_items(sorted(root.glob("*.fa")))
    dm = distance_matrix(items, "zstd:level=19", strand="both", engine=LocalEngine(2))
    tree = build_tree(dm.labels, dm.distances, method="nj", outgroup="danio_rerio")
    found = splits(tree)
    leaves = frozenset(dm.labels)

    def clade(members: set[str]) -> bool:
        return frozenset(members) in found or leaves - members in found

    members: dict[str, set[str]] = {}
    for name, o in order.items():
        members.setdefault(o, set()).add(name)
    for o in ("Primates", "Carnivora", "Lagomorpha", "Artiodactyla"):
        assert clade(members[o]), o
    eutheria = {n for n, c in klass.items() if c == "Mammalia"} - {"didelphis_virginiana"}
    assert clade(eutheria)
    assert clade({n for n, c in klass.items() if c == "Mammalia"})


@pytest.mark.shared
@pytest.mark.xfail(
    strict=True,
    reason="measured: no compressor tried (zstd 15-22, lzma 6/9, brotli 9/11, ppmd 8-48, bz2, "
    "zlib; concat and primed; NJ and UPGMA; NCD, Li et al. 2001's sum distance, CDM; with and "
    "without -log(1-d); purine/pyrimidine recoding; an order-2..20 DNA context-mixing model) "
    "recovers Chiroptera and Rodentia together from these 19 whole mitogenomes, but for a few "
    "purine/pyrimidine-recoded zstd 19-22 runs in which the mouse is still nearer cattle than "
    "the squirrel: by chance, not signal. Rodentia is a known hard "
    "case (dataset notes; Graur, Hide & Li 1991, recalled from memory)",
)
@pytest.mark.parametrize("order", ["Chiroptera", "Rodentia"])
def test_real_mitogenome_tree_keeps_bats_and_rodents_together(
    shared_data: Path, order: str
) -> None:
    # Taxonomy as above (NCBI Taxonomy via labels.tsv). Strict: passing would mean a change
    # fixed a known failure, and this marker must then go.
    root = shared_data / "genomes" / "mitogenomes"
    orders, _ = _orders(root)
    dm = distance_matrix(load_items(sorted(root.glob("*.fa"))), "zstd:level=19", strand="both")
    tree = build_tree(dm.labels, dm.distances, method="nj", outgroup="danio_rerio")
    members = frozenset(n for n, o in orders.items() if o == order)
    assert members in splits(tree) or frozenset(dm.labels) - members in splits(tree)


@pytest.mark.shared
def test_real_mitogenome_tree_with_the_calibrated_compressor_keeps_bats_together(
    shared_data: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Taxonomy as above (NCBI Taxonomy via labels.tsv). The default compressor is the one
    # calibration chooses for these genomes; with it five of the six orders with two or more
    # species are clades (Rodentia, the known hard case, is not).
    # The folder as the issue's own example gives it: its labels.tsv is left out, with a warning.
    root = shared_data / "genomes" / "mitogenomes"
    out = tmp_path / "tree.nwk"
    code = cli.main(["tree", str(root), "--strand", "both", "--outgroup", "danio_rerio",
                     "-o", str(out), "--cache", str(tmp_path / "c.sqlite")])  # fmt: skip
    assert code == 0
    err = capsys.readouterr().err
    assert "auto: chose" in err and "left out 1 file(s)" in err and "(labels.tsv)" in err
    orders, _ = _orders(root)
    tree = parse_newick(out.read_text())
    found, leaves = splits(tree), frozenset(leaf_order(tree))
    for order in ("Primates", "Carnivora", "Lagomorpha", "Artiodactyla", "Chiroptera"):
        members = frozenset(n for n, o in orders.items() if o == order)
        assert members in found or leaves - members in found, order


def test_bootstrap_reports_progress_through_the_one_progress_signature() -> None:
    from conftest import random_bytes
    from kinpress import Item, compressor
    from kinpress.support import bootstrap_support

    base = random_bytes(4000, seed=1)
    items = [Item(f"x{k}", base[k * 100 :] + random_bytes(500, seed=k), "test") for k in range(4)]
    dm = distance_matrix(items, "zlib:level=1")
    calls: list[tuple[str, int, int]] = []
    bootstrap_support(
        build_tree(dm.labels, dm.distances), items, compressor("zlib:level=1"),
        replicates=2, progress=lambda phase, done, total: calls.append((phase, done, total)),
    )  # fmt: skip
    assert calls == [("replicates", 1, 2), ("replicates", 2, 2)]

"""Records deposited on the other strand, found by shared k-mers (kinpress.strands) and warned of
on the command line under --strand one."""

from __future__ import annotations

import csv
import warnings
from pathlib import Path

import numpy as np
import pytest

from conftest import DATASETS
from kinpress import cli
from kinpress.items import Item, load_items, reverse_complement
from kinpress.measure import MeasurementWarning
from kinpress.strands import check_strands, kmer_sample, warn_flipped_strands

FROGS = DATASETS / "karsvell-frogs"
GENOMES = FROGS / "genomes"


def _reverse_records() -> set[str]:
    """The records the demo set's own table marks strand '-' (its README: KVM32815, KVM35261)."""
    with open(FROGS / "labels.tsv", newline="") as handle:
        return {
            row["item"] for row in csv.DictReader(handle, delimiter="\t") if row["strand"] == "-"
        }


def test_the_two_reverse_strand_frogs_are_named_and_no_other() -> None:
    reverse = _reverse_records()
    assert reverse == {"KVM32815", "KVM35261"}
    items = load_items([str(GENOMES)])
    with pytest.warns(MeasurementWarning, match="--strand both") as caught:
        check = warn_flipped_strands(items)
    assert set(check.flipped) == reverse
    assert all(name in str(caught[0].message) for name in reverse)
    assert check.pairs_checked == len(items) * (len(items) - 1) // 2
    assert all({p.first, p.second} & reverse for p in check.pairs)
    assert all(p.share_reversed > 4 * p.share_as_given for p in check.pairs)


def test_the_forward_records_alone_give_no_warning() -> None:
    items = [i for i in load_items([str(GENOMES)]) if i.name not in _reverse_records()]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check = warn_flipped_strands(items)
    assert check.flipped == () and check.pairs == ()


def test_turning_the_reverse_records_back_clears_the_check() -> None:
    reverse = _reverse_records()
    items = [
        Item(i.name, reverse_complement(i.data), i.source, nucleotide=True) if i.name in reverse
        else i
        for i in load_items([str(GENOMES)])
    ]  # fmt: skip
    assert check_strands(items).flipped == ()


def _random_dna(rng: np.random.Generator, n: int) -> bytes:
    return np.frombuffer(b"ACGT", dtype=np.uint8)[rng.integers(0, 4, n)].tobytes()


def test_unrelated_random_dna_is_not_named() -> None:
    rng = np.random.default_rng(3)
    items = [Item(f"r{k}", _random_dna(rng, 20_000), "", nucleotide=True) for k in range(6)]
    check = check_strands(items)
    assert check.flipped == () and check.pairs_checked == 15


def test_kmer_sample_skips_windows_with_other_letters_and_keeps_the_same_kmers_everywhere() -> None:
    assert len(kmer_sample(b"ACGTNACGTACG", k=12)) == 0  # the only window holds an N
    sequence = _random_dna(np.random.default_rng(1), 5000)
    whole, part = kmer_sample(sequence), kmer_sample(sequence[1000:3000])
    assert set(part.tolist()) <= set(whole.tolist())
    # About one in four distinct 12-mers is kept (4,989 windows, nearly all distinct in 4^12).
    assert 0.15 < len(whole) / 4989 < 0.35


def test_matrix_under_strand_one_warns_and_under_both_does_not(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    common = ["matrix", str(GENOMES), "-c", "zstd:level=1", "--no-cache"]
    assert cli.main([*common, "-o", str(tmp_path / "one.tsv")]) == 0
    err = capsys.readouterr().err
    assert "KVM32815, KVM35261" in err and "--strand both" in err
    assert cli.main([*common, "--strand", "both", "-o", str(tmp_path / "both.tsv")]) == 0
    assert "--strand both" not in capsys.readouterr().err


def test_sparse_sampling_names_only_the_reversed_records() -> None:
    # 60 relatives of one random genome (5 % of bases substituted each), two of them reversed:
    # 100 sampled pairs of 1,770 give most records one or two comparisons, so the forward record
    # of a flipped pair must be told from its reversed partner by the extra probes.
    rng = np.random.default_rng(11)
    root = np.frombuffer(_random_dna(rng, 6000), dtype=np.uint8)
    items = []
    for k in range(60):
        copy = root.copy()
        where = rng.random(len(copy)) < 0.05
        copy[where] = np.frombuffer(b"ACGT", dtype=np.uint8)[rng.integers(0, 4, where.sum())]
        data = copy.tobytes()
        items.append(Item(f"r{k}", reverse_complement(data) if k in (7, 41) else data, "",
                          nucleotide=True))  # fmt: skip
    check = check_strands(items, pairs=100)
    assert check.flipped == ("r7", "r41")
    assert check.pairs_checked < 300

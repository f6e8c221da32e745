"""Classification by origin: both decision rules, abstention, evaluation, scikit-learn use, and
checks on real logs and real code from the open datasets."""

from __future__ import annotations

import dataclasses
import gzip
import hashlib
import json
import math
import random
import re
import shutil
import subprocess
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy.stats import binomtest, fisher_exact
from sklearn.base import clone
from sklearn.model_selection import cross_val_score
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import FunctionTransformer
from sklearn.utils.estimator_checks import (
    check_get_params_invariance,
    check_no_attributes_set_in_init,
    check_parameters_default_constructible,
    check_set_params,
)

from conftest import held_out_decision_scores, origin_items, origin_text
from kinpress import (
    InputError,
    InputWarning,
    Item,
    MeasurementWarning,
    SizeCache,
    compressor,
    load_items,
    pairwise_distances,
)
from kinpress import distance_matrix as matrix_of
from kinpress.calibration import choose_for_job
from kinpress.calibration.job import MEASURED_FOLDS, TIE_ITEMS, TaskFigures, _pick_labelled
from kinpress.items import reference_items
from kinpress.origins import (
    DECIDERS,
    DEFAULT_SIGNIFICANCE,
    MIX,
    TESTS,
    CompressionClassifier,
    Conformity,
    FoldScores,
    Mix,
    _statistics,
    classify,
    conformal_p_values,
    corpus_bytes,
    evaluate,
    fold_report,
    group_unknowns,
    novelty_aucs,
    novelty_detection,
    reference_folds,
    stacked,
)
from kinpress.origins.conformal import _abstention, combined
from kinpress.origins.unknowns import UnknownGroup, UnknownGroups, pair_allowance
from kinpress.origins.views import shaped_items

SHARED_DATA = Path(__file__).resolve().parents[2] / "shared" / "datasets-real"


@pytest.fixture(scope="module")
def cache(tmp_path_factory: pytest.TempPathFactory) -> Iterator[SizeCache]:
    """One size cache for the module: reruns on overlapping references compute only what is new."""
    with SizeCache(tmp_path_factory.mktemp("origins") / "sizes.sqlite") as store:
        yield store


@pytest.fixture(scope="module")
def shared() -> Path:
    if not SHARED_DATA.is_dir():
        pytest.skip(f"open datasets not found at {SHARED_DATA} (outside the repository)")
    return SHARED_DATA


# -- the reference and the corpus --------------------------------------------------------------


def test_reference_items_are_labelled_by_their_subfolder(tmp_path: Path) -> None:
    for origin in ("alpha", "beta"):
        (tmp_path / origin).mkdir()
        (tmp_path / origin / "app.log").write_text(origin_text(len(origin), 1))
    (tmp_path / "notes.txt").write_text("not an origin")
    with pytest.warns(InputWarning, match="not in an origin subfolder"):
        items = reference_items(tmp_path)
    assert [(i.name, i.label) for i in items] == [
        ("alpha/app.log", "alpha"),
        ("beta/app.log", "beta"),
    ]


def test_reference_items_split_chunks_keep_the_origin(tmp_path: Path) -> None:
    (tmp_path / "x").mkdir()
    (tmp_path / "x" / "a.log").write_text(origin_text(1, 1, lines=30))
    items = reference_items(tmp_path, split="lines:10")
    assert [i.name for i in items] == ["x/a.log#1", "x/a.log#2", "x/a.log#3"]
    assert {i.label for i in items} == {"x"}


def test_reference_folder_without_origins_is_refused(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no origin subfolders"):
        reference_items(tmp_path)


def test_corpus_keeps_every_item_when_cut_to_the_budget() -> None:
    # Water-filling: the short item stays whole, the long ones share what is left equally.
    datas = [b"a" * 10, b"b" * 100, b"c" * 100]
    assert corpus_bytes(datas, None) == b"".join(datas)
    assert corpus_bytes(datas, 1000) == b"".join(datas)
    assert corpus_bytes(datas, 70) == b"a" * 10 + b"b" * 30 + b"c" * 30


def test_conditional_score_is_the_size_ratio_given_the_corpus(cache: SizeCache) -> None:
    # score(x, origin) = C(x | corpus) / C(x), by concatenation C(corpus x) - C(corpus); checked
    # against the standard library's raw deflate through the zlib adapter directly.
    reference = origin_items(range(2), range(3))
    unknown = [Item("u", origin_text(0, 9).encode(), "generated")]
    result = classify(unknown, reference, "zlib:level=9", conditional="concat", threshold=1.0)
    comp = compressor("zlib:level=9")
    x = unknown[0].data
    for column, origin in enumerate(result.origins):
        corpus = b"".join(i.data for i in reference if i.label == origin)
        expected = (comp.size(corpus + x) - comp.size(corpus)) / comp.size(x)
        assert result.scores[0, column] == pytest.approx(expected)
    assert result.predictions[0].best == "o0"


def test_a_corpus_beyond_the_window_is_cut_with_a_warning() -> None:
    reference = origin_items(range(2), range(30))  # about 30 KB per origin, deflate sees 32 KiB
    unknown = [Item("u", origin_text(1, 99, lines=200).encode(), "generated")]
    with pytest.warns(MeasurementWarning, match="to fit the compressor's window"):
        result = classify(unknown, reference, "zlib:level=9", threshold=math.inf)
    assert result.predictions[0].best == "o1"


def test_corpora_cut_to_the_window_are_named_once() -> None:
    # Every origin's corpus is cut, in the content and in the shape view: one line says so
    # under Python's default filter (as the command line shows warnings), not one per origin
    # and view (24 origins gave 48 lines).
    forms = ("{n:03d} {w}", "[{n}] <{w}> ({n:x})", "{w}={n}; {w}")

    def written(origin: int, seed: int) -> bytes:  # each origin's lines in a form of its own
        rows = origin_text(origin, seed).splitlines()
        return "".join(
            forms[origin].format(n=k + seed, w=r[4:]) + "\n" for k, r in enumerate(rows)
        ).encode()

    reference = [
        Item(f"r{o}-{s}", written(o, s), "generated", label=f"o{o}")
        for o in range(3)
        for s in range(30)
    ]
    unknown = [Item("u", written(1, 99), "generated")]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("default")
        result = classify(unknown, reference, "zlib:level=9")
    said = [str(w.message) for w in caught if "compressor's window" in str(w.message)]
    assert result.scoring.uses_shape
    assert len(said) == 1, said
    assert said[0].startswith("the corpora of 3 of 3 origins (o0, o1, o2) were cut to at most")


# -- both decision rules, abstention and evaluation ---------------------------------------------


@pytest.mark.parametrize("method", ["conditional", "knn"])
def test_known_origins_are_found_and_a_new_origin_is_refused(method: str, cache: SizeCache) -> None:
    reference = origin_items(range(3), range(8))
    known = origin_items(range(3), range(10, 12), prefix="k")
    stranger = origin_items(range(7, 8), range(10, 12), prefix="s")
    result = classify([*known, *stranger], reference, method=method, cache=cache)
    assert [p.predicted for p in result.predictions] == [i.label for i in known] + [None, None]
    assert [p.decision for p in result.predictions] == ["named"] * len(known) + ["unknown"] * 2
    assert result.abstention.significance == 0.05
    assert result.abstention.calibration_scores == 24
    assert result.counts() == {"named": 6, "ambiguous": 0, "unknown": 2}
    for p in result.predictions[: len(known)]:
        assert p.confidence > 0
        assert p.nearest.startswith("r" + str(p.predicted).removeprefix("o"))
        assert 0 <= p.distance < 1
        assert p.credibility is not None and p.credibility > 0.05


def test_json_rows_have_the_documented_keys(cache: SizeCache) -> None:
    reference = origin_items(range(2), range(10))
    result = classify(origin_items(range(1), range(15, 16), "k"), reference, cache=cache)
    [row] = result.as_json()
    p = result.predictions[0]
    assert row == {
        "item": "k0-15",
        "predicted": "o0",
        "decision": "named",
        "candidates": ["o0"],
        "best": "o0",
        "confidence": p.confidence,
        "credibility": p.credibility,
        "nearest": p.nearest,
        "distance": p.distance,
        "scores": {"o0": result.scores[0, 0], "o1": result.scores[0, 1]},
        "p_values": {"o0": result.p_values[0, 0], "o1": result.p_values[0, 1]},  # type: ignore[index]
        "beyond_rate": False,
        "path": "generated",
        # reference: hashlib's BLAKE2b (RFC 7693) at 16 bytes, the digest the cache keys on
        "hash": hashlib.blake2b(origin_text(0, 15).encode(), digest_size=16).hexdigest(),
    }
    assert json.loads(json.dumps(row)) == row


def test_json_says_unknown_and_ambiguous_in_words_never_null(
    cache: SizeCache, tmp_path: Path
) -> None:
    reference = origin_items(range(3), range(8))
    stranger = tmp_path / "stranger.log"
    stranger.write_text(origin_text(7, 10))
    # A cut no score reaches leaves every item unknown; one every score reaches, ambiguous.
    strict = classify(load_items([stranger]), reference, threshold=0.0, cache=cache)
    [row] = strict.as_json()
    assert row["decision"] == "unknown" and row["predicted"] == "unknown"
    assert row["path"] == str(stranger) and row["candidates"] == []
    # reference: GNU coreutils b2sum -l 128 (BLAKE2b-128 of the file's bytes), where installed
    b2sum = shutil.which("b2sum")
    if b2sum is not None:
        printed = subprocess.run([b2sum, "-l", "128", str(stranger)], capture_output=True,
                                 text=True, check=True).stdout  # fmt: skip
        assert row["hash"] == printed.split()[0]
    loose = classify(load_items([stranger]), reference, threshold=math.inf, cache=cache)
    [row] = loose.as_json()
    assert row["decision"] == "ambiguous" and row["predicted"] == "ambiguous"
    assert sorted(row["candidates"]) == ["o0", "o1", "o2"]
    # Without a runner-up the confidence is infinite: null in JSON, which has no Infinity.
    alone = dataclasses.replace(loose.predictions[0], confidence=math.inf).as_json()
    assert alone["confidence"] is None
    json.dumps(alone, allow_nan=False)


def test_k2_with_nearer_neighbour_ties_equals_1nn(cache: SizeCache) -> None:
    # Jiang et al. 2023 used k = 2 and counted a tie as a hit if either neighbour was right
    # (K. Schutte's July 2023 note, as summarised in compressor-facts.md section 6). Breaking
    # the tie by the nearer neighbour makes k = 2 predict what 1-NN predicts.
    reference = origin_items(range(3), range(3))
    unknowns = origin_items(range(3), range(20, 24), prefix="k")
    one = classify(unknowns, reference, "zlib:level=9", method="knn", k=1, threshold=math.inf)
    two = classify(unknowns, reference, "zlib:level=9", method="knn", k=2, threshold=math.inf)
    assert [p.best for p in two.predictions] == [p.best for p in one.predictions]


def test_folds_are_contiguous_blocks_of_each_origin_in_reference_order() -> None:
    codes = np.array([0] * 10 + [1] * 3 + [0] * 0)
    assert reference_folds(codes, 5).tolist() == [0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 0, 1, 2]
    with pytest.raises(ValueError, match="blocks"):
        reference_folds(codes, 1)


def test_conformal_p_value_counts_calibration_scores_at_least_as_strange() -> None:
    # p = (1 + #{calibration >= alpha}) / (n + 1) (Vovk, Gammerman & Shafer 2005, ch. 2), worked
    # by hand: 4 scores, 0.25 has 2 at least as large: p = 3 / 5; 0.45 has none: 1 / 5.
    p = conformal_p_values(np.array([0.1, 0.2, 0.3, 0.4]), np.array([0.25, 0.45]))
    assert p.tolist() == [3 / 5, 1 / 5]


def test_fit_runs_from_a_typical_own_item_to_a_typical_stranger() -> None:
    # Held-out scores of two origins (rows: items, columns: origins; lower is better).
    held = np.array([[0.3, 0.9], [0.5, 0.8], [0.9, 0.4], [1.0, 0.6]])
    codes = np.array([0, 0, 1, 1])
    conformity = Conformity.of(held, codes, ("a", "b"), 0.05)
    # origin a: own items' median 0.4, strangers' median 0.95; origin b: 0.5 and 0.85
    assert conformity.centre.tolist() == pytest.approx([0.4, 0.5])
    assert conformity.scale.tolist() == pytest.approx([0.55, 0.35])
    found = _statistics(np.array([[0.4, 0.85]]), conformity.centre, conformity.scale,
                        np.array([0]))  # fmt: skip
    assert found["fit"][0] == pytest.approx(0.0)  # typical of a
    # separation from b, in a's scale
    assert -found["separation"][0] == pytest.approx((0.85 - 0.4) / 0.55)
    # contrast: fit less the lead over the typical other origin (b alone here), in a's scale
    assert found["contrast"][0] == pytest.approx(0.0 - (0.85 - 0.4) / 0.55)


def test_an_origin_with_enough_held_out_items_gets_p_values_of_its_own() -> None:
    # 39 held-out items give an origin p-values down to 1/40, half of 0.05: label-conditional
    # (Mondrian conformal prediction, Vovk et al. 2005, ch. 4.5); 2 items do not: pooled.
    rng = np.random.default_rng(3)
    own = np.concatenate([rng.uniform(0.3, 0.5, 39), [0.2, 0.3]])
    held = np.column_stack([np.where(np.arange(41) < 39, own, 0.95),
                            np.where(np.arange(41) < 39, 0.95, own)])  # fmt: skip
    codes = np.array([0] * 39 + [1, 1])
    conformity = Conformity.of(held, codes, ("many", "few"), 0.05)
    assert conformity.label_conditional.tolist() == [True, False]
    fit_p, best, _ = conformity.p_values(np.array([[2.0, 0.96], [0.96, 2.0]]))
    assert best.tolist() == [1, 0]
    assert fit_p[1, 0] == pytest.approx(1 / 40)  # stranger than all 39 of its own
    assert fit_p[0, 1] == pytest.approx(1 / 42)  # pooled over all 41


@pytest.mark.parametrize("test", DECIDERS)
@pytest.mark.parametrize("significance", [0.05, 0.1, 0.2])
def test_known_items_are_refused_at_the_significance_within_sampling_error(
    significance: float, test: str
) -> None:
    # The conformal guarantee (Vovk, Gammerman & Shafer 2005, "Algorithmic Learning in a Random
    # World", theorem 2.2 and ch. 4.5 for the label-conditional form): when a new item's
    # statistic is exchangeable with the calibration items', P(p <= eps) <= eps, and close to
    # eps when ties are rare. Synthetic known answer: 3 origins whose own score is drawn from a
    # different distribution each (a tight, a middling and a spread-out origin), foreign scores
    # near 1; every deciding statistic, whichever the reference would choose. The mix is learnt
    # on the very held-out items it is then calibrated on, so its rate is checked here too.
    rng = np.random.default_rng(2005)
    spreads = np.array([0.02, 0.08, 0.2])

    def draw(n: int) -> tuple[np.ndarray, np.ndarray]:
        codes = rng.integers(0, 3, n)
        scores = rng.normal(0.97, 0.02, (n, 3))
        scores[np.arange(n), codes] = rng.normal(0.5, spreads[codes])
        return scores, codes

    refused, trials = 0, 0
    for _ in range(400):
        cal_scores, cal_codes = draw(30)
        conformity = Conformity.of(cal_scores, cal_codes, ("a", "b", "c"), significance, test)
        new_scores, _ = draw(20)
        _, _, test_p = conformity.p_values(new_scores)
        refused += int(np.sum(test_p <= significance))
        trials += 20
    rate = refused / trials
    error = 3 * math.sqrt(significance * (1 - significance) / trials)
    # Discrete p-values make the rate floor(eps (n + 1)) / (n + 1), just below eps.
    assert significance - 0.035 - error <= rate <= significance + error, rate


def _twin_scores(rng: np.random.Generator, codes: np.ndarray, origins: int) -> np.ndarray:
    """Synthetic scores (lower is better) with a known answer: origins come in kindred pairs
    (0 and 1, 2 and 3, ...); an origin explains its own items well (about 0.6), its twin's
    moderately (0.72) and the rest not at all (0.95)."""
    n = len(codes)
    scores = rng.normal(0.95, 0.02, (n, origins))
    twin = codes ^ 1
    present = twin < origins
    scores[np.flatnonzero(present), twin[present]] = rng.normal(0.72, 0.06, int(present.sum()))
    own = codes < origins
    scores[np.flatnonzero(own), codes[own]] = rng.normal(0.6, 0.06, int(own.sum()))
    return scores


def test_the_mix_only_adds_the_tests_up_and_is_chosen_when_it_refuses_more() -> None:
    # Twins: an origin missing from the reference whose kindred twin is in it has no origin
    # close behind the twin, so a free logistic regression learns to count a large separation
    # as strange (a negative weight on -separation, pulling against fit and contrast, which is
    # fit less the lead). The mix keeps only weights of 0 or more: each statistic is larger
    # for a stranger, and a mix that reverses one followed noise on real code. The reference
    # then takes the mix only when its honest held-out share (each origin's items refused by a
    # mix learnt without them) beats every single test's by more than MIX_MARGIN_ITEMS of the
    # strangers (on these scores it never does: at most one item ahead); then the rule alone.
    from kinpress.origins.conformal import MIX_MARGIN_ITEMS, _choose_test, _logistic, _rounds

    chosen = set()
    for scores, origins in ((_twin_scores, 7), (_kindred_scores, 5)):
        for seed in range(3):
            rng = np.random.default_rng(seed)
            codes = np.repeat(np.arange(origins), 30)
            held = scores(rng, codes, origins)
            rounds = _rounds(held, codes)
            mix = Mix.learn(rounds)
            assert mix is not None and (mix.weights >= 0).all() and mix.weights.any()
            if scores is _twin_scores:
                x = np.vstack([r.known for r in rounds] + [r.strangers for r in rounds])
                y = np.repeat([0.0, 1.0], [sum(len(r.known) for r in rounds), len(x)
                                           - sum(len(r.known) for r in rounds)])  # fmt: skip
                free, _ = _logistic((x - x.mean(axis=0)) / x.std(axis=0), y)
                dropped = free < 0
                assert dropped.any() and (mix.weights[dropped] == 0).all(), free
            detection = novelty_detection(held, codes, 0.05)
            conformity = Conformity.of(held, codes, tuple("abcdefg")[:origins], 0.05)
            singles = max(detection[t] for t in TESTS)
            margin = MIX_MARGIN_ITEMS / sum(len(r.strangers) for r in rounds)
            assert (conformity.test == MIX) == (detection[MIX] > singles + margin), detection
            assert (conformity.mix is not None) == (conformity.test == MIX)
            chosen.add(conformity.test == MIX)
    assert chosen == {False}
    # 60 strangers: the mix ahead of the best single test by 2 of them is not taken, by 3 is;
    # among single tests, separation on ties, then fit.
    tests = {"fit": 0.9, "separation": 0.9, "contrast": 0.5}
    assert _choose_test({**tests, MIX: 0.9 + MIX_MARGIN_ITEMS / 60}, 60) == "separation"
    assert _choose_test({**tests, "separation": 0.8, MIX: 0.9}, 60) == "fit"
    assert _choose_test({**tests, MIX: 0.9 + (MIX_MARGIN_ITEMS + 1) / 60}, 60) == MIX
    assert _choose_test({**tests, "contrast": 0.95, MIX: 0.96}, 60) == "contrast"


def test_the_mix_is_the_logistic_regression_scikit_learn_fits() -> None:
    # Reference library: scikit-learn's LogisticRegression(class_weight="balanced") with its
    # default L2 penalty (C=1, the intercept unpenalised) minimises the same loss the mix's own
    # Newton steps do; the weights agree to the solvers' tolerance.
    from sklearn.linear_model import LogisticRegression

    from kinpress.origins.conformal import _logistic

    rng = np.random.default_rng(7)
    for n, positives in ((60, 0.5), (900, 0.1)):
        x = rng.normal(size=(n, 6))
        y = x @ rng.normal(size=6) + rng.normal(0, 2, n) > np.quantile(x[:, 0], 1 - positives)
        weights, offset = _logistic(x, y.astype(float))
        fitted = LogisticRegression(class_weight="balanced", max_iter=10_000, tol=1e-10)
        fitted.fit(x, y)
        assert weights == pytest.approx(fitted.coef_[0], abs=1e-5)
        assert offset == pytest.approx(fitted.intercept_[0], abs=1e-5)


def test_a_forced_deciding_statistic_is_used_and_an_unknown_one_refused() -> None:
    rng = np.random.default_rng(3)
    codes = np.repeat(np.arange(4), 12)
    held = _twin_scores(rng, codes, 4)
    for test in DECIDERS:
        conformity = Conformity.of(held, codes, tuple("abcd"), 0.1, test)
        assert conformity.test == test and conformity.detection == ()
        assert (conformity.mix is not None) == (test == MIX)
    with pytest.raises(ValueError, match="unknown test 'best'"):
        Conformity.of(held, codes, tuple("abcd"), 0.1, "best")
    # strangers that every statistic finds more typical than known items: no weight above 0
    # would tell them, so there is no mix
    from kinpress.origins.conformal import _Round

    backwards = [_Round(rng.normal(size=(50, 3)), rng.normal(size=(20, 3)) - 3) for _ in range(3)]
    assert Mix.learn(backwards) is None


def test_a_given_threshold_replaces_the_p_values(cache: SizeCache) -> None:
    reference = origin_items(range(3), range(8))
    unknowns = [*origin_items(range(2), range(10, 12), "k"), *origin_items(range(9, 10), [1], "s")]
    derived = classify(unknowns, reference, cache=cache)
    assert derived.abstention.threshold is None and derived.p_values is not None
    strict = classify(unknowns, reference, threshold=0.0, cache=cache)
    assert strict.abstention.as_json()["significance"] is None and strict.p_values is None
    assert all(p.decision == "unknown" for p in strict.predictions)
    never = classify(unknowns, reference, threshold=math.inf, cache=cache)
    assert all(p.decision != "unknown" for p in never.predictions)
    with pytest.raises(ValueError, match="not both"):
        classify(unknowns, reference, threshold=0.5, significance=0.05, cache=cache)


def test_too_few_reference_items_for_the_rate_warn_with_the_smallest_rate(
    cache: SizeCache,
) -> None:
    reference = origin_items(range(2), range(4))  # 8 held-out items: p never below 1/9
    with pytest.warns(MeasurementWarning, match="no smaller than 0.111"):
        result = classify(origin_items(range(1), [5], "k"), reference, cache=cache)
    assert "smallest possible is 0.111" in result.abstention.guarantee
    assert result.predictions[0].decision != "unknown"


def test_calibration_needs_two_items_per_origin() -> None:
    reference = origin_items(range(2), range(1))
    with pytest.raises(InputError, match="two reference items per origin"):
        classify(origin_items(range(1), [5], "k"), reference)
    given = classify(origin_items(range(1), [5], "k"), reference, threshold=math.inf)
    assert given.predictions[0].best == "o0"


@pytest.mark.parametrize("method", ["conditional", "knn"])
def test_evaluate_reports_accuracy_refusals_and_missing_origins(
    method: str, cache: SizeCache
) -> None:
    # 36 items in 5 folds: each fold's p-values come from about 29 others, down to 1/30.
    reference = origin_items(range(3), range(12))
    result = evaluate(reference, method=method, cache=cache)
    assert result.origins == ("o0", "o1", "o2")
    assert result.confusion.shape == (3, 5)
    assert result.confusion.sum() == 36
    assert result.accuracy == pytest.approx(np.trace(result.confusion[:, :3]) / 36)
    assert result.refusal_rate == pytest.approx(result.confusion[:, 4].sum() / 36)
    assert result.ambiguous_rate == pytest.approx(result.confusion[:, 3].sum() / 36)
    assert result.accuracy >= 0.8
    assert len(result.left_out_unknown) == 3
    assert result.left_out_unknown_rate >= 0.8  # unrelated vocabularies: a missing one is refused
    assert set(result.as_json()) >= {"accuracy", "refusal_rate", "left_out_unknown_rate"}


def test_fold_report_counts_decisions_of_known_scores() -> None:
    # Three origins, four items each in two folds, scores by hand: own 0.3, foreign 0.9, and one
    # item of origin 2 that its own origin explains no better than the others.
    codes = np.repeat(np.arange(3), 4)
    scores = np.full((12, 3), 0.9)
    scores[np.arange(12), codes] = 0.3
    scores[11] = [0.9, 0.9, 0.9]
    folds = FoldScores(("a", "b", "c"), codes, np.tile([0, 0, 1, 1], 3), scores)
    report = fold_report(folds, significance=0.2)
    assert report.items == 12
    assert report.confusion[:, :3].trace() == 11
    assert report.confusion[2, 4] == 1  # refused: stranger than every calibration item
    # Missing a or b, the calibration holds c's strange item, as strange as a missing origin's
    # items (alpha 0.9 - 0.45 either way): a tie, p = 2/9 > 0.2, accepted. Missing c, refused.
    assert report.left_out_unknown == (0.0, 0.0, 1.0)


def test_unknown_method_and_bad_k_are_refused() -> None:
    reference = origin_items(range(2), range(2))
    with pytest.raises(ValueError, match="unknown method"):
        classify(reference[:1], reference, method="vote")
    with pytest.raises(ValueError, match="k must be between"):
        classify(reference[:1], reference, method="knn", k=9, threshold=1.0)
    with pytest.raises(ValueError, match="significance must lie"):
        classify(reference[:1], reference, significance=1.5)


# -- scikit-learn -------------------------------------------------------------------------------


def test_pairwise_distances_agree_with_distance_matrix(cache: SizeCache) -> None:
    texts = [origin_text(o, s) for o in range(2) for s in range(3)]
    square = pairwise_distances(texts, compressor="zstd:level=9", cache=cache)
    items = [Item(f"x{k}", t.encode(), "t") for k, t in enumerate(texts)]
    reference = matrix_of(items, "zstd:level=9", cache=cache).distances
    assert np.array_equal(square, reference)
    assert np.array_equal(square, square.T) and np.all(np.diag(square) == 0)
    block = pairwise_distances(texts[:2], texts[2:], compressor="zstd:level=9", cache=cache)
    assert block.shape == (2, 4)
    assert np.allclose(block, reference[:2, 2:])
    assert np.all(block >= 0)


def test_pairwise_distances_feed_kneighbors_with_a_precomputed_metric() -> None:
    # scikit-learn's precomputed metric wants (n_queries, n_train) and no negative entries
    # (compressor-facts.md section 8, verified with scikit-learn 1.9).
    train = [origin_text(o, s) for o in range(3) for s in range(3)]
    labels = [f"o{o}" for o in range(3) for _ in range(3)]
    test = [origin_text(o, 50) for o in range(3)]
    knn = KNeighborsClassifier(n_neighbors=1, metric="precomputed")
    knn.fit(pairwise_distances(train), labels)
    assert list(knn.predict(pairwise_distances(test, train))) == ["o0", "o1", "o2"]


def test_estimator_follows_the_scikit_learn_parameter_contract() -> None:
    # scikit-learn's own estimator checks that need no numeric data.
    estimator = CompressionClassifier(compressor="zlib:level=9", k=2, method="knn")
    check_parameters_default_constructible("CompressionClassifier", CompressionClassifier())
    check_no_attributes_set_in_init("CompressionClassifier", estimator)
    check_get_params_invariance("CompressionClassifier", estimator)
    check_set_params("CompressionClassifier", estimator)
    twin = clone(estimator)
    assert twin.get_params() == estimator.get_params()
    assert twin.set_params(k=3).k == 3 and estimator.k == 2


@pytest.mark.parametrize("method", ["conditional", "knn"])
def test_estimator_fits_predicts_and_refuses(method: str, tmp_path: Path) -> None:
    texts = [origin_text(o, s) for o in range(3) for s in range(8)]
    labels = [o for o in range(3) for _ in range(8)]
    model = CompressionClassifier(
        compressor="zstd:level=19", method=method, unknown_label=-1, cache=str(tmp_path / "c.db")
    )
    model.fit(texts, labels)
    assert list(model.classes_) == [0, 1, 2]
    assert model.compressor_ == "zstd:level=19"
    assert list(model.predict([origin_text(2, 40), origin_text(0, 41)])) == [2, 0]
    assert list(model.predict([origin_text(8, 1).encode()])) == [-1]
    assert model.score([origin_text(1, 42), origin_text(8, 2)], [1, 1]) == 0.5
    p = model.p_values([origin_text(2, 40), origin_text(8, 1)])
    assert p.shape == (2, 3)
    assert p[0, 2] > 0.05 and (p[0, :2] <= 0.05).all() and (p[1] <= 0.05).all()


def test_estimator_decides_by_the_test_it_is_given(tmp_path: Path) -> None:
    texts = [origin_text(o, s) for o in range(3) for s in range(8)]
    labels = [o for o in range(3) for _ in range(8)]
    cache = str(tmp_path / "t.db")
    for test in ("fit", "separation", "contrast", "mix"):
        model = CompressionClassifier("zstd:level=19", test=test, unknown_label=-1, cache=cache)
        model.fit(texts, labels)
        assert model.calibrated_.abstention.test == test
        assert list(model.predict([origin_text(2, 40), origin_text(8, 1)])) == [2, -1]
    with pytest.raises(ValueError, match="not both"):
        CompressionClassifier("zstd:level=19", test="fit", threshold=0.9).fit(texts, labels)
    with pytest.raises(ValueError, match="unknown test 'vote'"):
        CompressionClassifier("zstd:level=19", test="vote").fit(texts, labels)


def test_estimator_chooses_the_compressor_by_the_task_by_default(tmp_path: Path) -> None:
    texts = [origin_text(o, s) for o in range(3) for s in range(8)]
    labels = [o for o in range(3) for _ in range(8)]
    model = CompressionClassifier(unknown_label=-1, budget=60, cache=str(tmp_path / "a.db"))
    assert model.compressor == "auto"
    model.fit(texts, labels)
    assert model.compressor_ != "auto"
    assert list(model.predict([origin_text(1, 50), origin_text(9, 1)])) == [1, -1]


def test_estimator_runs_in_a_pipeline_under_cross_validation(tmp_path: Path) -> None:
    texts = [origin_text(o, s) for o in range(3) for s in range(12)]
    labels = [f"o{o}" for o in range(3) for _ in range(12)]
    pipeline = Pipeline(
        [
            ("lower", FunctionTransformer(lambda xs: [x.lower() for x in xs])),
            ("classify", CompressionClassifier("zstd:level=19", cache=str(tmp_path / "cv.db"))),
        ]
    )
    scores = cross_val_score(pipeline, texts, labels, cv=3)
    assert scores.shape == (3,)
    assert scores.mean() >= 0.9


# -- real data (open datasets beside the repository) --------------------------------------------


def log_chunks(folder: Path, lines: int = 100) -> tuple[list[Item], list[Item]]:
    """Chunks of each system's log: the first half as reference, the second half to classify."""
    reference, held_out = [], []
    for path in sorted(folder.glob("*.log")):
        rows = path.read_bytes().splitlines(keepends=True)
        chunks = [b"".join(rows[k : k + lines]) for k in range(0, len(rows), lines)]
        half = len(chunks) // 2
        for number, chunk in enumerate(chunks):
            item = Item(f"{path.stem}#{number + 1}", chunk, str(path), label=path.stem)
            (reference if number < half else held_out).append(item)
    return reference, held_out


@pytest.mark.shared
def test_real_logs_second_half_is_classified_by_system(shared: Path, cache: SizeCache) -> None:
    # Loghub 2,000-line samples of 8 systems (Zhu et al., ISSRE 2023): 100-line chunks.
    reference, held_out = log_chunks(shared / "logs")
    result = classify(held_out, reference, cache=cache)
    hits = [p.predicted == i.label for p, i in zip(result.predictions, held_out, strict=True)]
    accuracy = sum(hits) / len(hits)
    print(f"logs: accuracy {accuracy:.3f}, {result.counts()}")
    assert accuracy >= 0.95


def gzip_1nn(train: list[str], labels: list[str], test: list[str]) -> list[str]:
    """The gzip nearest-neighbour method of Jiang et al. 2023, written out as in their paper.

    NCD(x, y) = (C(" ".join([x, y])) - min(C(x), C(y))) / max(C(x), C(y)), C = len(gzip.compress)
    of the UTF-8 text. Their k = 2 with ties broken by the nearer neighbour predicts what k = 1
    predicts, so k = 1 is used.
    """

    def size(text: str) -> int:
        return len(gzip.compress(text.encode()))

    train_sizes = [size(y) for y in train]
    out = []
    for x in test:
        cx = size(x)
        distances = [
            (size(" ".join([x, y])) - min(cx, cy)) / max(cx, cy)
            for y, cy in zip(train, train_sizes, strict=True)
        ]
        out.append(labels[int(np.argmin(distances))])
    return out


def _code(shared: Path) -> tuple[list[Item], list[Item]]:
    """Rosetta Code solutions in 8 languages, 40 files each (ad-si/RosettaGit; labels.tsv there):
    each language's first 20 files in name order as reference, the other 20 to classify."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", InputWarning)  # labels.tsv lies beside the subfolders
        items = reference_items(shared / "code")
    return [i for i in items if _rank(i, items) < 20], [i for i in items if _rank(i, items) >= 20]


@pytest.mark.shared
def test_real_code_by_language_with_default_options_beats_gzip_knn(
    shared: Path, cache: SizeCache
) -> None:
    # Default options: the compressor chosen for the task, conformal abstention at 0.05. Measured
    # when written: deflate 9 chosen (ppmd order 32 within one held-out item of it, and slower),
    # 0.969 named right, 2.5 % refused, gzip 1-NN 0.900 (before the mix of tests, ppmd chosen,
    # 0.988 and 1.3 %; deflate 9, 0.956 and 3.7 %, when auto ranked a missing origin by the AUC
    # alone). With all three held-out blocks measured: lzma 9 chosen, the same 0.969 and 2.5 %.
    # With a test taking the more typical of the two views: PPMd chosen, 0.975 and 2.5 %.
    reference, held_out = _code(shared)
    truth = [str(i.label) for i in held_out]

    def text(i: Item) -> str:
        return i.data.decode("utf-8", "replace")

    baseline = gzip_1nn([text(i) for i in reference], [str(i.label) for i in reference],
                        [text(i) for i in held_out])  # fmt: skip
    baseline_accuracy = np.mean([p == t for p, t in zip(baseline, truth, strict=True)])
    spec = choose_for_job(reference, "classify", targets=held_out, cache=cache).spec
    result = classify(held_out, reference, spec, cache=cache)
    right = np.mean([p.predicted == t for p, t in zip(result.predictions, truth, strict=True)])
    refused = np.mean([p.decision == "unknown" for p in result.predictions])
    print(f"code: {spec} right {right:.3f} refused {refused:.3f} {result.counts()},"
          f" gzip 1-NN {baseline_accuracy:.3f}")  # fmt: skip
    assert right > baseline_accuracy
    assert right >= 0.90
    assert refused <= 0.07


@pytest.mark.shared
def test_real_code_of_a_language_missing_from_the_reference_comes_back_unknown(
    shared: Path, cache: SizeCache
) -> None:
    # Default options, two of the 8 Rosetta languages at a time left out, in rotation (these
    # tasks are solved in every language, so a missing language shares tasks and idioms with a
    # present one: a hard negative). Issue 10's goal is >= 0.8 of their files unknown. Measured
    # with a test taking the more typical of the two views: 0.912 unknown, known files refused
    # 0.035 (0.031 with fit first among tied tests); with the stranger view, all three held-out
    # blocks and the two-item tie band: 0.875 and 0.027. Before, with the mix of tests: 0.88
    # and 0.033 (single tests only, 0.81 and 0.040; auto ranking by the AUC alone, 0.74: per
    # round 0.35-1.0 by the compressor chosen).
    # On random splits of this set it is 0.80 (offline replay, 30 draws of 2), on 21 kinds of
    # this machine's files 0.45-0.56, and the choice among close candidates hangs on an item or
    # two, which timing on another machine can shift (offline, zstd 19 in every round gives
    # 0.79), so this guards 0.75. The fit test alone gave 0.69.
    reference, held_out = _code(shared)
    languages = sorted({str(i.label) for i in reference})
    unknown = strangers = refused = known = 0
    estimated = 0.0  # the output's estimate of the share unknown, weighed by the round's strangers
    for start in range(0, len(languages), 2):
        missing = set(languages[start : start + 2])
        kept = [i for i in reference if i.label not in missing]
        spec = choose_for_job(kept, "classify", targets=held_out, cache=cache).spec
        result = classify(held_out, kept, spec, cache=cache)
        assert result.abstention.missing_refused is not None
        estimated += result.abstention.missing_refused * sum(i.label in missing for i in held_out)
        for p, item in zip(result.predictions, held_out, strict=True):
            if item.label in missing:
                strangers += 1
                unknown += p.decision == "unknown"
            else:
                known += 1
                refused += p.decision != "named"
    print(
        f"missing languages unknown {unknown / strangers:.3f} (estimated"
        f" {estimated / strangers:.3f}), known refused {refused / known:.3f}"
    )
    assert unknown / strangers >= 0.75
    assert refused / known <= 0.07
    # The output's estimate for a missing origin (each of the reference's origins left out in
    # turn) against what the missing languages' files did: within 0.15 over the rounds.
    assert abs(estimated / strangers - unknown / strangers) <= 0.15


def _log_protocol(folder: Path) -> list[tuple[list[Item], list[Item], set[str]]]:
    """The time-ordered protocol: of each system, chunks 1-10 of 100 lines as reference and
    chunks 11-20 to classify; two systems at a time missing from the reference, rotated."""
    chunks = {}
    for path in sorted(folder.glob("*.log")):
        rows = path.read_bytes().splitlines(keepends=True)
        chunks[path.stem] = [
            Item(f"{path.stem}#{k + 1}", b"".join(rows[100 * k : 100 * k + 100]), str(path),
                 label=path.stem)
            for k in range(20)
        ]  # fmt: skip
    systems = sorted(chunks)
    rounds = []
    for start in range(0, len(systems), 2):
        missing = set(systems[start : start + 2])
        reference = [i for s in systems if s not in missing for i in chunks[s][:10]]
        later = [i for s in systems for i in chunks[s][10:20]]
        rounds.append((reference, later, missing))
    return rounds


@pytest.fixture(scope="module")
def log_rounds(shared: Path) -> list[tuple[list[Item], list[Item], set[str]]]:
    return _log_protocol(shared / "logs")


@pytest.fixture(scope="module")
def log_choice(log_rounds: list[tuple[list[Item], list[Item], set[str]]], cache: SizeCache) -> Any:
    reference, later, _ = log_rounds[0]
    return choose_for_job(reference, "classify", targets=later, cache=cache)


@pytest.mark.shared
def test_real_logs_time_ordered_with_default_options(
    log_rounds: list[tuple[list[Item], list[Item], set[str]]], log_choice: Any, cache: SizeCache
) -> None:
    # Loghub 2,000-line samples of 8 systems (Zhu et al., ISSRE 2023). The goals of issue 10:
    # known systems named right >= 0.93, refused <= 0.07, missing systems unknown >= 0.8. The
    # compressor is chosen by default (-c auto) on the first round's reference and used for all
    # four rounds (choosing again costs half a minute a round). Measured when written: zlib
    # level 9 primed, 0.988 right, 0.013 refused, every missing chunk unknown. Measured with all
    # three held-out blocks and the tie band of an item's worth in each figure: zstd 19 (primed),
    # the same figures; PPMd order 32 separates the held-out reference by two chunks more but
    # names 0.912 of the later chunks right and refuses 0.087 (with a band of one item it won).
    # With a test taking the more typical of the two views, PPMd chosen: 0.988 named right,
    # 0.013 refused, 0.938 of a missing system's chunks unknown; with separation first among
    # tied tests, every one. The stack of zstd 19 and PPMd order 32 (chosen since unless a
    # single compressor separates significantly better): 0.988, 0.013 and every one.
    right, refused, unknown = _round_figures(log_rounds, log_choice.spec, cache)
    print(f"logs: {log_choice.spec} right {right:.3f} refused {refused:.3f}"
          f" missing unknown {unknown:.3f}")  # fmt: skip
    assert right >= 0.93
    assert refused <= 0.07
    assert unknown >= 0.8


def _round_figures(
    rounds: list[tuple[list[Item], list[Item], set[str]]],
    spec: str,
    cache: SizeCache,
    later_of: Any = lambda items: items,
) -> tuple[float, float, float]:
    """Over the rounds, the share of known later items named right and refused, and of a
    missing origin's later items unknown; `later_of` makes the later items of a round."""
    known = refused = right = strangers = unknown = 0
    for reference, later, missing in rounds:
        later = later_of(later)
        result = classify(later, reference, spec, cache=cache)
        for p, item in zip(result.predictions, later, strict=True):
            if item.label in missing:
                strangers += 1
                unknown += p.decision == "unknown"
            else:
                known += 1
                right += p.predicted == item.label
                refused += p.decision == "unknown"
    return right / known, refused / known, unknown / strangers


def _fresh_digits(data: bytes, rng: random.Random) -> bytes:
    """Every digit replaced by a random one: the same lines with new times, ids and addresses."""
    return re.sub(rb"[0-9]", lambda m: str(rng.randrange(10)).encode(), data)


@pytest.mark.shared
def test_real_logs_with_new_numbers_are_still_named(
    log_rounds: list[tuple[list[Item], list[Item], set[str]]], log_choice: Any, cache: SizeCache
) -> None:
    # The time-ordered protocol above, with every digit of the later chunks replaced by a random
    # one: what a system writes later has new times, process ids, block ids, addresses and ports
    # in the same format (harsher than life: the digits of fixed words change too). The content
    # drifts, the shape view (digits masked) does not, and an origin accepts an item typical of
    # it in either view. Measured when written, zstd 19: 0.988 named right, 0.013 refused,
    # every missing chunk unknown; PPMd (chosen where the budget lets it be measured): 0.933,
    # 0.067 and every one, at the goals' edge (a chunk whose shape alone is middling typical
    # loses the content's vouching); when a test took the stranger of the two views (and the
    # shape joined only where it named more held-out chunks right, here never), zstd 19: 0.533
    # named right and 0.467 refused, the goals of issue 10 missed as on logs never seen.
    rng = random.Random(5)

    def renumbered(later: list[Item]) -> list[Item]:
        return [dataclasses.replace(i, data=_fresh_digits(i.data, rng)) for i in later]

    right, refused, unknown = _round_figures(log_rounds, log_choice.spec, cache, renumbered)
    print(f"logs, new numbers: {log_choice.spec} right {right:.3f} refused {refused:.3f}"
          f" missing unknown {unknown:.3f}")  # fmt: skip
    assert right >= 0.93
    assert refused <= 0.07
    assert unknown >= 0.8


@pytest.mark.shared
def test_auto_separates_the_reference_at_least_as_well_as_each_candidate_it_passed_over(
    log_rounds: list[tuple[list[Item], list[Item], set[str]]], log_choice: Any, cache: SizeCache
) -> None:
    # Recomputed here from the public functions (the sizes come from the cache): the chosen
    # compressor's held-out merit (own origin best, plus how well a missing origin is told
    # apart: the mean of the better AUC and the share of its items refused at the default
    # significance, on the scores as the classification would make them: footing and shape
    # view) is within the tie band of the best of those it measured: an item's worth in each of
    # the two figures, TIE_ITEMS / items; or, for a stack (specs joined by +, its compressors'
    # views joined as further views), no single compressor separates significantly better.
    reference, _, _ = log_rounds[0]
    measured = {f.spec: f for f in log_choice.task}
    assert log_choice.spec in measured and len(measured) >= 3
    longest = max(len(i.data) for i in log_rounds[0][1])
    figures: dict[str, float] = {}
    right: dict[str, set[int]] = {}
    missed: dict[str, tuple[int, int]] = {}
    for spec in measured:
        scores, codes, rows = held_out_decision_scores(
            reference, spec, folds=MEASURED_FOLDS, longest=longest, cache=cache
        )
        auc = max(novelty_aucs(scores, codes))
        refused = max(novelty_detection(scores, codes, DEFAULT_SIGNIFICANCE).values())
        named = combined(scores).argmin(axis=1) == codes
        figures[spec] = np.mean(named) + (auc + refused) / 2
        assert figures[spec] == pytest.approx(measured[spec].merit)
        right[spec] = set(rows[named].tolist())
        missed[spec] = round(refused * len(codes)), len(codes)
    band = TIE_ITEMS / measured[log_choice.spec].items
    singles = [spec for spec in figures if len(stacked(spec)) == 1]
    if len(stacked(log_choice.spec)) == 1:
        assert all(figures[log_choice.spec] >= s - band for s in figures.values()), figures
        return
    # A stack is chosen unless a single compressor separates significantly better: no single
    # one names significantly more held-out items right (exact sign test on the items one of
    # the two names right and the other not, McNemar's test) or refuses significantly more of
    # a missing origin's items (Fisher's exact test), one-sided, at 0.05 shared among the two
    # figures of each candidate (Bonferroni); both tests from scipy.stats.
    rate = DEFAULT_SIGNIFICANCE / (2 * len(singles))
    chosen = right[log_choice.spec]
    for spec in singles:
        gained, lost = len(right[spec] - chosen), len(chosen - right[spec])
        if gained > lost:
            assert binomtest(gained, gained + lost, 0.5, alternative="greater").pvalue > rate
        (k, n), (k_stack, n_stack) = missed[spec], missed[log_choice.spec]
        if k > k_stack:
            table = [[k, n - k], [k_stack, n_stack - k_stack]]
            assert fisher_exact(table, "greater").pvalue > rate


def test_auto_ties_within_an_items_worth_in_each_figure_and_prefers_the_primed() -> None:
    # 60 held-out items: PPMd (unprimed) separates perfectly; zstd 19 (primed) misses two of a
    # missing origin's items (refused share 58/60, halved in the merit) and loses a little AUC:
    # within an item's worth in each figure (TIE_ITEMS / 60), so the primed one is chosen. A
    # candidate that also names one more held-out item wrong is outside the band and is not.
    def figures(spec: str, accuracy: float, refused: float, auc: float) -> TaskFigures:
        return TaskFigures(spec=spec, seconds=1.0, accuracy=accuracy, refused=refused, auc=auc,
                           novelty=(auc + refused) / 2, merit=accuracy + (auc + refused) / 2,
                           significance=0.05, own_score=0.6, items=60)  # fmt: skip

    ppmd = figures("ppmd:order=32", 1.0, 1.0, 1.0)
    zstd = figures("zstd:level=19", 1.0, 58 / 60, 0.997)
    reasons: list[str] = []
    assert _pick_labelled([ppmd, zstd], 6, reasons) is zstd
    assert reasons[0].startswith("zstd:level=19: chosen")
    # the passed-over one is told it lost to priming, not to speed (it is better in merit)
    assert reasons[1].startswith("ppmd:order=32: passed over: separates 0.018 better in merit,")
    assert "cannot be primed with the corpus" in reasons[1] and "slower" not in reasons[1]
    # between two primed ones, equal in merit, the lower own score wins, and the reason says so
    zlib = dataclasses.replace(zstd, spec="zlib:level=9", own_score=0.7)
    reasons = []
    assert _pick_labelled([zlib, zstd], 6, reasons) is zstd
    assert reasons[1] == (
        "zlib:level=9: passed over: separates as well (within an item's worth), but explains"
        " held-out items by their own origin less well (own score 0.700 against 0.600); "
        + zlib.summary()
    )
    worse = figures("zstd:level=19", 59 / 60, 58 / 60, 0.997)
    assert ppmd.merit - worse.merit > TIE_ITEMS / 60 > ppmd.merit - zstd.merit
    assert _pick_labelled([ppmd, worse], 6, []) is ppmd


def _rank(item: Item, items: list[Item]) -> int:
    """Position of an item among its origin's items, in name order."""
    names = sorted(i.name for i in items if i.label == item.label)
    return names.index(item.name)


def _kindred_scores(rng: np.random.Generator, codes: np.ndarray, origins: int) -> np.ndarray:
    """Synthetic scores (lower is better) with a known answer: origins 0-3 explain their own
    items well (about 0.6) and nothing else (0.95); origins 4 and up are generalists, whose items
    every origin explains moderately (about 0.72) and their own somewhat better (0.6)."""
    n = len(codes)
    scores = rng.normal(0.95, 0.02, (n, origins))
    general = codes >= 4
    scores[general] = rng.normal(0.72, 0.03, (int(general.sum()), origins))
    own = codes < origins
    scores[np.flatnonzero(own), codes[own]] = rng.normal(0.6, 0.08, int(own.sum()))
    return scores


def test_the_reference_chooses_the_test_that_refuses_most_held_out_strangers() -> None:
    # An origin missing from the reference whose items a kindred origin explains about as well
    # as its own (fit alone accepts many) but which every other origin explains nearly as well
    # too (contrast sees it): the reference holds one such generalist origin, so leaving it out
    # shows contrast the better test, and a second generalist, never in the reference, is then
    # refused far more often, while known items keep the stated rate (Vovk et al. 2005).
    rng = np.random.default_rng(23)
    eps = 0.05
    codes = np.repeat(np.arange(5), 30)
    held = _kindred_scores(rng, codes, 5)
    detection = novelty_detection(held, codes, eps)
    assert detection["contrast"] > detection["fit"] + 0.1, detection
    conformity = Conformity.of(held, codes, tuple("abcde"), eps)
    assert conformity.test == max(TESTS, key=lambda t: detection[t]) == "contrast"
    assert dict(conformity.detection) == pytest.approx(detection)
    new_codes = np.repeat(np.arange(6), 200)
    new = _kindred_scores(rng, new_codes, 6)[:, :5]
    stranger = new_codes == 5
    _, _, chosen_p = conformity.p_values(new)
    fit = _statistics(held, conformity.centre, conformity.scale, codes)["fit"]
    fit_only = dataclasses.replace(conformity, test="fit", test_calibration=fit)
    _, _, fit_p = fit_only.p_values(new)
    assert np.mean(chosen_p[stranger] <= eps) >= np.mean(fit_p[stranger] <= eps) + 0.2
    assert np.mean(chosen_p[stranger] <= eps) >= 0.8
    known_refused = np.mean(chosen_p[~stranger] <= eps)
    assert known_refused <= eps + 3 * math.sqrt(eps * (1 - eps) / int((~stranger).sum()))


def _exchangeable_scores(
    rng: np.random.Generator, gap: np.ndarray, codes: np.ndarray, columns: np.ndarray
) -> np.ndarray:
    """Synthetic scores of items of origins `codes` on the origins `columns`: about 0.6 on their
    own origin, 0.6 + gap[own, other] on the others; every origin drawn alike, so an origin
    missing from the reference is like those in it."""
    scores = rng.normal(0.6 + gap[codes][:, columns], 0.04)
    own = np.isin(codes, columns)
    place = np.searchsorted(columns, codes[own])
    scores[np.flatnonzero(own), place] = rng.normal(0.6, 0.06, int(own.sum()))
    return scores


def test_the_output_estimates_the_share_of_a_missing_origin_refused() -> None:
    # The guarantee's words give the deciding test's share of each left-out origin's held-out
    # items refused, as an estimate for an origin missing from the reference. Origins drawn
    # alike (8 in the reference, 8 missing), from kin whose scores overlap their own items' to
    # strangers far apart, 6 draws each: the mean estimate lies within 0.1 of the mean share of
    # the missing origins' items refused (measured: 0.00 / 0.00, 0.66 / 0.73, 1.00 / 1.00; a
    # single draw strays up to 0.2 from its share, as a reference of 8 origins can).
    eps = 0.05
    reference, codes = np.arange(8), np.repeat(np.arange(8), 30)
    missing = np.repeat(np.arange(8, 16), 100)
    means = []
    for low, high in [(0.02, 0.12), (0.1, 0.3), (0.25, 0.5)]:
        estimates, refused = [], []
        for seed in range(6):
            rng = np.random.default_rng(seed)
            gap = rng.uniform(low, high, (16, 16))
            gap = (gap + gap.T) / 2
            held = _exchangeable_scores(rng, gap, codes, reference)
            conformity = Conformity.of(held, codes, [str(o) for o in reference], eps)
            abstention = _abstention(conformity, 3)
            estimate = abstention.missing_refused
            assert estimate == pytest.approx(dict(conformity.detection)[conformity.test])
            assert (
                f"the test refused {estimate:.0%} of its held-out items, a rough"
                in abstention.guarantee
            )
            assert abstention.as_json()["missing_refused"] == pytest.approx(estimate)
            _, _, best_p = conformity.p_values(_exchangeable_scores(rng, gap, missing, reference))
            estimates.append(estimate)
            refused.append(float(np.mean(best_p <= eps)))
        assert abs(np.mean(estimates) - np.mean(refused)) <= 0.1, (estimates, refused)
        means.append(np.mean(estimates))
    assert means[0] < 0.2 < means[1] < 0.8 < means[2]  # the estimate tells the cases apart
    # A forced test measured nothing: no estimate, no words about one. Two origins cannot
    # leave one out and still test: the words say there were too few.
    held = _exchangeable_scores(rng, gap, codes, reference)
    forced = _abstention(Conformity.of(held, codes, list("abcdefgh"), eps, test="fit"), 3)
    assert forced.missing_refused is None and "left out in turn" not in forced.guarantee
    two = _abstention(Conformity.of(held[:60, :2], codes[:60], ["a", "b"], eps), 3)
    assert two.missing_refused is None
    assert "without a stated rate (too few origins to estimate it)" in two.guarantee


def test_the_output_names_the_origin_hardest_to_tell_and_its_kin() -> None:
    # Origins 0 and 1 are kin (their items score on each other's origin about as on their own);
    # the other six are far apart. Left out, a kin is refused least, taken for the other; the
    # per-origin shares average to the estimate, and the words name the pair.
    rng = np.random.default_rng(3)
    gap = np.full((8, 8), 0.4)
    gap[0, 1] = gap[1, 0] = 0.02
    reference, codes = np.arange(8), np.repeat(np.arange(8), 30)
    held = _exchangeable_scores(rng, gap, codes, reference)
    names = [f"o{k}" for k in range(8)]
    abstention = _abstention(Conformity.of(held, codes, names, 0.05), 3)
    assert [origin for origin, _, _ in abstention.left_out] == names
    shares = [share for _, share, _ in abstention.left_out]
    assert np.mean(shares) == pytest.approx(abstention.missing_refused)
    assert abstention.hardest is not None
    origin, share, kin = abstention.hardest
    assert {origin, kin} == {"o0", "o1"} and share < 0.5 and share == min(shares)
    assert all(s == 1.0 and k is None for o, s, k in abstention.left_out if o not in ("o0", "o1"))
    words = f"Left out, {origin} was refused least ({share:.0%}; most of its items were taken"
    assert f"{words} for {kin})" in abstention.guarantee
    found = abstention.as_json()["left_out"]
    assert found[0] == {
        "origin": "o0",
        "refused": shares[0],
        "taken_for": abstention.left_out[0][2],
    }


def test_novelty_detection_is_the_share_of_left_out_items_refused() -> None:
    # Recomputed by hand for one left-out origin from the public pieces: the others' held-out
    # items calibrate the fit test, the left-out origin's items are tested on their best origin.
    rng = np.random.default_rng(5)
    codes = np.repeat(np.arange(3), 12)
    held = _kindred_scores(rng, codes, 3)
    rates = []
    for missing in range(3):
        keep = np.array([o for o in range(3) if o != missing])
        known = codes != missing
        reduced = held[:, keep]
        relabel = np.searchsorted(keep, codes[known])
        own = reduced[known][np.arange(int(known.sum())), relabel]
        centre = np.array([np.median(own[relabel == o]) for o in range(2)])
        other = [np.median(reduced[known][relabel != o, o]) for o in range(2)]
        scale = np.maximum(np.array(other) - centre, 1e-3)
        calibration = (own - centre[relabel]) / scale[relabel]
        best = reduced[~known].argmin(axis=1)
        fit = (reduced[~known].min(axis=1) - centre[best]) / scale[best]
        rates.append(np.mean(conformal_p_values(calibration, fit) <= 0.1))
    assert novelty_detection(held, codes, 0.1)["fit"] == pytest.approx(np.mean(rates))
    assert np.isnan(novelty_detection(held[:, :2], codes % 2, 0.1)["fit"])  # two origins


def test_novelty_auc_agrees_with_scikit_learn() -> None:
    # Reference: scikit-learn's roc_auc_score (ties counted half, as the Mann-Whitney U does).
    from sklearn.metrics import roc_auc_score

    from kinpress.origins import _auc

    rng = np.random.default_rng(11)
    for _ in range(20):
        positive = rng.random(40) < 0.3
        positive[:2] = [True, False]
        values = np.round(rng.random(40) + 0.3 * positive, 1)  # rounded: many ties
        assert _auc(positive, values) == pytest.approx(roc_auc_score(positive, values))


# -- unknown items, grouped ---------------------------------------------------------------------


@pytest.fixture(scope="module")
def strangers_classified(cache: SizeCache) -> tuple[list[Item], Any]:
    """Items of three known origins and of two origins missing from the reference (o5, o6),
    classified against a reference of the known three."""
    reference = origin_items(range(3), range(8))
    unknowns = [
        *origin_items(range(3), range(20, 23), "k"),
        *origin_items(range(5, 7), range(30, 36), "s"),
    ]
    return unknowns, classify(unknowns, reference, "zstd:level=19", cache=cache)


def test_unknown_items_group_by_the_origin_missing_from_the_reference(
    strangers_classified: tuple[list[Item], Any], cache: SizeCache
) -> None:
    unknowns, found = strangers_classified
    refused = {
        u.label for u, p in zip(unknowns, found.predictions, strict=True) if p.decision == "unknown"
    }
    assert refused == {"o5", "o6"}  # every known item named, every stranger refused
    grouped = group_unknowns(found, unknowns, cache=cache)
    assert grouped.skipped is None and not grouped.alone
    members = sorted(sorted(name[:3] for name in g.members) for g in grouped.groups)
    assert members == [["s5-"] * 6, ["s6-"] * 6]  # one group per missing origin, nothing mixed
    for group in grouped.groups:
        assert sum(n for _, n in group.fits) == 6 and group.fits[0][0] in found.origins
        assert group.members[0] == group.medoid  # the most typical first
        assert 0 < group.spread < 1
    # each classified item's group number, None for the named ones
    numbers = [grouped.group_of(i) for i in range(len(unknowns))]
    assert numbers[:9] == [None] * 9 and set(numbers[9:]) == {1, 2}
    assert "2 groups" in grouped.words and "evidence to review" in grouped.words
    assert json.loads(json.dumps(grouped.as_json()))["groups"][0]["members"] == list(
        grouped.groups[0].members
    )


def test_unknown_groups_from_a_given_matrix_are_those_measured(
    strangers_classified: tuple[list[Item], Any], cache: SizeCache
) -> None:
    # the report passes its own matrix of every classified item; the groups are the same
    unknowns, found = strangers_classified
    every = matrix_of(unknowns, "zstd:level=19", cache=cache).distances
    given = group_unknowns(found, unknowns, distances=every)
    assert given == group_unknowns(found, unknowns, cache=cache)
    with pytest.raises(ValueError, match="distances of 3 items for 21 classified"):
        group_unknowns(found, unknowns, distances=every[:3, :3])


def test_unknown_items_are_not_grouped_beyond_the_allowance_or_below_three(
    strangers_classified: tuple[list[Item], Any], cache: SizeCache
) -> None:
    unknowns, found = strangers_classified
    # 12 unknown items make 66 pairs; by default as many as the classification measured
    assert found.abstention.calibration_scores == 24
    assert pair_allowance(found) == (24 + 21) * 3
    over = group_unknowns(found, unknowns, allowance=65, cache=cache)
    assert over.groups == () and over.group_of(10) is None
    assert over.skipped is not None and "66 pairs, more than the 65" in over.skipped
    assert "run 'kinpress groups' on them" in over.skipped
    named = classify(unknowns[:9], origin_items(range(3), range(8)), "zstd:level=19", cache=cache)
    few = group_unknowns(named, unknowns[:9], cache=cache)
    assert few.unknown == 0 and few.skipped == "0 unknown, fewer than 3"
    assert few.words == ""  # nothing to say in the output
    assert over.words.startswith("Unknown items not grouped: 12 unknown items make 66 pairs")


@pytest.mark.shared
def test_real_logs_unknown_chunks_group_by_system(
    log_rounds: list[tuple[list[Item], list[Item], set[str]]], log_choice: Any, cache: SizeCache
) -> None:
    # The time-ordered rounds of Loghub's logs above (two systems missing from each reference):
    # the unknown chunks grouped by their own NCD should sort them by the system that wrote
    # them. Agreement by the adjusted Rand index of scikit-learn (Hubert & Arabie 1985). Items
    # that fit no group join their nearest group by default; kept alone on request, each is a
    # group of its own here. Measured when written, with the first round's choice for all four:
    # joined 0.90, 0.90, 1.00, 0.72 by round (Zookeeper's chunks in two groups), alone 1.00,
    # 1.00, 0.90, 0.76 (four chunks alone); each missing system's chunks at
    # least 6 of 10 in one group.
    from sklearn.metrics import adjusted_rand_score

    scores: dict[bool, list[float]] = {False: [], True: []}
    lone = 0
    for reference, later, missing in log_rounds:
        found = classify(later, reference, log_choice.spec, cache=cache)
        chosen = [i for i, p in enumerate(found.predictions) if p.decision == "unknown"]
        truth = [str(later[i].label) for i in chosen]
        for outliers in (False, True):
            grouped = group_unknowns(found, later, cache=cache, outliers=outliers)
            assert grouped.skipped is None
            numbers = [grouped.group_of(i) for i in chosen]
            assert None not in numbers and numbers.count(-1) == len(grouped.alone)
            assert outliers or not grouped.alone  # joined by default
            lone += numbers.count(-1)
            numbers = [n if n != -1 else -1 - k for k, n in enumerate(numbers)]  # alone: its own
            scores[outliers].append(adjusted_rand_score(truth, numbers))
            for system in missing:
                held = [n for t, n in zip(truth, numbers, strict=True) if t == system]
                assert max(held.count(n) for n in held) >= 0.6 * len(held), (system, numbers)
    print(f"logs: unknown chunks grouped by system, ARI by round {np.round(scores[False], 2)},"
          f" lone ones kept alone {np.round(scores[True], 2)} ({lone} alone)")  # fmt: skip
    assert np.mean(scores[False]) >= 0.75 and np.mean(scores[True]) >= 0.75
    assert lone >= 1  # some chunk fits no group: the request to keep it alone is seen


def test_unknown_group_words_escape_the_names_they_show() -> None:
    # a file name holding a line feed must not break the text output's lines (items.escape_name)
    group = UnknownGroup(("odd\nname.log", "b.log", "c.log"), "b.log", (("sys\tlog", 3),), 0.4, 0.2)
    words = group.words()
    assert "\n" not in words and "odd\\nname.log" in words and "all fit sys\\tlog best" in words
    found = UnknownGroups((group,), ("lone\rone",), 4, "zstd:level=19", 100, method="density")
    assert found.words.splitlines()[-1] == "  alone: lone\\rone"
    assert "\r" not in found.words and found.count_words == "in one group, 1 alone"


def _punctuated_items(origins: range, seeds: range, prefix: str) -> list[Item]:
    """Lines of words from one vocabulary shared by every origin, each origin writing them in a
    form of its own (its punctuation): the shape view tells the origins apart, the words do
    not."""
    forms = ["{}={};", "[{}] ({})", "{}: {},", "<{}/{}>", "{} -> {} |", "#{}%{}&", "{}::{}",
             "'{}' `{}`"]  # fmt: skip
    vocabulary = [f"{a}{b}" for a in ("ka", "lo", "mi", "nu", "pe", "ro") for b in "aeiou"]
    items = []
    for o in origins:
        for s in seeds:
            rng = random.Random(100 * o + s)
            rows = [f"{n:03d} " + " ".join(forms[o].format(rng.choice(vocabulary),
                    rng.choice(vocabulary)) for _ in range(rng.randint(3, 6)))
                    for n in range(30)]  # fmt: skip
            items.append(Item(f"{prefix}{o}-{s}", ("\n".join(rows) + "\n").encode(), "generated",
                              label=f"o{o}"))  # fmt: skip
    return items


def test_unknown_groups_combine_the_views_the_classification_scored(cache: SizeCache) -> None:
    # Origins that share their words and differ in form: the reference takes the shape view into
    # the scores, and the unknown items' groups use both views' NCD combined as the scores are
    # (geometric mean); two missing origins come back as two groups.
    reference = _punctuated_items(range(4), range(8), "r")
    unknowns = [*_punctuated_items(range(4), range(20, 22), "k"),
                *_punctuated_items(range(6, 8), range(30, 35), "s")]  # fmt: skip
    found = classify(unknowns, reference, "zstd:level=19", cache=cache)
    assert found.scoring.uses_shape
    grouped = group_unknowns(found, unknowns, cache=cache)
    assert grouped.shape and "(content and shape views, as the scores)" in grouped.words
    assert json.loads(json.dumps(grouped.as_json()))["shape"] is True
    unknown = [
        u for u, p in zip(unknowns, found.predictions, strict=True) if p.decision == "unknown"
    ]
    assert {u.label for u in unknown} == {"o6", "o7"}
    members = sorted(sorted(name[:3] for name in g.members) for g in grouped.groups)
    assert members == [["s6-"] * 5, ["s7-"] * 5]
    content = matrix_of(unknown, "zstd:level=19", cache=cache).distances
    shaped = matrix_of(shaped_items(unknown), "zstd:level=19", cache=cache).distances
    both = np.sqrt(content * shaped)
    names = [u.name for u in unknown]
    for group in grouped.groups:
        at = [names.index(m) for m in group.members]
        inner = both[np.ix_(at, at)][np.triu_indices(len(at), 1)]
        assert group.spread == pytest.approx(float(np.median(inner)))
    # the report's matrix is the content's: the shape view's pairs are measured beside it
    every = matrix_of(unknowns, "zstd:level=19", cache=cache).distances
    assert group_unknowns(found, unknowns, distances=every, cache=cache) == grouped

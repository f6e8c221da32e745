"""The conformal abstention (see kinpress.origins): p-values from held-out reference scores,
the tests an origin accepts an item by, and how well each tells an origin missing from the
reference."""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from ..formats import json_ready
from ..measure import MeasurementWarning
from .scores import DEFAULT_BLOCKS

TESTS = ("fit", "separation", "contrast")
"""The single statistics an abstention can test (see Conformity)."""

MIX = "mix"
"""The deciding statistic that weighs every test's statistic of every view (see Mix)."""

DECIDERS = (*TESTS, MIX)
"""What the reference chooses the deciding statistic among (see Conformity)."""

CLIP = 20.0
"""Test statistics are clipped to +-CLIP before the mix standardises them: a score far beyond
every held-out one (an item nothing explains) would otherwise set the mix's scales."""


def check_test(test: str | None) -> None:
    """Raise ValueError unless `test` is None (the reference chooses) or one of DECIDERS."""
    if test is not None and test not in DECIDERS:
        raise ValueError(f"unknown test {test!r}: use one of {', '.join(DECIDERS)}")


def conformal_p_values(sample: np.ndarray, values: np.ndarray) -> np.ndarray:
    """(1 + #{sample >= v}) / (len(sample) + 1) for each v: larger statistics are stranger
    (Vovk, Gammerman & Shafer 2005, ch. 2)."""
    ordered = np.sort(sample)
    above = len(ordered) - np.searchsorted(ordered, values, side="left")
    return np.asarray((1 + above) / (len(ordered) + 1), dtype=float)


def _label_conditional(counts: np.ndarray, significance: float) -> np.ndarray:
    """Origins whose own calibration items alone give p-values down to half the rate."""
    return np.asarray(counts + 1 >= 2.0 / significance)


FLOOR = 1e-3
"""Scores are floored here before a geometric mean over views: a view whose bytes a corpus
predicts entirely (a shape of nothing but words) can measure 0 or a hair below."""


def combined(scores: np.ndarray) -> np.ndarray:
    """The scores an origin is picked by: a (items, origins) matrix as it is, or the geometric
    mean over the last axis of an (items, origins, views) stack, each floored at FLOOR."""
    if scores.ndim == 2:
        return scores
    return np.asarray(np.exp(np.log(np.maximum(scores, FLOOR)).mean(axis=2)))


def _profile(scores: np.ndarray, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per origin, the median held-out score of its own items (centre) and how far above it the
    median score of the other origins' items on it lies (scale; up to 1, a score that explains
    nothing, where no other origin's items were scored). A stack of views gets a profile per
    view: (origins, views) arrays."""
    if scores.ndim == 3:
        views = [_profile(scores[:, :, v], codes) for v in range(scores.shape[2])]
        return np.stack([c for c, _ in views], axis=1), np.stack([s for _, s in views], axis=1)
    m = scores.shape[1]
    centre = np.empty(m)
    scale = np.empty(m)
    for origin in range(m):
        own, other = scores[codes == origin, origin], scores[codes != origin, origin]
        centre[origin] = np.median(own)
        stranger = np.median(other) if other.size else 1.0
        scale[origin] = max(stranger - centre[origin], 1e-3)
    return centre, scale


def _second_best(scores: np.ndarray, best: np.ndarray) -> np.ndarray:
    """Each row's lowest score other than at `best` (1, explaining nothing, with one origin)."""
    if scores.shape[1] == 1:
        return np.ones(len(scores))
    masked = np.where(np.arange(scores.shape[1])[None, :] == best[:, None], np.inf, scores)
    return np.asarray(masked.min(axis=1))


def _typical_other(scores: np.ndarray, own: np.ndarray) -> np.ndarray:
    """Each row's median score over the origins other than `own[row]` (1, explaining nothing,
    with one origin)."""
    if scores.shape[1] == 1:
        return np.ones(len(scores))
    others = np.where(np.arange(scores.shape[1])[None, :] == own[:, None], np.nan, scores)
    return np.asarray(np.nanmedian(others, axis=1))


def _statistics(
    scores: np.ndarray, centre: np.ndarray, scale: np.ndarray, own: np.ndarray
) -> dict[str, np.ndarray]:
    """Each test's statistic (larger is stranger) of each row for the origin `own[row]`: fit,
    -separation and contrast (see Conformity); of a stack of views, the smallest (most typical)
    of the views' statistics, each on its own profile."""
    if scores.ndim == 3:
        views = [
            _statistics(scores[:, :, v], centre[:, v], scale[:, v], own)
            for v in range(scores.shape[2])
        ]
        return {test: np.min([found[test] for found in views], axis=0) for test in TESTS}
    rows = np.arange(len(scores))
    chosen = scores[rows, own]
    fit = (chosen - centre[own]) / scale[own]
    separation = (_second_best(scores, own) - chosen) / scale[own]
    lead = (_typical_other(scores, own) - chosen) / scale[own]
    return {"fit": fit, "separation": -separation, "contrast": fit - lead}


def _auc(positive: np.ndarray, values: np.ndarray) -> float:
    """ROC AUC of `values` for telling `positive` rows from the rest: the Mann-Whitney U of the
    positives' ranks (ties take their mean rank) over n_pos * n_neg."""
    from scipy.stats import rankdata

    ranks = rankdata(values)
    hits, misses = int(positive.sum()), int((~positive).sum())
    return float((ranks[positive].sum() - hits * (hits + 1) / 2) / (hits * misses))


@dataclass(frozen=True)
class _LeftOut:
    """The held-out scores with one origin left out of the reference: `known` rows are the
    other origins' items, `reduced` the scores on the kept origins, `relabel` the known rows'
    origins among those, `centre` and `scale` the kept origins' profile (see _profile),
    `missing` the origin left out and `keep` the kept ones."""

    known: np.ndarray
    reduced: np.ndarray
    relabel: np.ndarray
    centre: np.ndarray
    scale: np.ndarray
    missing: int
    keep: np.ndarray


def _leave_each_origin_out(scores: np.ndarray, codes: np.ndarray) -> Iterator[_LeftOut]:
    """Each origin left out in turn, where both it and the rest have held-out items."""
    m = scores.shape[1]
    for missing in range(m if m >= 2 else 0):
        keep = np.array([o for o in range(m) if o != missing])
        known = codes != missing
        if known.all() or not known.any():
            continue
        reduced = scores[:, keep]
        relabel = np.searchsorted(keep, codes[known])
        centre, scale = _profile(reduced[known], relabel)
        yield _LeftOut(known, reduced, relabel, centre, scale, missing, keep)


def novelty_aucs(scores: np.ndarray, codes: np.ndarray) -> tuple[float, float]:
    """How well fit and separation tell the held-out items of an origin missing from the
    reference from those of the others (ROC AUC, 1 = perfectly), each origin left out in turn."""
    fit_aucs, separation_aucs = [], []
    for out in _leave_each_origin_out(scores, codes):
        found = _statistics(
            out.reduced, out.centre, out.scale, combined(out.reduced).argmin(axis=1)
        )
        stranger = ~out.known
        fit_aucs.append(_auc(stranger, found["fit"]))
        separation_aucs.append(_auc(stranger, found["separation"]))
    if not fit_aucs:
        return float("nan"), float("nan")
    return float(np.mean(fit_aucs)), float(np.mean(separation_aucs))


def _features(
    scores: np.ndarray, centre: np.ndarray, scale: np.ndarray, own: np.ndarray
) -> np.ndarray:
    """Each row's statistic of every test in every view, for the origin `own[row]`, clipped to
    +-CLIP: (items, tests x views), what Mix weighs."""
    if scores.ndim == 3:
        return np.column_stack(
            [
                _features(scores[:, :, v], centre[:, v], scale[:, v], own)
                for v in range(scores.shape[2])
            ]
        )
    found = _statistics(scores, centre, scale, own)
    return np.asarray(np.clip(np.column_stack([found[test] for test in TESTS]), -CLIP, CLIP))


@dataclass(frozen=True)
class _Round:
    """One origin left out: the test statistics (see _features) of the other origins' held-out
    items for their own origin (`known`) and of the left-out origin's items for their best
    kept origin (`strangers`); `missing` is the left-out origin and `taken` each of its items'
    best kept origin (as an index of all origins)."""

    known: np.ndarray
    strangers: np.ndarray
    missing: int = -1
    taken: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=int))


def _round(out: _LeftOut) -> _Round:
    """One left-out origin's round, as Mix learns from it."""
    known, strangers = out.reduced[out.known], out.reduced[~out.known]
    best = combined(strangers).argmin(axis=1)
    return _Round(
        _features(known, out.centre, out.scale, out.relabel),
        _features(strangers, out.centre, out.scale, best),
        out.missing,
        out.keep[best],
    )


def _rounds(scores: np.ndarray, codes: np.ndarray) -> list[_Round]:
    """Each origin left out in turn (see _leave_each_origin_out), as Mix learns from it."""
    return [_round(out) for out in _leave_each_origin_out(scores, codes)]


@dataclass(frozen=True)
class Mix:
    """A deciding statistic that weighs the fit, separation and contrast statistics of every
    view together: the log-odds of a logistic regression that tells held-out items of origins
    left out of the reference (each in turn) from the other origins' held-out items, each
    class weighted to half, no weight below 0 (each statistic is larger for a stranger, so
    the mix only adds them up). Features are standardised by `centre` and `spread`; the
    statistic is `weights` . standardised + `offset`, larger is stranger. A mix is a function of the
    reference's held-out scores alone, so a new known item's statistic is still compared with
    its origin's held-out items' (Conformity)."""

    centre: np.ndarray
    spread: np.ndarray
    weights: np.ndarray
    offset: float

    @classmethod
    def learn(cls, rounds: Sequence[_Round]) -> Mix | None:
        """The mix of the rounds' items; None without items of both kinds, or when no
        statistic earns a weight above 0."""
        known = [r.known for r in rounds if len(r.known)]
        strangers = [r.strangers for r in rounds if len(r.strangers)]
        if not known or not strangers:
            return None
        x = np.vstack([*known, *strangers])
        y = np.repeat([0.0, 1.0], [sum(map(len, known)), sum(map(len, strangers))])
        centre, spread = x.mean(axis=0), x.std(axis=0) + 1e-9
        standard = (x - centre) / spread
        # Every statistic is larger for a stranger, so the mix may only add them up: a weight
        # below 0 (collinear statistics pulling against each other, contrast being fit less
        # the lead) drops its statistic and the rest are fitted again.
        used = np.ones(x.shape[1], dtype=bool)
        while True:
            found, offset = _logistic(standard[:, used], y)
            if (found >= 0).all():
                break
            used[np.flatnonzero(used)[found < 0]] = False
        if not used.any():
            return None  # nothing tells the strangers: no mix
        weights = np.zeros(x.shape[1])
        weights[used] = found
        return cls(centre, spread, weights, offset)

    def __call__(self, features: np.ndarray) -> np.ndarray:
        return np.asarray(((features - self.centre) / self.spread) @ self.weights + self.offset)


def _logistic(x: np.ndarray, y: np.ndarray, steps: int = 50) -> tuple[np.ndarray, float]:
    """Weights and offset of an L2-penalised logistic regression (penalty half the squared
    weights, the offset free), each class weighted to half the total, by Newton's method: the
    model scikit-learn's LogisticRegression(class_weight="balanced") fits by default."""
    n, k = x.shape
    share = np.where(y > 0, n / (2 * max(y.sum(), 1)), n / (2 * max(n - y.sum(), 1)))
    design = np.column_stack([x, np.ones(n)])
    penalty = np.ones(k + 1)
    penalty[-1] = 0.0
    beta = np.zeros(k + 1)
    for _ in range(steps):
        p = 1 / (1 + np.exp(-np.clip(design @ beta, -30, 30)))
        gradient = design.T @ (share * (p - y)) + penalty * beta
        hessian = (design * (share * p * (1 - p))[:, None]).T @ design + np.diag(penalty)
        hessian[-1, -1] += 1e-9
        step = np.linalg.solve(hessian, gradient)
        beta -= step
        if np.abs(step).max() < 1e-8:
            break
    return beta[:-1].copy(), float(beta[-1])


LeftOutShare = tuple[int, float, int]
"""One origin left out of the reference: the origin, the share of its held-out items a test
refused, and the kept origin most of the others were taken for (-1 when all were refused)."""


def _left_out_share(missing: int, refused: np.ndarray, taken: np.ndarray) -> LeftOutShare:
    """A LeftOutShare from the left-out items' refusals and best kept origins."""
    kept = taken[~refused]
    kin = int(np.bincount(kept).argmax()) if kept.size else -1
    return missing, float(np.mean(refused)), kin


def _mix_detection(
    rounds: Sequence[_Round], significance: float
) -> tuple[float, list[LeftOutShare]]:
    """The share of a left-out origin's held-out items the mix refuses at `significance`, each
    round's mix learnt on the other rounds only (an honest figure, comparable with the single
    tests'), NaN with fewer than three rounds; and each round's LeftOutShare."""
    shares = []
    for k, round_ in enumerate(rounds if len(rounds) >= 3 else ()):
        mix = Mix.learn([r for j, r in enumerate(rounds) if j != k])
        if mix is None or not len(round_.known) or not len(round_.strangers):
            continue
        p = conformal_p_values(mix(round_.known), mix(round_.strangers))
        shares.append(_left_out_share(round_.missing, p <= significance, round_.taken))
    mean = float(np.mean([share for _, share, _ in shares])) if shares else float("nan")
    return mean, shares


def novelty_detection(
    scores: np.ndarray, codes: np.ndarray, significance: float
) -> dict[str, float]:
    """Per deciding statistic (DECIDERS), the share of held-out items of an origin missing from
    the reference that it refuses at `significance`, each origin left out in turn: the others'
    held-out items calibrate, as they would for new data (pooled conformal p-values), and the
    left-out origin's items are scored on the rest; the mix of each round is learnt without
    it (_mix_detection). NaN with fewer than three origins."""
    return _detection(scores, codes, significance)[0]


def _detection(
    scores: np.ndarray, codes: np.ndarray, significance: float
) -> tuple[dict[str, float], list[_Round], dict[str, list[LeftOutShare]]]:
    """novelty_detection's shares, the rounds the mix learns from and, per deciding statistic,
    each left-out origin's LeftOutShare, from one pass over the left-out origins (no rounds with
    fewer than three origins)."""
    shares: dict[str, list[LeftOutShare]] = {test: [] for test in TESTS}
    rounds = []
    for out in _leave_each_origin_out(scores, codes) if scores.shape[1] >= 3 else ():
        known, strangers = out.reduced[out.known], out.reduced[~out.known]
        best = combined(strangers).argmin(axis=1)
        calibration = _statistics(known, out.centre, out.scale, out.relabel)
        strange = _statistics(strangers, out.centre, out.scale, best)
        for test in TESTS:
            p = conformal_p_values(calibration[test], strange[test])
            shares[test].append(_left_out_share(out.missing, p <= significance, out.keep[best]))
        rounds.append(_round(out))
    found = {
        test: float(np.mean([share for _, share, _ in v])) if v else float("nan")
        for test, v in shares.items()
    }
    found[MIX], shares[MIX] = _mix_detection(rounds, significance)
    return found, rounds, shares


def test_words(test: str | None) -> str:
    """A deciding statistic named for a reader: "the fit test", or what the mix weighs."""
    if test == MIX:
        return (
            "the fit, separation and contrast tests weighed together (a logistic regression"
            " learnt on the reference's origins, each left out in turn)"
        )
    return f"the {test} test"


MIX_MARGIN_ITEMS = 2
"""The mix is chosen over the best single test only when it refuses more than this many held-out
strangers more (of all origins left out in turn): it is a model learnt on those same strangers,
and each view's statistics enter it apart, so a later item whose content drifted while its shape
held is pushed out by the content's weights where a single test takes the more typical view.
Loghub with every digit of the later chunks made new, PPMd order 32: the mix, ahead by one
chunk of 60, refused 45 of 60 known chunks in that round, the separation test 6."""


TIE_ORDER = ("separation", "fit", "contrast")
"""Single tests that refuse as many held-out strangers, first to last. Logs and texts part
their origins so clearly that every test refuses every held-out stranger; separation first
then never refused fewer later strangers than fit first, known items alike (offline, 14 replays
of logs, code and texts, zstd 19, lzma 9, PPMd and zlib: Loghub's 28 missing pairs 0.936 to
0.975 with lzma 9, 0.893 to 0.902 with zstd 19; this machine's logs 0.968 to 0.993; code,
where the mix decides, unchanged). Fit came first by the history of an earlier rule."""


def _choose_test(detection: dict[str, float], strangers: int = 0) -> str:
    """The deciding statistic that refused most held-out strangers (`strangers` of them in all);
    the mix only when ahead of every single test by more than MIX_MARGIN_ITEMS of them; on ties
    in TIE_ORDER; fit without a measure."""
    measured = {t: v for t, v in detection.items() if v == v}
    if not measured:
        return "fit"
    single = max(TIE_ORDER, key=lambda t: measured.get(t, -1.0))  # the first of equals
    margin = MIX_MARGIN_ITEMS / strangers if strangers else 0.0
    if measured.get(MIX, -1.0) > measured.get(single, -1.0) + margin:
        return MIX
    return single


@dataclass(frozen=True)
class Conformity:
    """The abstention, calibrated on reference items held out as new data would come.

    For an item x with scores s(x, o) (lower is better), each origin o has

        fit(x, o) = (s(x, o) - centre[o]) / scale[o]

    0 for a typical held-out item of o, 1 for a typical held-out item of another origin scored
    on o (`centre`, `scale`: see `_profile`); and the best origin b (lowest score) has

        separation(x) = (second lowest score - s(x, b)) / scale[b]
        contrast(x)   = fit(x, b) - (median of the other origins' scores - s(x, b)) / scale[b]

    how much better b explains x than the next origin, and how typical of b x is less how much
    better b explains it than a typical other origin does (an item of an origin missing from
    the reference, explained by a kindred origin hardly better than by the rest, is strange on
    both counts). `test` is the one that decides whether b accepts x: "fit" (x is as typical
    of b as b's own held-out items), "separation" (b explains x as much better than the next
    as it does its own held-out items), "contrast" or "mix" (`mix`, every test's statistic of
    every view weighed together by a logistic regression learnt on the reference, see Mix),
    chosen on the reference: the one that refuses most held-out items of an origin left out of
    it at the significance (`detection`, see novelty_detection; the mix only by a margin, single
    tests on ties in TIE_ORDER); `left_out` gives the chosen test's share per left-out origin,
    with the kept origin most of its other items were taken for (None: all refused).
    Scores of two views (an (items, origins, views) stack: content and shape, see Scoring) pick
    b by their geometric mean, and each test's statistic is the more typical of the two views',
    each view with its own centre and scale ((origins, views) arrays): a later item of a known
    origin often drifts in one view only (a log's new package names, hosts and ids in content,
    its unchanged format in shape), so b accepts an item typical of it in either view. The cost:
    an item of a missing origin that shares a known origin's form (two daemons writing syslog
    lines) is refused only when its content is strange too. Measured with zstd level 19 when
    this was chosen over the stranger view (offline on the same scores, with the shape joining
    as Scoring now decides, the mix's margin and TIE_ORDER): the later chunks of 8 logs
    of this machine's programs (benchmarks/machine_logs.sh; all 28 pairs missing in turn) 0.850
    named right, 8.0 % refused, 0.92 unknown before (dpkg's later chunks name packages its
    earlier ones never did), 0.963, 3.7 % and 0.99 after; Loghub, all 28 pairs, 0.986, 1.4 % and
    0.98 before, 0.987, 1.3 % and 0.90 after (OpenSSH's later chunks taken for Linux's syslog);
    Rosetta Code 0.954, 4.2 % and 0.74 before, 0.965, 3.1 % and 0.79 after; 24 languages and the
    UDHR texts unchanged (the mix, which weighs each view's statistics itself, decides there).
    p-values are conformal (Vovk, Gammerman & Shafer 2005, "Algorithmic Learning in a Random
    World"): the share of held-out statistics at least as strange, label-conditional for an
    origin with 2 / significance - 1 held-out items or more (Mondrian, ch. 4.5 there), pooled
    over origins otherwise (10 items alone cannot give p below 1/11). If x comes from a known
    origin and is exchangeable with its held-out items, P(p <= significance) <= significance.
    """

    origins: tuple[str, ...]
    centre: np.ndarray
    scale: np.ndarray
    test: str
    test_calibration: np.ndarray
    codes: np.ndarray
    significance: float
    detection: tuple[tuple[str, float], ...]
    mix: Mix | None = None
    left_out: tuple[tuple[str, float, str | None], ...] = ()

    @classmethod
    def of(
        cls,
        scores: np.ndarray,
        codes: np.ndarray,
        origins: Sequence[str],
        significance: float,
        test: str | None = None,
    ) -> Conformity:
        """Calibrate on held-out scores (one row per held-out item, `codes` their origins);
        `test` (one of DECIDERS) overrides the reference's choice of the deciding statistic,
        and then nothing is chosen (`detection` is empty)."""
        check_test(test)
        centre, scale = _profile(scores, codes)
        shares: dict[str, list[LeftOutShare]] = {}
        if test is None:  # the rounds the choice was made on are those the mix learns from
            detection, rounds, shares = _detection(scores, codes, significance)
            test = _choose_test(detection, sum(len(r.strangers) for r in rounds))
        else:
            detection, rounds = {}, _rounds(scores, codes) if test == MIX else []
        mix = Mix.learn(rounds) if test == MIX else None
        if test == MIX and mix is None:
            test = "fit"  # nothing to learn a mix from, or nothing it could tell
        found = cls(
            origins=tuple(origins),
            centre=centre,
            scale=scale,
            test=test,
            test_calibration=np.empty(0),
            codes=codes,
            significance=significance,
            detection=tuple(detection.items()),
            mix=mix,
            left_out=tuple(
                (origins[missing], share, origins[kin] if kin >= 0 else None)
                for missing, share, kin in shares.get(test, [])
            ),
        )
        return replace(found, test_calibration=found.statistic(scores, codes))

    def statistic(self, scores: np.ndarray, own: np.ndarray) -> np.ndarray:
        """The deciding statistic of each row for the origin `own[row]`, larger is stranger."""
        if self.mix is not None:
            return self.mix(_features(scores, self.centre, self.scale, own))
        return _statistics(scores, self.centre, self.scale, own)[self.test]

    @property
    def label_conditional(self) -> np.ndarray:
        counts = np.bincount(self.codes, minlength=len(self.origins))
        return _label_conditional(counts, self.significance)

    def _against(self, calibration: np.ndarray, origin: int, values: np.ndarray) -> np.ndarray:
        own = self.label_conditional[origin]
        return conformal_p_values(calibration[self.codes == origin] if own else calibration, values)

    def p_values(self, scores: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Each item's p-value of the deciding test for every origin (the item taken as that
        origin's), the best origin, and the p-value for the best origin."""
        n, m = scores.shape[:2]
        p = np.zeros((n, m))
        for origin in range(m):
            own = np.full(n, origin)
            p[:, origin] = self._against(self.test_calibration, origin, self.statistic(scores, own))
        best = combined(scores).argmin(axis=1)
        return p, best, p[np.arange(n), best]


@dataclass(frozen=True)
class Abstention:
    """How items were refused: conformal p-values at `significance`, or a given score cut.

    `calibration_scores` counts the held-out reference items behind the p-values; origins in
    `label_conditional` are tested against their own items only, the others against all;
    `smallest_rate` is the smallest significance those items can support (1 / (n + 1)); `test`
    is the deciding test and `detection` why it was chosen: each test's share of held-out items
    of a left-out origin refused at the significance (see Conformity); the deciding test's share
    is `missing_refused`, what the output gives as an estimate for an origin missing from the
    reference; `left_out` the same per left-out origin, with the kept origin most of its other
    items were taken for (see Conformity), and `hardest` the origin least refused.
    """

    significance: float | None
    threshold: float | None
    calibration_scores: int = 0
    label_conditional: tuple[str, ...] = ()
    smallest_rate: float | None = None
    blocks: int = DEFAULT_BLOCKS
    test: str | None = None
    detection: tuple[tuple[str, float], ...] = ()
    left_out: tuple[tuple[str, float, str | None], ...] = ()

    @property
    def hardest(self) -> tuple[str, float, str | None] | None:
        """The left-out origin the deciding test refused least (the first of equals), with its
        share and the origin most of its items were taken for; None without a measure."""
        return min(self.left_out, key=lambda found: found[1]) if self.left_out else None

    @property
    def test_words(self) -> str | None:
        """The deciding test named for a reader (see test_words); None with a given cut."""
        return None if self.test is None else test_words(self.test)

    @property
    def missing_refused(self) -> float | None:
        """The share of a left-out origin's held-out items the deciding test refused, each of the
        reference's origins left out in turn: an estimate, not a promise, of the share of an
        origin missing from the reference that comes back unknown. None without a calibrated
        test or with fewer than three origins.

        How well it estimates (offline, the later items of benchmarks/bench_origins.py's rounds
        with one compressor each, origins missing in rotation or at random; estimate against the
        share refused): Loghub 0.96 against 1.00, logs of this machine's programs 1.00 against
        0.99, UDHR texts 1.00 against 0.99, Rosetta Code 0.88 against 0.83 (random draws 0.77
        against 0.73), 21 kinds of this machine's files 0.57 against 0.46 (random draws 0.65
        against 0.67), 24 languages 0.93 against 0.84 (random draws 0.95 against 0.93); byte
        streams of 9 formats 0.64 against 0.38 (random draws 0.50 against 0.56; bench_origins.py
        --machine-bytes, each round choosing). Per round it strays further (0.95 against 0.59
        with Common Lisp, C++, D and Emacs Lisp missing, whose kin Scheme and C stayed; 0.70
        against 0.00 with gzip streams and Java archives missing, taken for PNG images; 0.42
        against 0.90 with one kind missing): which origin is missing matters, and the reference
        knows only its own."""
        if self.test is None:
            return None
        found = dict(self.detection).get(self.test)
        return None if found is None or found != found else float(found)

    @property
    def guarantee(self) -> str:
        """What the refusals promise, and when the promise does not hold, in words."""
        if self.significance is None:
            return (
                f"an origin accepts an item whose score for it is at most {self.threshold:g}"
                " (given cut: no stated error rate)"
            )
        pooled = (
            "pooled over origins"
            if not self.label_conditional
            else f"per origin for {', '.join(self.label_conditional)}, pooled otherwise"
        )
        text = (
            f"items of origins in the reference are refused (unknown or ambiguous) at a rate of"
            f" at most {self.significance:g} (conformal p-values of {test_words(self.test)},"
            f" Vovk et al. 2005; {pooled}; from {self.calibration_scores} reference items held"
            f" out in {self.blocks} blocks), provided new items differ from the reference no more"
            " than its held-out blocks differ from the rest; data that drifts further is refused"
            " more often"
        )
        if self.smallest_rate is not None and self.significance < self.smallest_rate:
            text += (
                f"; too few reference items for that rate: the smallest possible is"
                f" {self.smallest_rate:.3g}, so no item can be refused"
            )
        missing = self.missing_refused
        text += ". Items of an origin missing from the reference are refused without a stated rate"
        if missing is None and self.detection:  # measured, but on fewer than three origins
            text += " (too few origins to estimate it)"
        elif missing is not None:
            text += (
                f": with each of the reference's origins left out in turn, the test refused"
                f" {missing:.0%} of its held-out items, a rough estimate of the share of a"
                " missing origin's items that come back unknown (lower for one with a close kin"
                " in the reference); the rest are named as the known origin they resemble most,"
                " or ambiguous"
            )
            hardest = self.hardest
            if hardest is not None and hardest[1] < missing:
                origin, share, kin = hardest
                text += f". Left out, {origin} was refused least ({share:.0%}"
                text += f"; most of its items were taken for {kin})" if kin is not None else ")"
        return text

    def as_json(self) -> dict[str, object]:
        """The fields by name and the guarantee in words; with a given cut `significance`,
        `test`, the AUCs and `smallest_rate` are null (no test was calibrated)."""
        return dict(
            json_ready(
                {
                    "significance": self.significance,
                    "threshold": self.threshold,
                    "test": self.test,
                    "test_words": self.test_words,
                    "detection": dict(self.detection),
                    "missing_refused": self.missing_refused,
                    "left_out": [
                        {"origin": origin, "refused": share, "taken_for": kin}
                        for origin, share, kin in self.left_out
                    ],
                    "calibration_scores": self.calibration_scores,
                    "label_conditional": self.label_conditional,
                    "smallest_rate": self.smallest_rate,
                    "blocks": self.blocks,
                    "guarantee": self.guarantee,
                }
            )
        )


def _abstention(conformity: Conformity, blocks: int) -> Abstention:
    significance = conformity.significance
    if not 0 < significance < 1:
        raise ValueError(f"significance must lie between 0 and 1, got {significance}")
    count = len(conformity.codes)
    smallest = 1.0 / (count + 1)
    if significance < smallest:
        warnings.warn(
            f"{count} reference items give p-values no smaller than {smallest:.3g}: at"
            f" significance {significance:g} no item can be refused; use a rate of at least"
            f" {smallest:.3g} or more reference items",
            MeasurementWarning,
            stacklevel=3,
        )
    flags = conformity.label_conditional
    return Abstention(
        significance=significance,
        threshold=None,
        calibration_scores=count,
        label_conditional=tuple(
            o for o, flag in zip(conformity.origins, flags, strict=True) if flag
        ),
        smallest_rate=smallest,
        blocks=blocks,
        test=conformity.test,
        detection=conformity.detection,
        left_out=conformity.left_out,
    )

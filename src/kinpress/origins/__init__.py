"""Classification by origin: which known source (system, language, author) an item came from.

A reference holds items whose origin is known. Two published decision rules are offered:

* ``knn``: the k nearest reference items under NCD vote, each with weight 1 / NCD, and a tie goes
  to the origin of the nearer neighbour (Jiang et al. 2023, "'Low-Resource' Text Classification:
  A Parameter-Free Classification Method with Compressors", Findings of ACL; their k = 2 ties
  counted a hit when either neighbour was right, so ties are broken by distance here instead).
* ``conditional`` (the default): each origin's reference items are joined into one corpus, and x
  is scored by how much better it compresses knowing that corpus than alone,
  score(x, origin) = C(x | corpus) / C(x), lower being better. This is the multiset view of
  Cohen & Vitanyi, "Normalized compression distance of multisets with applications" (IEEE TPAMI
  37(8), 2015): x is compared with the whole origin at once rather than with its members one by
  one. C(x | corpus) is x compressed by a compressor primed with the corpus where the compressor
  can be primed, C(corpus x) - C(corpus) otherwise.

A compressor sees only its window: a corpus longer than the window minus the longest item to score
is cut so that every reference item keeps the same number of leading bytes (longer ones are cut,
shorter ones kept whole), and a MeasurementWarning says so. Cutting keeps every item represented,
where a plain join would let the window see only the last few items.

Abstention (see Conformity): the origin with the best score accepts the item, or not, by a
conformal test (Vovk, Gammerman & Shafer 2005) calibrated on reference items held out as new data
would come: each origin's items are cut into contiguous blocks (later chunks of a log, files of
other folders), and block b of every origin is scored against the reference without block b.
Leave-one-out scores were too optimistic: neighbouring chunks of one log explain each other, and
new data drifts. The test is the fit of the item to the best origin (its score against the
scores of that origin's own held-out items, on a scale from a typical own item to a typical
stranger), the separation of the best origin from the next, their contrast, or a mix of the three
learnt on the reference (Mix), whichever refuses more held-out items of a left-out origin on this
reference. An item the best origin does not accept
is ambiguous when several origins fit it, unknown otherwise. Known items are refused at a rate of
at most the significance as long as new data drifts no more than the held-out blocks do; the
output says so, and warns when too few reference items make the asked rate impossible. A fixed
cut on the score can be given instead.

Scores that compare across origins (see Scoring): an origin whose corpus is large or generic
explains every item fairly well and would win strangers, so each origin's conditional score may
be divided by its background, the median score it gives other origins' held-out items
(Background); and each item may also be scored in its shape view, letters and digits masked
(views), the origin's score being the geometric mean of the two. The reference's held-out items
decide both: each is kept when it names significantly more of them right.

A stack of compressors (specs joined by STACK, "zstd:level=19+ppmd:order=32") scores every item
with each and decides on the views of all as on one compressor's content and shape: each
compressor's scores made comparable on its own footing, an origin's score the geometric mean over
every view, the tests calibrated on the stack of held-out scores. Drift that one kind of model
misses (a log's later chunks naming what its first ones never did) the other's views may still
see; -c auto ranks stacks beside single compressors (calibration.job).
"""

from __future__ import annotations

# Moved to items, where inputs become items; importable from here while callers move over.
from ..items import reference_items as reference_items
from .background import Background, backgrounds
from .classification import (
    DECISIONS,
    Classification,
    Concentrated,
    Evaluation,
    FoldReport,
    Prediction,
    RefusalWarning,
    classify,
    evaluate,
    fold_report,
)
from .conformal import (
    DECIDERS,
    MIX,
    TESTS,
    Abstention,
    Conformity,
    Mix,
    _auc,
    _statistics,
    conformal_p_values,
    novelty_aucs,
    novelty_detection,
)
from .estimator import CompressionClassifier
from .scores import (
    DEFAULT_BLOCKS,
    DEFAULT_SIGNIFICANCE,
    METHODS,
    STACK,
    FoldScores,
    check_reference,
    corpus_bytes,
    fold_scores,
    reference_folds,
    stacked,
)
from .unknowns import UnknownGroup, UnknownGroups, group_unknowns
from .views import Scoring, shape

__all__ = [
    "DECIDERS",
    "DECISIONS",
    "DEFAULT_BLOCKS",
    "DEFAULT_SIGNIFICANCE",
    "METHODS",
    "MIX",
    "STACK",
    "TESTS",
    "Abstention",
    "Background",
    "Classification",
    "CompressionClassifier",
    "Concentrated",
    "Conformity",
    "Evaluation",
    "FoldReport",
    "FoldScores",
    "Mix",
    "Prediction",
    "RefusalWarning",
    "Scoring",
    "UnknownGroup",
    "UnknownGroups",
    "_auc",
    "_statistics",
    "backgrounds",
    "check_reference",
    "classify",
    "conformal_p_values",
    "corpus_bytes",
    "evaluate",
    "fold_report",
    "fold_scores",
    "group_unknowns",
    "novelty_aucs",
    "novelty_detection",
    "reference_folds",
    "reference_items",
    "shape",
    "stacked",
]

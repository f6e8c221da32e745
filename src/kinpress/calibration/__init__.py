"""Calibration: measure how far each compressor is from an ideal one on controls with known answers.

Every distance here is the project's NCD by concatenation,

    NCD(x, y) = (C(ab) - C(a)) / C(b),   a, b = x, y ordered so that C(a) <= C(b)

(ties by content hash: the one conditioning rule of `kinpress.measure`; Li et al. 2004; Cilibrasi
& Vitányi 2005, "Clustering by compression", IEEE TIT 51(4)). A normal compressor gives
NCD(x, x) ≈ 0 and NCD ≈ 1 for unrelated inputs; real ones fail in known ways: once x and its
partner no longer fit the window or block, identity distances jump towards 1
(Cebrián, Alfonseca & Ortega 2005, "Common pitfalls using the normalized compression distance",
Commun. Inf. Syst. 5(4)), and a coder that only counts symbols cannot tell x from a shuffle of x.

The package in three steps, each a module, and the cached entry points:

* :mod:`.controls`: the inputs with known answers (identity, independence, composition, a
  mutation ladder, block moves), made from the user's items or synthetic text by a seed, and
  strings a short rule makes (Champernowne's and Copeland & Erdős's digits, pi, rule 30);
* :mod:`.measure`: each compressor's figures on them (bias, a size sweep of NCD(x, x) over sizes
  doubling from 1 KiB, the four properties of a normal compressor), with the rules that turn
  figures into a reliable size and a resolution;
* :mod:`.choose`: the recommendation from the controls and its reasons in words;
  :mod:`.job`: :func:`choose_for_job`, the one function ``-c auto`` calls for every job kind
  (the controls' choice checked on the job's own data); :mod:`.estimate`: the job-time
  estimates both weigh against the budget (at the calibrated throughput, on the cores assumed).
* :mod:`.auto`: :func:`resolve_auto` (``-c auto``: that choice, kept in the size cache) and
  :func:`calibration_report` (what ``kinpress calibrate`` reports, kept there too).
"""

from .auto import auto_choice, calibration_report, resolve_auto
from .choose import (
    DEFAULT_BUDGET_SECONDS,
    DEFAULT_CANDIDATES,
    calibrate,
    choose_compressor,
    holds,
)
from .controls import (
    BLOCK_COUNTS,
    DEFAULT_SEED,
    MUTATION_RATES,
    Controls,
    KnownAnswer,
    champernowne_digits,
    copeland_erdos_digits,
    known_answers,
    make_controls,
    pi_digits,
    rule30_centre_bits,
    seeded_digits,
)
from .estimate import (
    ClassifyUnit,
    ProposedPairs,
    estimate_classify_seconds,
    estimate_job_seconds,
    time_classify_unit,
)
from .job import (
    JOBS,
    LABELLED_CANDIDATES,
    LABELLED_JOBS,
    Choice,
    TaskFigures,
    choose_for_job,
    classify_unit,
)
from .measure import (
    DEFAULT_MAX_BYTES,
    RELIABLE_NCD,
    REPORT_KEYS,
    STRUCTURE_MARGIN,
    BlindSpot,
    CalibrationReport,
    CompressorCalibration,
    Normality,
    SizeSweep,
    blind_spot,
    calibrate_compressor,
    normality_violations,
    size_sweep,
)

__all__ = [
    "BLOCK_COUNTS",
    "DEFAULT_BUDGET_SECONDS",
    "DEFAULT_CANDIDATES",
    "DEFAULT_MAX_BYTES",
    "DEFAULT_SEED",
    "JOBS",
    "LABELLED_CANDIDATES",
    "LABELLED_JOBS",
    "MUTATION_RATES",
    "RELIABLE_NCD",
    "REPORT_KEYS",
    "STRUCTURE_MARGIN",
    "BlindSpot",
    "CalibrationReport",
    "Choice",
    "ClassifyUnit",
    "CompressorCalibration",
    "Controls",
    "KnownAnswer",
    "Normality",
    "ProposedPairs",
    "SizeSweep",
    "TaskFigures",
    "auto_choice",
    "blind_spot",
    "calibrate",
    "calibrate_compressor",
    "calibration_report",
    "champernowne_digits",
    "choose_compressor",
    "choose_for_job",
    "classify_unit",
    "copeland_erdos_digits",
    "estimate_classify_seconds",
    "estimate_job_seconds",
    "holds",
    "known_answers",
    "make_controls",
    "normality_violations",
    "pi_digits",
    "resolve_auto",
    "rule30_centre_bits",
    "seeded_digits",
    "size_sweep",
    "time_classify_unit",
]

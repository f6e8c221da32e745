"""Copied or derived files: which pairs of items came from one another, and how.

For a pair (a, b) the fraction of a explained by b is

    e(a|b) = 1 - C(a|b) / C(a)        (C(a|b) = C(ba) - C(b) by concatenation)

near 1 when b holds all of a, near 0 when b tells the compressor nothing about a. Both directions
are measured. A pair is related when its score

    score(a, b) = max(e(a|b), e(b|a))

is unusually high for the set: the estimated false-positive rate

    fpr(s) = (1 + #{null pairs with score >= s}) / (1 + N)

is at most `max_fpr`, where the N null pairs are the set's own items set against block-shuffled
material of items of the same kind at matching sizes (see `find_derived`).

Compression says how much two files share, not how. A related pair is derived only when the two
share stretches in the same order that span SPANNED of the smaller file and hold FOUND_IN_ORDER of
its own fingerprints (see `evidence`), as written or with names aside (`names_aside`: a copy
with consistently renamed identifiers; `pattern_print`: only fingerprints holding a name met
before); derived pairs get a relation (see `relation`). Related
pairs without such stretches are SAME_SOURCE: logs of one system, modules of one project,
documents of one template share vocabulary, templates and repeated lines scattered over both
files, which compresses well together but is not copying.

A finding is evidence of shared content, for a person to review; it is not proof that one file
was copied from the other. Files of a common template, generated from one source, or quoting the
same third file can be related without either being derived from the other.
"""

from .find import find_derived
from .null import (
    BLOCK_BYTES,
    DONOR_OVERLAP,
    MIN_KIND_DONORS,
    _donor_pools,
    _null_material,
    default_null_pairs,
    kind_of,
    line_blocks,
)
from .prefilter import (
    Prefilter,
    Proposals,
    Sketch,
    candidate_pairs,
    near_copy_groups,
    propose,
    shingle_hashes,
    sketches,
)
from .result import (
    COMMON_FILES,
    COMMON_MOST,
    COMMON_SHARE,
    COVERED,
    FOUND_IN_ORDER,
    LISTED_PAIRS,
    RELATIONS,
    SAME_SOURCE,
    SIMILAR_SIZE,
    SPANNED,
    DerivedFinding,
    DerivedReport,
    EvidenceCuts,
    Family,
    NullSummary,
    PairCounts,
    boilerplate_files,
    families,
    relation,
)

__all__ = [
    "BLOCK_BYTES",
    "COMMON_FILES",
    "COMMON_MOST",
    "COMMON_SHARE",
    "COVERED",
    "DONOR_OVERLAP",
    "FOUND_IN_ORDER",
    "LISTED_PAIRS",
    "MIN_KIND_DONORS",
    "RELATIONS",
    "SAME_SOURCE",
    "SIMILAR_SIZE",
    "SPANNED",
    "DerivedFinding",
    "DerivedReport",
    "EvidenceCuts",
    "Family",
    "NullSummary",
    "PairCounts",
    "Prefilter",
    "Proposals",
    "Sketch",
    "_donor_pools",
    "_null_material",
    "boilerplate_files",
    "candidate_pairs",
    "default_null_pairs",
    "families",
    "find_derived",
    "kind_of",
    "line_blocks",
    "near_copy_groups",
    "propose",
    "relation",
    "shingle_hashes",
    "sketches",
]

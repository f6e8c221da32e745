"""Known answers: strings a short rule makes, checked against their published values, and what
compressors see in them (calibration.controls.known_answers, calibration.measure.blind_spot)."""

from __future__ import annotations

import json
import math
from decimal import Decimal, getcontext

import pytest

from kinpress import cli
from kinpress.calibration import (
    DEFAULT_CANDIDATES,
    STRUCTURE_MARGIN,
    blind_spot,
    calibrate,
    champernowne_digits,
    copeland_erdos_digits,
    known_answers,
    pi_digits,
    rule30_centre_bits,
    seeded_digits,
)
from kinpress.calibration.auto import _report_from_json

LOG2_10 = math.log2(10)
LENGTH = 16 << 10


def _digits(text: str) -> bytes:
    return text.replace(",", "").replace(" ", "").encode()


def test_champernowne_digits_match_oeis_a033307() -> None:
    # OEIS A033307 (decimal expansion of Champernowne's constant), first terms, recalled from
    # memory: 1,2,...,9, then 10 as 1,0, 11 as 1,1, ...
    published = _digits("1,2,3,4,5,6,7,8,9,1,0,1,1,1,2,1,3,1,4,1,5,1,6,1,7,1,8,1,9,2,0,2,1")
    assert champernowne_digits(len(published)) == published
    # Independent of the generator: the digits 10 .. 99 take 180 places after the first 9, so
    # places 190 .. 192 (1-based) hold 100 (Champernowne 1933's construction).
    assert champernowne_digits(192)[189:192] == b"100"


def test_copeland_erdos_digits_match_oeis_a033308() -> None:
    # OEIS A033308 (decimal expansion of the Copeland-Erdős constant), first terms, recalled from
    # memory: the primes 2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47 written in a row.
    published = _digits("2,3,5,7,1,1,1,3,1,7,1,9,2,3,2,9,3,1,3,7,4,1,4,3,4,7")
    assert copeland_erdos_digits(len(published)) == published
    # There are 168 primes below 1000 (a standard count, recalled from memory): 4 of one digit,
    # 21 of two, 143 of three, so 4 + 42 + 429 = 475 digits, then 1009, the first prime above.
    assert copeland_erdos_digits(479)[475:479] == b"1009"


def test_pi_digits_match_oeis_a000796_and_an_independent_computation() -> None:
    # OEIS A000796 (decimal expansion of pi), the first 50 digits, recalled from memory.
    published = _digits("3 14159 26535 89793 23846 26433 83279 50288 41971 69399 37510")
    assert pi_digits(len(published)) == published
    # The Feynman point: six 9s at places 762-767 after the decimal point (recalled from memory).
    assert pi_digits(768)[762:768] == b"999999"
    mine = pi_digits(2000)
    try:
        import mpmath
    except ImportError:
        mpmath = None
    if mpmath is not None:
        # mpmath, an arbitrary-precision library with its own pi algorithm.
        with mpmath.workdps(2020):
            expected = mpmath.nstr(+mpmath.pi, 2015, strip_zeros=False).replace(".", "")
        assert mine == expected[:2000].encode()
    else:
        # Machin's formula again, in decimal floating point rather than integers.
        getcontext().prec = 2020

        def arctan_inverse(x: int) -> Decimal:
            total, power, k, sign = Decimal(0), Decimal(1) / x, 1, 1
            while power > Decimal(10) ** -2015:
                total += sign * power / k
                power /= x * x
                k, sign = k + 2, -sign
            return total

        expected = str(16 * arctan_inverse(5) - 4 * arctan_inverse(239)).replace(".", "")
        assert mine == expected[:2000].encode()


def _gibbons_pi(n: int) -> bytes:
    """Gibbons 2006, "Unbounded spigot algorithms for the digits of pi" (Amer. Math. Monthly
    113(4)), the streaming algorithm as written in the paper: a different method from Machin's."""
    q, r, t, k, m, x = 1, 0, 1, 1, 3, 3
    digits: list[int] = []
    while len(digits) < n:
        if 4 * q + r - t < m * t:
            digits.append(m)
            q, r, m = 10 * q, 10 * (r - m * t), (10 * (3 * q + r)) // t - 10 * m
        else:
            q, r, t, k, m, x = (q * k, (2 * q + r) * x, t * x, k + 1,
                                (q * (7 * k + 2) + r * x) // (t * x), x + 2)  # fmt: skip
    return "".join(map(str, digits)).encode()


def test_pi_digits_agree_with_gibbons_unbounded_spigot() -> None:
    assert pi_digits(600) == _gibbons_pi(600)


def test_rule30_centre_column_matches_oeis_a051023() -> None:
    # OEIS A051023 (central column of rule 30 from a single black cell), first 15 terms.
    published = (1, 1, 0, 1, 1, 1, 0, 0, 1, 1, 0, 0, 0, 1, 0)
    assert rule30_centre_bits(len(published)) == published
    # Independently: cells in a list, the next state read from Wolfram's rule number 30, whose
    # bit (4·left + 2·centre + right) is the new cell (Wolfram 1983's numbering).
    steps = 300
    cells = [0] * (2 * steps + 3)
    cells[steps + 1] = 1
    column = []
    for _ in range(steps):
        column.append(cells[steps + 1])
        cells = [0] + [
            (30 >> (4 * cells[i - 1] + 2 * cells[i] + cells[i + 1])) & 1
            for i in range(1, len(cells) - 1)
        ] + [0]  # fmt: skip
    assert rule30_centre_bits(steps) == tuple(column)


def test_known_answers_are_normal_in_digit_counts_yet_differ_in_rule() -> None:
    known = {k.name: k for k in known_answers()}
    assert set(known) == {"champernowne", "copeland-erdos", "pi", "rule30", "seeded"}
    for name in ("pi", "seeded"):
        counts = [known[name].data.count(str(d).encode()) for d in range(10)]
        # Each digit near a tenth of them: a digit count alone calls both random.
        assert max(abs(c / LENGTH - 0.1) for c in counts) < 0.01, name
        assert known[name].order0_bits == pytest.approx(LOG2_10, abs=0.002)
    # Normal in the limit, lopsided in a prefix: below 4,000 the leading digits 1-3 are common
    # and zeros rare; primes end in 1, 3, 7 or 9. Counting digits still finds little.
    assert 3.2 < known["champernowne"].order0_bits < LOG2_10
    assert 3.1 < known["copeland-erdos"].order0_bits < LOG2_10
    assert known["rule30"].order0_bits == pytest.approx(1.0, abs=0.001)
    assert len(known["rule30"].data) == known["rule30"].symbols // 8
    assert seeded_digits(100, 7) == seeded_digits(100, 7) != seeded_digits(100, 8)


@pytest.mark.parametrize("spec", ["lzma:level=9", "zstd:level=19"])
def test_lz_compressors_code_champernowne_clearly_below_log2_10(spec: str) -> None:
    # Measured here: lzma about 0.8, zstd level 19 about 1.5 bits a digit on 16,384 digits. The
    # string is normal (Champernowne 1933), so an order-0 coder spends log2(10) = 3.3219 bits a
    # digit; runs of counting (…1234 1235 1236…) repeat with one digit changed, which LZ finds.
    # A margin of one whole bit a digit.
    spot = blind_spot(spec, known_answers()[0])
    assert spot.control == "champernowne"
    assert spot.bits_per_symbol < LOG2_10 - 1.0
    assert spot.sees_structure


@pytest.mark.parametrize("spec", DEFAULT_CANDIDATES)
def test_no_compressor_codes_pi_or_rule30_well_below_the_random_rate(spec: str) -> None:
    # Pi's digits pass every statistical test tried (conjectured normal); in 16,384 uniform digits
    # the digit counts' empirical entropy falls short of log2(10) by about 9 / (2n ln 2) = 0.0004
    # bits, and the longest repeat is about 2·log10(n) = 8.4 digits, too short to pay for an LZ
    # match, so without the rule no coder gets 0.05 bits a digit below. Likewise 0.05 bits a bit
    # for rule 30's centre column, which has passed randomness tests (Wolfram 1983).
    spots = {s.control: s for s in (blind_spot(spec, k) for k in known_answers())}
    assert spots["pi"].bits_per_symbol > LOG2_10 - 0.05
    assert spots["seeded"].bits_per_symbol > LOG2_10 - 0.05
    assert spots["rule30"].bits_per_symbol > 1.0 - 0.05
    assert not any(spots[name].sees_structure for name in ("pi", "rule30", "seeded"))
    assert STRUCTURE_MARGIN * LOG2_10 > 0.05  # the verdict's margin is wider than these checks


def test_report_json_carries_the_known_answers_and_reads_back() -> None:
    report = calibrate(None, ["zlib:level=6", "lzma:level=6"], samples=2, sample_bytes=2048,
                       max_bytes=1 << 14)  # fmt: skip
    document = json.loads(json.dumps(report.as_json()))
    for row in document["compressors"]:
        spots = {s["control"]: s for s in row["blind_spots"]}
        assert set(spots) == {"champernowne", "copeland-erdos", "pi", "rule30", "seeded"}
        assert spots["pi"]["uniform_bits"] == pytest.approx(LOG2_10)
        assert spots["rule30"]["uniform_bits"] == 1.0
        assert spots["pi"]["kind"] == "random-looking"
    lzma = {s["control"]: s for s in document["compressors"][1]["blind_spots"]}
    assert lzma["champernowne"]["sees_structure"] and not lzma["pi"]["sees_structure"]
    assert _report_from_json(json.dumps(report.as_json())) == report


def test_calibrate_text_says_a_distance_near_1_is_not_proof_of_no_relation(
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert cli.main(["calibrate", "-c", "lzma:level=6", "--max-bytes", "16384", "--no-cache",
                     "--quiet"]) == 0  # fmt: skip
    out = capsys.readouterr().out
    assert "known answers" in out
    assert "does not prove two items unrelated" in out
    main_row, known_row = [line for line in out.splitlines() if line.startswith("lzma")]
    assert "*" in known_row and "*" not in main_row  # Champernowne seen as structured

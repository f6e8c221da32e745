"""The one way sizes and durations are written: units, rounding, the boundaries between them."""

from __future__ import annotations

import doctest

import pytest

from kinpress import units
from kinpress.units import duration_text, size_text


@pytest.mark.parametrize(
    ("n", "text"),
    [
        (0, "0 B"),
        (512, "512 B"),
        (1000, "1 kB"),
        (1024, "1 KiB"),
        (32768, "32 KiB"),  # deflate's window, RFC 1951
        (900_000, "900 kB"),  # bzip2's block at -9, bzip2 manual
        (64 << 20, "64 MiB"),
        (3 << 30, "3 GiB"),
        (1_500_000, "1.5 MB"),
        (1_234_567, "1.23 MB"),
        (999_999, "1 MB"),
        (2.5e12, "2.5 TB"),
        (2_048_000, "2.05 MB"),  # 2000 KiB: whole, but not fewer than 1024 of the unit
    ],
)
def test_sizes_are_whole_binary_units_where_exact_else_three_figures_in_decimal(
    n: float, text: str
) -> None:
    assert size_text(n) == text


@pytest.mark.parametrize(
    ("seconds", "text"),
    [(0.4, "0 s"), (42, "42 s"), (89, "89 s"), (90, "2 min"), (600, "10 min"),
     (5399, "90 min"), (5400, "1.5 h"), (7200, "2.0 h")],
)  # fmt: skip
def test_durations_switch_unit_at_ninety(seconds: float, text: str) -> None:
    assert duration_text(seconds) == text


def test_the_docstring_examples_hold() -> None:
    assert doctest.testmod(units).failed == 0

"""The ISO 3382-2 measurement grade from the positions used.

Least numbers per grade, ISO 3382-2:2008, Table 1 (from memory): survey 1 source, 2
microphones, 2 combinations; engineering 2, 2, 6; precision 2, 3, 12.
"""

from __future__ import annotations

import pytest

from roomconv.report.grade import measurement_grade


def _combos(sources: int, receivers: int):
    return [(f"S{s}", f"R{r}") for s in range(1, sources + 1) for r in range(1, receivers + 1)]


@pytest.mark.parametrize(
    ("sources", "receivers", "grade"),
    [
        (1, 1, None),  # one combination: below survey (Table 1, from memory)
        (1, 2, "survey"),  # 1 source × 2 mics = 2 combinations
        (1, 12, "survey"),  # many mics, but engineering needs 2 sources
        (2, 2, "survey"),  # 4 combinations < 6
        (2, 3, "engineering"),  # 6 combinations, 2 sources, 3 mics
        (3, 3, "engineering"),  # 9 < 12
        (2, 6, "precision"),  # 12 combinations, 2 sources, ≥ 3 mics
        (4, 3, "precision"),
    ],
)
def test_grade_table(sources, receivers, grade):
    assert measurement_grade(_combos(sources, receivers)).name == grade


def test_next_grade_says_what_is_missing():
    g = measurement_grade(_combos(2, 3))  # engineering; precision needs 12 combinations
    assert (g.name, g.next_name, g.needed) == ("engineering", "precision", ("6 more combinations",))
    top = measurement_grade(_combos(2, 6))
    assert top.next_name is None and top.needed == ()


def test_repeated_combinations_count_once():
    # Table 1 counts source–microphone combinations, not files (from memory).
    g = measurement_grade([("S1", "R1"), ("S1", "R1"), ("S1", "R2")])
    assert (g.combinations, g.name) == (2, "survey")

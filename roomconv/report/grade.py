"""The ISO 3382-2 measurement grade (survey, engineering, precision) from the source and
receiver positions and combinations actually used."""

from __future__ import annotations

from dataclasses import dataclass

#: ISO 3382-2:2008, Table 1 (from memory): the least numbers of source positions, microphone
#: positions and source–microphone combinations for each grade. With the integrated impulse
#: response method one decay per combination is enough at every grade (same clause, from
#: memory).
GRADES = (
    ("survey", 1, 2, 2),
    ("engineering", 2, 2, 6),
    ("precision", 2, 3, 12),
)


@dataclass(frozen=True)
class Grade:
    """The grade reached (``None``: below survey) and what the next grade needs.

    Examples
    --------
    >>> g = measurement_grade([("S1", "R1"), ("S1", "R2")])
    >>> g.name, g.next_name, g.needed
    ('survey', 'engineering', ('1 more source position', '4 more combinations'))
    """

    name: str | None
    sources: int
    receivers: int
    combinations: int
    next_name: str | None
    #: Human-readable shortfalls for the next grade, empty at precision.
    needed: tuple[str, ...]


def measurement_grade(combinations) -> Grade:
    """Grade of a set of (source id, receiver id) combinations.

    Parameters
    ----------
    combinations : iterable of (str, str)
        The source–receiver combinations that gave a usable decay; repeats count once.

    Returns
    -------
    Grade

    References
    ----------
    ISO 3382-2:2008, Acoustics — Measurement of room acoustic parameters — Part 2:
    Reverberation time in ordinary rooms, clause 4.2 and Table 1 (numbers from memory).

    Examples
    --------
    >>> g = measurement_grade([("S1", "R1"), ("S1", "R2"), ("S1", "R3")])
    >>> g.name, g.next_name, g.needed
    ('survey', 'engineering', ('1 more source position', '3 more combinations'))
    """
    combos = set(combinations)
    ns = len({s for s, _ in combos})
    nr = len({r for _, r in combos})
    nc = len(combos)
    reached = None
    for name, s, r, c in GRADES:
        if ns >= s and nr >= r and nc >= c:
            reached = name
    names = [g[0] for g in GRADES]
    nxt = (
        names[0]
        if reached is None
        else (names[names.index(reached) + 1] if reached != names[-1] else None)
    )
    needed: list[str] = []
    if nxt is not None:
        _, s, r, c = GRADES[names.index(nxt)]
        for have, want, what in (
            (ns, s, "source position"),
            (nr, r, "receiver position"),
            (nc, c, "combination"),
        ):
            if have < want:
                k = want - have
                needed.append(f"{k} more {what}{'s' if k > 1 else ''}")
    return Grade(reached, ns, nr, nc, nxt, tuple(needed))

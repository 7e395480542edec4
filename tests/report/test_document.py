"""The report's own arithmetic: single numbers with their uncertainty and spread, and the
comparison with a target range, on small hand-made documents."""

from __future__ import annotations

import math

import pytest

from roomconv.report.document import single_number_rows, target_rows
from roomconv.study import Targets


def _stat(mean, std=None, u=None, verdict="ok"):
    return {"mean": mean, "std": std, "n": 2, "uncertainty": u, "verdict": verdict}


def _doc(t500=(1.0, 1.2), t1k=(1.1, 1.3), u=(0.03, 0.04)):
    metrics = ("edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_ms")
    avg, positions = [], [{"position": f"S1-R{i + 1}", "bands": []} for i in range(2)]
    for band, vals, ub in ((500, t500, u[0]), (1000, t1k, u[1])):
        row = {"band_hz": band}
        for m in metrics:
            row[m] = _stat(None)
        row["t30_s"] = _stat(sum(vals) / 2, None, ub)
        avg.append(row)
        for p, v in zip(positions, vals, strict=True):
            p["bands"].append({"band_hz": band, "t30_s": v})
    sn = {"t30_mid_s": (sum(t500) + sum(t1k)) / 4}
    return {
        "settings": {"bands": "octave"},
        "positions": positions,
        "average": {
            "bands": avg,
            "single_numbers": sn,
            "single_number_verdicts": {"t30_mid_s": "ok"},
        },
    }


def test_single_number_uncertainty_and_spread():
    (row,) = single_number_rows(_doc())
    assert row["value"] == pytest.approx(1.15)
    # Mean of two uncorrelated band values: u = sqrt(u1² + u2²)/2 (JCGM 100:2008, 5.1.2,
    # from memory).
    assert row["uncertainty"] == pytest.approx(math.sqrt(0.03**2 + 0.04**2) / 2)
    # Positions' own mid values 1.05 and 1.25: sample standard deviation 0.1414 (numpy's
    # std with ddof=1 of the same two numbers).
    assert row["spread"] == pytest.approx(math.sqrt(2) * 0.1)
    assert row["text"] == "1.15"


def test_single_number_without_every_band_uncertainty_has_none():
    doc = _doc()
    doc["average"]["bands"][1]["t30_s"]["uncertainty"] = None
    (row,) = single_number_rows(doc)
    assert row["uncertainty"] is None


@pytest.mark.parametrize(
    ("mean", "u", "result"),
    [
        # Target 1.00 s, −10 %/+10 % → 0.90–1.10 s (plain arithmetic).
        (1.00, 0.02, "within"),
        (1.09, 0.02, "within (at the limit, within its uncertainty)"),
        (1.12, 0.01, "above"),
        (1.11, 0.02, "above (at the limit, within its uncertainty)"),
        (0.85, 0.02, "below"),
    ],
)
def test_target_comparison(mean, u, result):
    doc = {"average": {"bands": [{"band_hz": 500, "t30_s": _stat(mean, None, u)}]}}
    (row,) = target_rows(doc, Targets("t30", {500.0: 1.0}, (-10.0, 10.0)))
    assert row[2] == "0.90–1.10"
    assert row[-1] == result


def test_target_band_without_a_value_is_not_evaluated_and_caution_is_kept():
    doc = {
        "average": {
            "bands": [
                {"band_hz": 500, "t30_s": _stat(None)},
                {"band_hz": 1000, "t30_s": _stat(1.0, None, 0.01, "caution")},
            ]
        }
    }
    rows = target_rows(doc, Targets("t30", {500.0: 1.0, 1000.0: 1.0}, (-10.0, 10.0)))
    assert rows[0][-1] == "not evaluated"
    assert rows[1][-1] == "within — caution"

"""Accuracy of the analysis on a grid of synthetic responses whose truth is known.

    python -m benchmarks.accuracy               # the full grid (160 responses)
    python -m benchmarks.accuracy --quick       # 40 responses, T up to 3 s
    python -m benchmarks.accuracy --case 17 -v  # one case, every value
    python -m benchmarks.accuracy --markdown    # the table for the README
    python -m benchmarks.accuracy --json values.json   # every value, with its settings
    python -m benchmarks.accuracy --strict      # exit 1 when any value is silently wrong

Each value of EDT, T20, T30, C50, C80, D50 and Ts that ``room_parameters`` returns is set
against the truth of its own realization (see :mod:`benchmarks.accuracy_cases`) and counted
as: within the just-noticeable difference (JND) of ISO 3382-1:2009 Table A.1 (from memory:
5 % for decay times, 1 dB for C50/C80, 0.05 for D50, 10 ms for Ts); within the JND but
flagged; outside it and flagged (verdict not "ok"); null (None, or the case refused with
``InputError``; a case on which the analysis crashes is also counted null, and listed); or
**silently wrong** (outside the JND with verdict "ok"). A result without verdicts counts as
"ok". This is a benchmark that reports: the exit status is 0 unless ``--strict`` is given.
"""

from __future__ import annotations

import argparse
import itertools
import math
import os
import sys
import time
from concurrent.futures import ProcessPoolExecutor

from benchmarks.accuracy_cases import (
    JND,
    METRICS,
    OCTAVE_NOMINAL,
    THIRD_NOMINAL,
    Case,
    band_edges,
    band_inr_db,
    build,
    classify,
    closed_forms,
    error_in_jnd,
    make_grid,
    truth_ranges,
)

STATUSES = ("within", "within_flagged", "flagged", "null", "silent")
HEAD = {
    "within": "within JND",
    "within_flagged": "within JND, flagged",
    "flagged": "flagged",
    "null": "null",
    "silent": "silently wrong",
}
LABEL = {
    "edt_s": "EDT",
    "t20_s": "T20",
    "t30_s": "T30",
    "c50_db": "C50",
    "c80_db": "C80",
    "d50": "D50",
    "ts_ms": "Ts",
}


def verdict_of(result, metric: str) -> str:
    """The verdict of one value: its own, else its band's, else "ok" (no verdicts yet)."""
    per_value = getattr(result, "value_verdicts", None) or {}
    short = metric.rsplit("_", 1)[0]
    for key in (metric, short):
        if key in per_value:
            return str(per_value[key])
    return str(getattr(result, "verdict", None) or "ok")


def _band_key(result):
    return "wideband" if result.band_hz is None else result.band_hz


def _nominal(case: Case, band_hz):
    """The band's nominal frequency in our own table, or None if it is not there."""
    table = OCTAVE_NOMINAL if case.bands == "octave" else THIRD_NOMINAL
    for nom in table:
        if math.isclose(float(nom), float(band_hz), rel_tol=1e-6):
            return nom
    return None


def evaluate_case(case: Case) -> dict:
    """Run the analysis on one case and classify every value against its truth.

    Returns ``{"case": settings, "records": [...], "seconds": s, "refused": msg or None}``.
    """
    from roomconv.analysis.parameters import room_parameters
    from roomconv.errors import InputError

    t_start = time.perf_counter()
    built = build(case)
    t_built = time.perf_counter()
    refused = crashed = None
    try:
        bands, wide, _notes = room_parameters(built.measured, case.rate, bands=case.bands)
        results = list(bands) + [wide]
    except InputError as exc:
        refused = str(exc)
        results = []
    except Exception as exc:  # noqa: BLE001 - a crash is reported, not allowed to stop the run
        crashed = f"{type(exc).__name__}: {exc}"
        results = []
    t_analysis = time.perf_counter() - t_built

    if refused is not None or crashed is not None:
        from roomconv.analysis.bands import bands_for_rate

        keys = [b.nominal for b in bands_for_rate(case.bands, case.rate)[0]] + ["wideband"]
        rows = [(k, None) for k in keys]
    else:
        rows = [(_band_key(r), r) for r in results]
    wanted = [_nominal(case, k) for k, _ in rows if k != "wideband"]
    truth, ranges = truth_ranges(built, [n for n in wanted if n is not None])

    records = []
    for key, res in rows:
        nom = "wideband" if key == "wideband" else _nominal(case, key)
        if nom is None or nom not in truth:
            continue
        if nom == "wideband":
            bw = None
        else:
            _, f1, f2 = band_edges(nom, case.bands)
            bw = f2 - f1
        for m in METRICS:
            tv = truth[nom][m]
            if not (math.isfinite(tv) and all(map(math.isfinite, ranges[nom][m]))):
                continue
            value = None if res is None else getattr(res, m, None)
            if value is not None:
                value = float(value)
                if not math.isfinite(value):
                    value = None
            verdict = ("refused" if refused else "crashed") if res is None else verdict_of(res, m)
            span = ranges[nom][m]
            status = classify(m, value, span, verdict)
            rec = {
                "case": case.index,
                "band": nom,
                "metric": m,
                "truth": tv,
                "truth_low": span[0],
                "truth_high": span[1],
                "truth_spread_jnd": abs(error_in_jnd(m, span[1], span[0])),
                "value": value,
                "verdict": verdict,
                "status": status,
                "error_jnd": None if value is None else error_in_jnd(m, value, span),
                "bt": None if bw is None else bw * case.t_s,
                "band_inr_db": band_inr_db(case, None if nom == "wideband" else nom),
            }
            if res is not None:
                rec["warning_codes"] = list(getattr(res, "warning_codes", []) or [])
                if value is None:
                    rec["reason"] = "; ".join(res.warnings)[:300] or "no reason given"
            elif refused is not None:
                rec["reason"] = "refused: " + refused
            else:
                rec["reason"] = "crashed: " + crashed
            records.append(rec)
    return {
        "case": case.as_dict(),
        "records": records,
        "refused": refused,
        "crashed": crashed,
        "seconds": time.perf_counter() - t_start,
        "analysis_seconds": t_analysis,
    }


def yardstick_check(cases, results, min_bt: float = 300.0, edt_max_drr_db: float = -6.0) -> dict:
    """Mean deviation (JND units) of the realization truths from the closed forms, over
    single-slope cases' bands with B·T ≥ ``min_bt``; guards the construction itself.

    EDT only where DRR ≤ ``edt_max_drr_db`` (the direct sound's step at the start of the
    decay under 1 dB): below a larger step the EDT range holds only a few dB of decay, and
    −60/slope of a noisy slope is biased upwards, so the ensemble EDT = T is no longer the
    mean of one realization's EDT.
    """
    by_case = {c.index: c for c in cases}
    dev = {m: [] for m in METRICS}
    for res in results:
        case = by_case[res["case"]["index"]]
        if case.slope != "single":
            continue
        cf = closed_forms(case)
        seen = set()
        for r in res["records"]:
            if r["band"] == "wideband" or (r["bt"] or 0) < min_bt:
                continue
            key = (r["band"], r["metric"])
            if key in seen or (r["metric"] == "edt_s" and case.drr_db > edt_max_drr_db):
                continue
            seen.add(key)
            dev[r["metric"]].append(error_in_jnd(r["metric"], r["truth"], cf[r["metric"]]))
    return {m: (sum(v) / len(v) if v else float("nan"), len(v)) for m, v in dev.items()}


def tally(records) -> dict:
    counts = {m: dict.fromkeys(STATUSES, 0) for m in METRICS}
    for r in records:
        counts[r["metric"]][r["status"]] += 1
    counts["all"] = {s: sum(counts[m][s] for m in METRICS) for s in STATUSES}
    return counts


def table_text(counts, markdown: bool = False) -> str:
    cols = ["parameter", "values"] + [HEAD[s] for s in STATUSES]
    rows = []
    for m in list(METRICS) + ["all"]:
        c = counts[m]
        rows.append([LABEL.get(m, "all"), str(sum(c.values()))] + [str(c[s]) for s in STATUSES])
    if markdown:
        lines = ["| " + " | ".join(cols) + " |", "|" + "---|" * len(cols)]
        lines += ["| " + " | ".join(r) + " |" for r in rows]
        return "\n".join(lines)
    widths = [max(len(cols[i]), *(len(r[i]) for r in rows)) for i in range(len(cols))]

    def fmt(r):
        return "  ".join(
            x.rjust(w) if i else x.ljust(w) for i, (x, w) in enumerate(zip(r, widths, strict=True))
        )

    return "\n".join([fmt(cols)] + [fmt(r) for r in rows])


def _bucket(value, edges, fmt):
    """(position, label) of the interval [lo, hi) of ``edges`` that holds ``value``."""
    for i, (lo, hi) in enumerate(itertools.pairwise(edges)):
        if lo <= value < hi:
            return i, fmt(lo, hi)
    return len(edges), "other"


def breakdown_text(records, cases, markdown: bool = False) -> str:
    """Silently wrong values against the conditions they came from (share of the values)."""
    by_case = {c.index: c for c in cases}
    inf = float("inf")
    axes = {
        "band INR, dB": lambda r, c: _bucket(
            r["band_inr_db"],
            [-inf, 35, 50, 65, inf],
            lambda a, b: f"<{b:g}" if a == -inf else (f"≥{a:g}" if b == inf else f"{a:g}–{b:g}"),
        ),
        "B·T": lambda r, c: (
            (99, "wideband")
            if r["bt"] is None
            else _bucket(
                r["bt"],
                [0, 16, 50, 200, inf],
                lambda a, b: f"≥{a:g}" if b == inf else f"{a:g}–{b:g}",
            )
        ),
        "window/T": lambda r, c: _bucket(
            c.window_factor,
            [0, 2, 3.5, inf],
            lambda a, b: f"≥{a:g}" if b == inf else f"{a:g}–{b:g}",
        ),
        "rate": lambda r, c: (c.rate, f"{c.rate / 1000:g} kHz"),
        "slope": lambda r, c: (c.slope, c.slope),
        "noise": lambda r, c: (c.noise, c.noise),
    }
    lines = []
    for name, key in axes.items():
        tot: dict[tuple, list[int]] = {}
        for r in records:
            k = key(r, by_case[r["case"]])
            t = tot.setdefault(k, [0, 0])
            t[0] += 1
            t[1] += r["status"] == "silent"
        parts = [f"{k[1]} {v[1]}/{v[0]}" for k, v in sorted(tot.items())]
        lines.append(("- " if markdown else "  ") + f"{name}: " + ", ".join(parts))
    return "\n".join(lines)


def worst_text(records, cases, n: int, markdown: bool = False) -> str:
    by_case = {c.index: c for c in cases}
    # One line per case (its worst value), so the list shows n different settings.
    per_case: dict[int, list] = {}
    for r in records:
        if r["status"] == "silent":
            per_case.setdefault(r["case"], []).append(r)
    if not per_case:
        return "no silently wrong values"
    worst = sorted(
        ((max(v, key=lambda r: abs(r["error_jnd"])), len(v)) for v in per_case.values()),
        key=lambda rv: -abs(rv[0]["error_jnd"]),
    )[:n]
    out = []
    for r, count in worst:
        band = "wideband" if r["band"] == "wideband" else f"{r['band']:g} Hz"
        unit = (
            "s"
            if r["metric"].endswith("_s")
            else ("ms" if r["metric"] == "ts_ms" else ("dB" if r["metric"].endswith("db") else ""))
        )
        truth = (
            f"{r['truth']:.3f}"
            if r["truth_low"] == r["truth_high"]
            else f"{r['truth_low']:.3f}…{r['truth_high']:.3f}"
        )
        line = (
            f"{LABEL[r['metric']]} {band}: {r['value']:.3f} {unit} (truth {truth}, "
            f"{r['error_jnd']:+.1f} JND; band INR {r['band_inr_db']:.0f} dB"
            + (f", B·T {r['bt']:.0f}" if r["bt"] else "")
            + ") — "
            + by_case[r["case"]].describe()
            + f"; {count} silently wrong value(s) in this case"
        )
        out.append(("- " if markdown else "  ") + line)
    return "\n".join(out)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(
        prog="python -m benchmarks.accuracy",
        description=__doc__,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--seed", type=int, default=2026, help="grid seed (default 2026)")
    p.add_argument(
        "--cases", type=int, default=None, help="number of responses (default 160; 40 with --quick)"
    )
    p.add_argument("--quick", action="store_true", help="a smaller grid, T up to 3 s")
    p.add_argument(
        "--case",
        type=int,
        action="append",
        default=None,
        help="run only this case index (repeatable)",
    )
    p.add_argument(
        "--jobs",
        type=int,
        default=min(2, os.cpu_count() or 1),
        help="worker processes (default: up to 2)",
    )
    p.add_argument("--worst", type=int, default=10, help="silently wrong cases to list")
    p.add_argument("--markdown", action="store_true", help="print the tables as Markdown")
    p.add_argument("--json", metavar="OUT", help="write every value's record to this file")
    p.add_argument("--force", action="store_true", help="let --json replace an existing file")
    p.add_argument("--strict", action="store_true", help="exit 1 if any value is silently wrong")
    p.add_argument("-v", "--verbose", action="store_true", help="print every value of --case")
    a = p.parse_args(argv)

    n = a.cases if a.cases is not None else (40 if a.quick else 160)
    if n < 1 or a.jobs < 1:
        print("--cases and --jobs: give a number of at least 1", file=sys.stderr)
        return 2
    grid = make_grid(n, a.seed, t_range=(0.2, 3.0) if a.quick else (0.2, 8.0))
    cases = grid
    if a.case:
        bad = [i for i in a.case if not 0 <= i < n]
        if bad:
            print(
                f"--case {bad[0]}: no such case (the grid has {n}, numbered 0–{n - 1}; "
                "give the same --seed/--cases/--quick as the run that listed it)",
                file=sys.stderr,
            )
            return 2
        cases = [grid[i] for i in a.case]
    if a.json:
        from roomconv.audio import check_output
        from roomconv.errors import InputError

        try:
            check_output(a.json, force=a.force)
        except InputError as exc:
            print(f"--json: {exc}", file=sys.stderr)
            return 2

    t0 = time.perf_counter()
    results = []
    if a.jobs > 1 and len(cases) > 1:
        # Long responses first, so that no worker is left with one at the end.
        order = sorted(cases, key=lambda c: -c.t_s * c.rate * c.window_factor)
        with ProcessPoolExecutor(a.jobs) as pool:
            for i, res in enumerate(pool.map(evaluate_case, order, chunksize=1)):
                results.append(res)
                print(f"\r{i + 1}/{len(cases)} responses", end="", file=sys.stderr, flush=True)
    else:
        for i, c in enumerate(cases):
            results.append(evaluate_case(c))
            print(f"\r{i + 1}/{len(cases)} responses", end="", file=sys.stderr, flush=True)
    print(file=sys.stderr)
    wall = time.perf_counter() - t0
    results.sort(key=lambda r: r["case"]["index"])
    records = [r for res in results for r in res["records"]]
    counts = tally(records)

    md = a.markdown
    print(
        ("### " if md else "") + f"Accuracy of the analysis: {len(cases)} synthetic responses, "
        f"{len(records)} values (seed {a.seed}{', quick' if a.quick else ''})"
    )
    print()
    print(table_text(counts, md))
    print()
    spread = [r for r in records if r["truth_spread_jnd"] > 1.0]
    print(
        f"Values whose truth depends on the band filter's shape by more than a JND (small "
        f"B·T; scored against the whole range): {len(spread)}, of which "
        f"{sum(r['verdict'] == 'ok' and r['value'] is not None for r in spread)} "
        "came with verdict ok."
    )
    refused = [r for r in results if r["refused"]]
    if refused:
        print(f"Refused responses (InputError; all their values counted null): {len(refused)}")
    crashed = [r for r in results if r["crashed"]]
    if crashed:
        print(f"Responses on which the analysis crashed (values counted null): {len(crashed)}")
        for r in crashed[: a.worst]:
            print(("- " if md else "  ") + Case(**r["case"]).describe() + " — " + r["crashed"])
    print(
        ("**" if md else "")
        + "Silently wrong values by condition (silent/values)"
        + ("**" if md else "")
        + ":"
    )
    print(breakdown_text(records, cases, md))
    print()
    rerun = (
        f"--seed {a.seed}"
        + (" --quick" if a.quick else "")
        + (f" --cases {a.cases}" if a.cases is not None else "")
    )
    print(
        ("**" if md else "") + f"Worst silently wrong cases ({counts['all']['silent']} values "
        f"in all; rerun one with {rerun} --case N -v)" + ("**" if md else "") + ":"
    )
    print(worst_text(records, cases, a.worst, md))
    print()
    ys = yardstick_check(cases, results)
    print(
        "Yardstick: mean deviation of the realization truths from the closed forms "
        "(single slope, B·T ≥ 300; EDT where DRR ≤ −6 dB), in JND: "
        + ", ".join(f"{LABEL[m]} {v:+.2f} (n={k})" for m, (v, k) in ys.items() if k)
    )
    cpu = sum(r["seconds"] for r in results)
    print(
        f"Run time: {wall:.0f} s wall, {cpu:.0f} s in the workers ({a.jobs} job(s)); "
        f"analysis {sum(r['analysis_seconds'] for r in results):.0f} s of it."
    )

    if a.verbose:
        for res in results:
            print()
            print(Case(**res["case"]).describe())
            for r in res["records"]:
                v = "None" if r["value"] is None else f"{r['value']:.4g}"
                print(
                    f"  {r['band']!s:>8} {LABEL[r['metric']]:>4} value {v:>9} truth "
                    f"{r['truth']:.4g}  {r['verdict']:<13} {r['status']}"
                    + (f"  ({r['reason'][:120]})" if r.get("reason") else "")
                )
    if a.json:
        from roomconv.audio import write_json

        write_json(
            a.json,
            {
                "seed": a.seed,
                "cases": [r["case"] for r in results],
                "jnd": {m: list(v) for m, v in JND.items()},
                "records": records,
            },
            force=a.force,
        )
        print(f"wrote {a.json}")
    if a.strict and counts["all"]["silent"]:
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())

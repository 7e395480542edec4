"""Checks for numbers a user typed or a side file held, before any work is done.

Pure functions: each takes a value (or its text) and a plain description of what the value
means ("sweep duration", "output gain"), returns the cleaned value, or raises
:class:`~roomconv.errors.InputError` with a message that says what is wrong and what is
accepted. The messages never name command-line options: the command line adds the option's
name in front, a library caller sees the value's meaning.

Memory budgets: a value that sets a buffer size (a duration, a delay, a latency) is turned
into samples × channels × bytes and refused when that exceeds :data:`MEMORY_BUDGET_BYTES`,
with the amount it would have needed, before anything is allocated.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

from .errors import InputError

__all__ = [
    "MEMORY_BUDGET_BYTES",
    "RATE_MIN",
    "RATE_MAX",
    "MAX_CHANNEL",
    "parse_number",
    "finite",
    "in_range",
    "positive",
    "non_negative",
    "count",
    "sample_rate",
    "channel_list",
    "human_bytes",
    "memory_budget",
    "seconds_budget",
    "all_finite",
    "parse_band_values",
]

#: Largest single buffer roomconv agrees to allocate for one signal (float64), bytes.
MEMORY_BUDGET_BYTES = 2 * 1024**3
#: Sample rates accepted for anything roomconv writes or plays, Hz. 8 kHz is telephone band,
#: 384 kHz the highest rate common audio interfaces offer (common practice).
RATE_MIN, RATE_MAX = 8000, 384000
#: Highest 1-based channel number accepted on a sound card.
MAX_CHANNEL = 256


def _fmt(v) -> str:
    return f"{v:g}" if isinstance(v, float) else str(v)


def parse_number(text, what: str) -> float:
    """A number from text (or a number), without judging it yet.

    Parameters
    ----------
    text : str or float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.

    Returns
    -------
    float
        NaN and ±inf pass through (see :func:`finite`).

    Raises
    ------
    InputError
        When the text is not a number.

    Examples
    --------
    >>> parse_number(" 2.5 ", "gain")
    2.5
    >>> parse_number("loud", "gain")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: gain 'loud' is not a number
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        return float(text)
    try:
        return float(str(text).strip())
    except ValueError:
        raise InputError(f"{what} '{text}' is not a number") from None


def finite(value, what: str) -> float:
    """``value`` as a float, refused when NaN or infinite.

    Parameters
    ----------
    value : str or float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.

    Returns
    -------
    float

    Examples
    --------
    >>> finite("1e3", "duration")
    1000.0
    >>> finite("nan", "duration")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: duration nan is not a finite number
    """
    v = parse_number(value, what)
    if not math.isfinite(v):
        raise InputError(f"{what} {_fmt(v)} is not a finite number")
    return v


def in_range(
    value,
    what: str,
    lo: float | None = None,
    hi: float | None = None,
    *,
    unit: str = "",
    lo_open: bool = False,
    hi_open: bool = False,
) -> float:
    """A finite number within ``lo``..``hi`` (closed unless ``lo_open``/``hi_open``).

    Parameters
    ----------
    value : str or float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    lo, hi : float, optional
        Bounds, in the value's unit; None for no bound.
    unit : str
        The unit, shown in a refusal.
    lo_open, hi_open : bool
        Exclude the bound itself.

    Returns
    -------
    float

    Examples
    --------
    >>> in_range("0.25", "wet/dry mix", 0.0, 1.0)
    0.25
    >>> in_range(70, "output gain", -100, 60, unit="dB")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: output gain 70 dB is out of range (accepted: from -100 to 60 dB)
    """
    v = finite(value, what)
    u = f" {unit}" if unit else ""
    below = lo is not None and (v <= lo if lo_open else v < lo)
    above = hi is not None and (v >= hi if hi_open else v > hi)
    if below or above:
        if lo is not None and hi is not None:
            rng = (
                f"{'above' if lo_open else 'from'} {_fmt(lo)} "
                f"{'and below' if hi_open else 'to'} {_fmt(hi)}{u}"
            )
        elif lo is not None:
            rng = f"{'above' if lo_open else 'at least'} {_fmt(lo)}{u}"
        else:
            rng = f"{'below' if hi_open else 'at most'} {_fmt(hi)}{u}"
        raise InputError(f"{what} {_fmt(v)}{u} is out of range (accepted: {rng})")
    return v


def positive(value, what: str, hi: float | None = None, *, unit: str = "") -> float:
    """A finite number above zero (and at most ``hi``).

    Parameters
    ----------
    value : str or float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    hi : float, optional
    unit : str

    Returns
    -------
    float

    Examples
    --------
    >>> positive("0.5", "sweep duration", unit="s")
    0.5
    """
    v = finite(value, what)
    if v <= 0:
        raise InputError(f"{what} {_fmt(v)}{' ' + unit if unit else ''} must be positive")
    return in_range(v, what, None, hi, unit=unit)


def non_negative(value, what: str, hi: float | None = None, *, unit: str = "") -> float:
    """A finite number of zero or more (and at most ``hi``).

    Parameters
    ----------
    value : str or float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    hi : float, optional
    unit : str

    Returns
    -------
    float

    Examples
    --------
    >>> non_negative(0, "pre-delay", unit="ms")
    0.0
    """
    v = finite(value, what)
    if v < 0:
        raise InputError(f"{what} {_fmt(v)}{' ' + unit if unit else ''} must not be negative")
    return in_range(v, what, None, hi, unit=unit)


def count(value, what: str, lo: int = 1, hi: int | None = None) -> int:
    """A whole number within ``lo``..``hi``; ``"1e3"`` is accepted as 1000.

    Parameters
    ----------
    value : str or float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    lo : int
    hi : int, optional

    Returns
    -------
    int

    Examples
    --------
    >>> count("1e3", "repeats")
    1000
    """
    v = finite(value, what)
    if v != int(v):
        raise InputError(f"{what} {_fmt(v)} is not a whole number")
    n = int(v)
    if n < lo or (hi is not None and n > hi):
        rng = f"{lo} to {hi}" if hi is not None else f"at least {lo}"
        # A huge value ("1e300") is echoed as typed, not as its hundreds of integer digits.
        shown = str(n) if abs(n) < 10**15 else _fmt(v)
        raise InputError(f"{what} {shown} is out of range (accepted: {rng})")
    return n


def sample_rate(value, what: str = "sample rate") -> int:
    """A sample rate within :data:`RATE_MIN`..:data:`RATE_MAX`, Hz.

    Parameters
    ----------
    value : str or float
    what : str

    Returns
    -------
    int
        Hz.

    Examples
    --------
    >>> sample_rate("44100")
    44100
    """
    return count(value, what, RATE_MIN, RATE_MAX)


def channel_list(text, what: str, *, hi: int = MAX_CHANNEL) -> tuple[int, ...]:
    """``"1,2"`` → ``(1, 2)``: 1-based channel numbers, each once.

    Parameters
    ----------
    text : str
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    hi : int
        Highest channel number accepted.

    Returns
    -------
    tuple of int

    Examples
    --------
    >>> channel_list("3, 1", "input channels")
    (3, 1)
    """
    items = [t.strip() for t in str(text).split(",")]
    if not items or any(t == "" for t in items):
        raise InputError(f"{what} '{text}' must be channel numbers separated by commas, like 1,2")
    out = []
    for t in items:
        try:
            out.append(count(t, what, 1, hi))
        except InputError:
            raise InputError(
                f"{what} '{text}': '{t}' is not a channel number from 1 to {hi}"
            ) from None
    if len(set(out)) != len(out):
        raise InputError(f"{what} '{text}' names a channel twice")
    return tuple(out)


def human_bytes(n: float) -> str:
    """A byte count as short text in binary units.

    Parameters
    ----------
    n : float
        Bytes.

    Returns
    -------
    str

    Examples
    --------
    >>> human_bytes(3 * 1024**3)
    '3 GiB'
    """
    if n >= 1024**5:
        return f"{n / 1024**4:.3g} TiB"
    for unit, size in (("TiB", 1024**4), ("GiB", 1024**3), ("MiB", 1024**2), ("KiB", 1024)):
        if n >= size:
            return f"{n / size:.0f} {unit}"
    return f"{n:.0f} bytes"


def memory_budget(
    samples: float,
    what: str,
    *,
    channels: int = 1,
    bytes_per_sample: int = 8,
    budget: int = MEMORY_BUDGET_BYTES,
) -> int:
    """Refuse a buffer of ``samples`` × ``channels`` that would exceed ``budget`` bytes.

    The message gives the size it would need, so a typo of a few orders of magnitude is
    recognised at once.

    Parameters
    ----------
    samples : float
        Samples per channel.
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    channels : int
    bytes_per_sample : int
    budget : int
        Bytes.

    Returns
    -------
    int
        The sample count.

    Examples
    --------
    >>> memory_budget(48000.0, "pre-delay")
    48000
    >>> memory_budget(1e12, "pre-delay")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: pre-delay would need 7 TiB of memory (at most 2 GiB per signal)
    """
    samples = float(samples)
    if math.isnan(samples) or samples < 0:
        raise InputError(f"{what} gives an impossible size ({_fmt(samples)} samples)")
    need = samples * max(1, channels) * bytes_per_sample
    if need > budget:
        size = (
            f"{human_bytes(need)} of memory"
            if math.isfinite(need)
            else "more memory than any machine has"
        )
        raise InputError(f"{what} would need {size} (at most {human_bytes(budget)} per signal)")
    return round(samples)


def seconds_budget(seconds: float, rate: float, what: str, *, channels: int = 1) -> int:
    """Samples for ``seconds`` at ``rate``, within :func:`memory_budget`.

    Parameters
    ----------
    seconds : float
        Duration, s.
    rate : float
        Sample rate, Hz.
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.
    channels : int

    Returns
    -------
    int
        Samples.

    Examples
    --------
    >>> seconds_budget(0.5, 48000, "tail")
    24000
    """
    return memory_budget(finite(seconds, what) * rate, what, channels=channels)


def all_finite(values: Iterable[float], what: str) -> None:
    """Refuse when any value is NaN or infinite.

    Parameters
    ----------
    values : iterable of float
    what : str
        What the value means ("sweep duration"), put at the start of a refusal.

    Returns
    -------
    None

    Examples
    --------
    >>> all_finite([1.0, 2.0], "room size")
    """
    for v in values:
        finite(v, what)


def parse_band_values(
    text: str | None, what: str, bands: Iterable[int], hi: float | None = None
) -> dict[int, float]:
    """'500:1.8,1000:1.6' → {500: 1.8, 1000: 1.6}; a bare number applies to every band.

    Parameters
    ----------
    text : str or None
        ``BAND:VALUE`` items separated by commas, or one number; None gives ``{}``.
    what : str
        What the values mean ("reverberation time"), put at the start of a refusal.
    bands : iterable of int
        The bands accepted (nominal mid-band frequencies in Hz).
    hi : float, optional
        Largest value accepted.

    Examples
    --------
    >>> parse_band_values("500:1.8,1000:1.6", "reverberation time", (500, 1000, 2000))
    {500: 1.8, 1000: 1.6}
    >>> parse_band_values("0.6", "target", (500, 1000))
    {500: 0.6, 1000: 0.6}
    """
    allowed = tuple(int(b) for b in bands)
    if text is None:
        return {}
    if not str(text).strip():
        raise InputError(f"{what} is empty: give BAND:VALUE items (e.g. 500:1.8) or one value")
    out: dict[int, float]
    try:
        out = {b: float(text) for b in allowed}
    except ValueError:
        out = {}
        for item in text.split(","):
            band_text, _, val = item.partition(":")
            try:
                band = int(float(band_text))
                value = float(val)
            except (ValueError, OverflowError):
                raise InputError(
                    f"{what} item '{item}' must look like BAND:VALUE (e.g. 500:1.8)"
                ) from None
            if band in out:
                raise InputError(f"{what}: the {band} Hz band is given twice") from None
            out[band] = value
    for band, value in out.items():
        if band not in allowed:
            raise InputError(
                f"{what}: {band} Hz is not an octave band ({', '.join(map(str, allowed))})"
            )
        positive(value, f"{what} at {band} Hz", hi)
    return out

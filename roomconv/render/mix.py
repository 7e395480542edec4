"""What ``mix`` means, for offline, batch and live rendering alike.

A response file's absolute level is arbitrary (a measured response may hold −19 dB of
energy, a synthesized one 0 dB), so a mix defined on the raw response would make the wet/dry
balance depend on the file. Here the response is first scaled to unit energy per output
channel; then, for broadband input, the wet signal has the dry signal's power, and
``mix`` alone sets the balance: wet/dry = 20·log10(mix / (1 − mix)) dB.

References
----------
The output power of a linear time-invariant system driven by white noise of power σ² is
σ²·Σ h[n]² (Parseval's theorem; e.g. A. Papoulis, *Probability, Random Variables and
Stochastic Processes*, 1965, on linear systems with stochastic inputs; cited from memory).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError

__all__ = [
    "energy_per_output",
    "ir_gain",
    "wet_dry_db",
    "describe_balance",
]


def energy_per_output(ir: np.ndarray, routing) -> float:
    """Mean over the outputs of the summed energy Σh² of the response channels feeding each one.

    For uncorrelated inputs the powers of the paths into one output add.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, channels)
        The impulse response.
    routing : Routing
        From :func:`~roomconv.render.partitioned.routing_for`.

    Returns
    -------
    float
        Energy (sum of squared samples, dimensionless).

    References
    ----------
    Parseval's theorem: white noise of power σ² through h has output power σ²·Σh².

    Examples
    --------
    >>> from roomconv.render.partitioned import routing_for
    >>> energy_per_output(np.array([[0.6, 0.0], [0.8, 0.5]]), routing_for(1, 2))
    0.625
    """
    ir = ir[:, None] if ir.ndim == 1 else ir
    per_channel = np.sum(np.square(ir, dtype=np.float64), axis=0)
    per_out = np.zeros(routing.n_out)
    for k_ir, k_out in zip(routing.path_ir, routing.path_out, strict=True):
        per_out[k_out] += per_channel[k_ir]
    return float(per_out.mean())


def ir_gain(ir: np.ndarray, routing, match_level: bool = True) -> float:
    """The factor applied to the response before mixing: 1/√E with level matching, else 1.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, channels)
    routing : Routing
    match_level : bool
        Scale to unit energy per output (:func:`energy_per_output`).

    Returns
    -------
    float
        Linear gain.

    Raises
    ------
    InputError
        When level matching is asked for a silent or non-finite response.

    Examples
    --------
    >>> from roomconv.render.partitioned import routing_for
    >>> ir_gain(np.array([0.0, 0.3, 0.4]), routing_for(1, 1))
    2.0
    """
    if not match_level:
        return 1.0
    e = energy_per_output(ir, routing)
    if not (math.isfinite(e) and e > 0):
        raise InputError(
            "the impulse response is silent or not finite, so its level cannot "
            "be matched to the dry signal"
        )
    return 1.0 / math.sqrt(e)


def wet_dry_db(mix: float, ir: np.ndarray, routing, gain: float) -> float:
    """Wet-to-dry power ratio for broadband input after the response is multiplied by ``gain``.

    10·log10(mix²·gain²·E / (1 − mix)²), dB, with E from :func:`energy_per_output`.

    Parameters
    ----------
    mix : float
        Wet share, 0 (dry only) to 1 (wet only).
    ir : ndarray, shape (taps,) or (taps, channels)
    routing : Routing
    gain : float
        Linear gain applied to the response (e.g. :func:`ir_gain`).

    Returns
    -------
    float
        dB; +inf for wet only, −inf for dry only.

    Examples
    --------
    >>> from roomconv.render.partitioned import routing_for
    >>> ir = np.array([1.0, 0.0])
    >>> round(wet_dry_db(0.5, ir, routing_for(1, 1), 1.0), 6), wet_dry_db(1.0, ir, None, 1.0)
    (0.0, inf)
    """
    if mix >= 1.0:
        return math.inf
    if mix <= 0.0:
        return -math.inf
    e = energy_per_output(ir, routing) * gain * gain
    return 10 * math.log10(mix * mix * e / ((1 - mix) ** 2))


def describe_balance(db: float) -> str:
    """A wet/dry balance in dB as short text.

    Parameters
    ----------
    db : float
        From :func:`wet_dry_db`.

    Returns
    -------
    str

    Examples
    --------
    >>> describe_balance(-3.04), describe_balance(float("inf"))
    ('-3.0 dB', 'wet only')
    """
    if db == math.inf:
        return "wet only"
    if db == -math.inf:
        return "dry only"
    return f"{db:+.1f} dB"

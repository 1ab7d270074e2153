"""Peak rise under rectangular power pulses, by superposition of the step response.

For a linear model the response to a pulse of power P and width tp is P·[Z(t) − Z(t − tp)],
Z the step impedance (K/W, Z(t ≤ 0) = 0). A train of pulses of period T is the sum of
such pulses; the peak is at the end of a pulse (Z increasing). In periodic steady state

    ΔT_peak = P·[Z(tp) + Σ_{n≥1} (Z(nT + tp) − Z(nT))],

summed here in blocks of doubling length: the first ones exactly, later ones (where the
terms vary smoothly in n) by Euler–Maclaurin with Gauss–Legendre quadrature of the block
integral, until a block adds less than rtol of the total.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from ..errors import SolveError

__all__ = ["duty_family", "periodic_peak", "pulse_train_peak"]

EXACT = 4096
"""Terms of the periodic sum added one by one before the block quadrature takes over."""
NODES = 24
"""Gauss–Legendre points per block of the tail."""
_GAUSS = np.polynomial.legendre.leggauss(NODES)
BLOCKS = 80
"""Doubling blocks at most (2⁸⁰ periods: far beyond any time constant)."""


def _callable(z) -> Callable[[np.ndarray], np.ndarray]:
    """Z(t) from a callable or from an object with a ``z`` method (a Foster network)."""
    return z.z if hasattr(z, "z") and callable(z.z) else z


def _check(width: float, period: float) -> None:
    if not (width > 0 and period > width):
        raise SolveError(f"pulse width {width} s must be positive and below the period "
                         f"{period} s")


def periodic_peak(z, power: float, width: float, period: float, *,
                  rtol: float = 1e-6) -> float:
    """Peak rise (K) in periodic steady state of a rectangular pulse train.

    P·[Z(tp) + Σ_{n≥1} (Z(nT + tp) − Z(nT))], Z a callable (or a Foster network),
    vectorised over t; the sum runs until a block of terms adds less than rtol of the
    total (the terms are summed exactly for the first 4096 periods, then per doubling
    block [a, 2a) by Euler–Maclaurin: ∫ₐ^{2a} f + (f(a) − f(2a))/2 − (f′(a) − f′(2a))/12,
    the integral by 24-point Gauss–Legendre).

    Raises
    ------
    SolveError
        When the sum does not converge (Z does not settle, e.g. a semi-infinite law).
    """
    _check(width, period)
    fz = _callable(z)

    def f(n):
        n = np.asarray(n, dtype=float)
        return fz(n * period + width) - fz(n * period)

    first = np.arange(1, EXACT + 1, dtype=float)
    total = float(fz(np.array([width]))[0]) + float(np.sum(f(first)))
    x, wq = _GAUSS
    a = float(EXACT + 1)
    for _ in range(BLOCKS):
        b = 2 * a
        if width < 1e-10 * b * period:      # the terms would drown in rounding
            break
        nodes = a + (b - a) * (x + 1) / 2
        step = 1e-3 * a
        ends = f(np.array([a, b, a - step, a + step, b - step, b + step]))
        d_a = (ends[3] - ends[2]) / (2 * step)
        d_b = (ends[5] - ends[4]) / (2 * step)
        block = (b - a) / 2 * float(wq @ f(nodes)) + (ends[0] - ends[1]) / 2 \
            - (d_a - d_b) / 12
        total += block
        if abs(block) <= rtol * abs(total) and abs(ends[1]) * b <= rtol * abs(total):
            return power * total
        a = b
    raise SolveError("the periodic superposition did not converge: the step response "
                     "does not settle")


def pulse_train_peak(z, power: float, width: float, period: float, count: int) -> float:
    """Peak rise (K) at the end of the last of `count` pulses, starting from rest.

    By superposition, with t_end = (count − 1)T + tp:
    ΔT = P Σ_{m=0}^{count−1} [Z(mT + tp) − Z(mT)]  (Z(0) = 0).
    """
    _check(width, period)
    if count < 1:
        raise SolveError(f"a pulse train needs at least one pulse, not {count}")
    fz = _callable(z)
    total = 0.0
    chunk = 1 << 16
    for start in range(0, int(count), chunk):
        m = np.arange(start, min(int(count), start + chunk), dtype=float)
        total += float(np.sum(fz(m * period + width) - fz(m * period)))
    return power * total


def duty_family(z, widths, duties) -> np.ndarray:
    """Peak rise per watt (K/W) against pulse width for several duty cycles.

    Returns an array (len(duties) + 1, len(widths)): the first row is the single pulse,
    Z(tp); row i + 1 the periodic steady-state peak at duty D = duties[i] (period tp/D),
    NaN where the superposition sum does not converge (a pulse many decades shorter than
    the slowest time constant).
    """
    fz = _callable(z)
    widths = np.asarray(widths, dtype=float).ravel()
    duties = np.asarray(duties, dtype=float).ravel()
    if np.any((duties <= 0) | (duties >= 1)):
        raise SolveError("duty cycles must lie in (0, 1)")
    out = np.empty((len(duties) + 1, len(widths)))
    out[0] = fz(widths)
    for i, d in enumerate(duties):
        for j, tp in enumerate(widths):
            try:
                out[i + 1, j] = periodic_peak(fz, 1.0, tp, tp / d)
            except SolveError:        # pulses far shorter than the network's slowest τ
                out[i + 1, j] = np.nan
    return out

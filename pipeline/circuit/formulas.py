"""Closed-form figures of the circuit blocks snugboard knows, vectorised.

Every function takes component values in SI units (ohm, F, V) as floats or
numpy arrays and broadcasts them, so one call evaluates a single design, all
tolerance corners, ten thousand Monte Carlo builds or a retune grid alike.
Nothing here knows about designs, parts or files: each block type in
:mod:`pipeline.circuit.types` maps its declared roles onto these arguments.

Circuit conventions (node names as in ``REFERENCES.md`` section 5)
-------------------------------------------------------------------
Sallen-Key low-pass
    in - R1 - node A - R2 - (+); ``cf`` from A to the output, ``cg`` from
    (+) to ground. Optional gain ``k = 1 + Ra/Rb`` (Ra from the output to
    the inverting input, Rb from the inverting input to ground).
    H(s) = k / (s^2 R1 R2 Cf Cg + s [Cg (R1 + R2) + R1 Cf (1 - k)] + 1).
Sallen-Key high-pass
    in - C1 - node A - C2 - (+); ``rf`` from A to the output, ``rg`` from
    (+) to ground. H(s) = k s^2 T^2 / (s^2 T^2 + s [Rf (C1 + C2) +
    Rg C2 (1 - k)] + 1) with T^2 = Rf Rg C1 C2.
    Both follow from nodal analysis at A and (+) with an ideal op-amp; for
    k = 1 they reduce to the unity-gain equations of "Op Amps For
    Everyone" (chapter 16) quoted in ``REFERENCES.md`` section 5.
First-order RC
    f0 = 1 / (2 pi R C), the -3 dB frequency.
Comparator with hysteresis (ideal comparator, no input current)
    Non-inverting: the signal reaches (+) through ``rin``, ``rfb`` feeds
    the output back to (+), the reference ``vref`` sits on (-)::

        v_rise = vref (1 + rin / rfb) - vol rin / rfb          (output low)
        v_fall = vref (1 + rin / rfb') - voh' rin / rfb'       (output high)

    Inverting: the signal drives (-); (+) hangs from ``vtop`` through
    ``rtop``, optionally to ground through ``rbottom``, and gets the output
    through ``rfb``; each threshold is the (+) node voltage, the
    conductance-weighted mean of its sources. With an open-collector output
    the high state is the pull-up supply behind ``rpull``, so there
    ``rfb' = rfb + rpull`` and ``voh' = vpull``; push-pull uses ``rfb`` and
    ``voh``. These are the forms of the application notes "Inverting
    comparator with hysteresis circuit" (SNOA997) and "Non-inverting
    comparator with hysteresis circuit" (SBOA313), which treat the pull-up
    as in series with the feedback resistor when the output is high.

Examples
--------
>>> fig = sallen_key_lowpass(1.26e3, 1.30e3, 150e-9, 22e-9)
>>> round(float(fig["f0"])), round(float(fig["q"]), 2)
(2165, 1.31)
>>> round(float(lowpass2_3db_ratio(2 ** -0.5)), 6)
1.0
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "sallen_key_lowpass",
    "sallen_key_highpass",
    "sallen_key_lowpass_tf",
    "sallen_key_highpass_tf",
    "rc_lowpass",
    "rc_highpass",
    "rc_lowpass_tf",
    "rc_highpass_tf",
    "divider",
    "comparator_noninverting",
    "comparator_inverting",
    "opamp_inverting",
    "opamp_noninverting",
    "led_resistor",
    "lowpass2_3db_ratio",
    "corner_signs",
    "uniform_factors",
    "response_db",
    "solve_quadratic_positive",
    "snap_to_grid",
]

TWO_PI = 2.0 * np.pi


def _a(x: ArrayLike) -> np.ndarray:
    return np.asarray(x, dtype=float)


def lowpass2_3db_ratio(q: ArrayLike) -> np.ndarray:
    """Ratio f(-3 dB) / f0 of a second-order low-pass of quality factor ``q``.

    Solves ``(1 - x^2)^2 + x^2 / q^2 = 2`` for ``x = f / f0``:
    ``x^2 = a + sqrt(a^2 + 1)`` with ``a = 1 - 1 / (2 q^2)``. For a
    high-pass the ratio is the reciprocal. ``nan`` for ``q <= 0``.

    >>> round(float(lowpass2_3db_ratio(3 ** -0.5)), 4)   # Bessel Q = 1/sqrt(3)
    0.7862
    """
    q = _a(q)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = 1.0 - 1.0 / (2.0 * q * q)
        x = np.sqrt(a + np.sqrt(a * a + 1.0))
    return np.where(q > 0, x, np.nan)


def _second_order(tau2: np.ndarray, b: np.ndarray, k: np.ndarray, high: bool) -> dict[str, np.ndarray]:
    with np.errstate(divide="ignore", invalid="ignore"):
        tau = np.sqrt(tau2)
        f0 = 1.0 / (TWO_PI * tau)
        q = np.where(b > 0, tau / b, np.where(b == 0, np.inf, -np.inf))
        ratio = lowpass2_3db_ratio(q)
        f3 = f0 / ratio if high else f0 * ratio
    return {"f0": f0, "q": q, "gain": np.broadcast_to(k, f0.shape) * 1.0, "f_3db": f3}


def sallen_key_lowpass(r1: ArrayLike, r2: ArrayLike, cf: ArrayLike, cg: ArrayLike,
                       k: ArrayLike = 1.0) -> dict[str, np.ndarray]:
    """Figures of a Sallen-Key low-pass: ``f0`` (Hz), ``q``, ``gain``, ``f_3db`` (Hz).

    Method: the denominator ``s^2 T^2 + s b + 1`` above gives
    ``f0 = 1 / (2 pi T)`` and ``q = T / b``; ``b <= 0`` (too much gain) is
    an unstable section and gets ``q = -inf`` (``inf`` when exactly 0).
    ``gain`` is the pass-band gain ``k`` (V/V).
    """
    r1, r2, cf, cg, k = map(_a, (r1, r2, cf, cg, k))
    tau2 = r1 * r2 * cf * cg
    b = cg * (r1 + r2) + r1 * cf * (1.0 - k)
    return _second_order(tau2, b, k, high=False)


def sallen_key_highpass(c1: ArrayLike, c2: ArrayLike, rf: ArrayLike, rg: ArrayLike,
                        k: ArrayLike = 1.0) -> dict[str, np.ndarray]:
    """Figures of a Sallen-Key high-pass: ``f0`` (Hz), ``q``, ``gain``, ``f_3db`` (Hz).

    >>> fig = sallen_key_highpass(100e-9, 100e-9, 1.67e3, 3.18e3)
    >>> round(float(fig["f0"])), round(float(fig["q"]), 3)
    (691, 0.69)
    """
    c1, c2, rf, rg, k = map(_a, (c1, c2, rf, rg, k))
    tau2 = rf * rg * c1 * c2
    b = rf * (c1 + c2) + rg * c2 * (1.0 - k)
    return _second_order(tau2, b, k, high=True)


def sallen_key_lowpass_tf(r1: float, r2: float, cf: float, cg: float, k: float = 1.0
                          ) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator coefficients (descending powers of s)."""
    return (np.array([k]), np.array([r1 * r2 * cf * cg, cg * (r1 + r2) + r1 * cf * (1.0 - k), 1.0]))


def sallen_key_highpass_tf(c1: float, c2: float, rf: float, rg: float, k: float = 1.0
                           ) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator coefficients (descending powers of s)."""
    t2 = rf * rg * c1 * c2
    return (np.array([k * t2, 0.0, 0.0]), np.array([t2, rf * (c1 + c2) + rg * c2 * (1.0 - k), 1.0]))


def rc_lowpass(r: ArrayLike, c: ArrayLike) -> dict[str, np.ndarray]:
    """First-order RC low-pass: ``f0 = 1 / (2 pi R C)`` (Hz), the -3 dB point."""
    return {"f0": 1.0 / (TWO_PI * _a(r) * _a(c))}


def rc_highpass(r: ArrayLike, c: ArrayLike) -> dict[str, np.ndarray]:
    """First-order RC high-pass: ``f0 = 1 / (2 pi R C)`` (Hz), the -3 dB point."""
    return {"f0": 1.0 / (TWO_PI * _a(r) * _a(c))}


def rc_lowpass_tf(r: float, c: float) -> tuple[np.ndarray, np.ndarray]:
    """H(s) = 1 / (s R C + 1)."""
    return np.array([1.0]), np.array([r * c, 1.0])


def rc_highpass_tf(r: float, c: float) -> tuple[np.ndarray, np.ndarray]:
    """H(s) = s R C / (s R C + 1)."""
    return np.array([r * c, 0.0]), np.array([r * c, 1.0])


def divider(rtop: ArrayLike, rbottom: ArrayLike, vin: float | None = None) -> dict[str, np.ndarray]:
    """Unloaded divider: ``ratio`` (V/V), ``rout`` (ohm, Thevenin), ``vout`` (V, with ``vin``)."""
    rt, rb = _a(rtop), _a(rbottom)
    ratio = rb / (rt + rb)
    out = {"ratio": ratio, "rout": rt * rb / (rt + rb)}
    if vin is not None:
        out["vout"] = vin * ratio
    return out


def comparator_noninverting(rin: ArrayLike, rfb: ArrayLike, vref: ArrayLike, voh: float, vol: float,
                            rpull: ArrayLike | None = None) -> dict[str, np.ndarray]:
    """Thresholds (V) of a non-inverting comparator with hysteresis.

    ``voh`` is the push-pull high level, or the pull-up supply when ``rpull``
    is given (open collector). Returns ``v_rise`` (input rising, output
    low -> high), ``v_fall`` and ``hysteresis = v_rise - v_fall``.

    >>> f = comparator_noninverting(10e3, 100e3, 2.5, 5.0, 0.0)   # 2.75 V, 2.25 V
    >>> round(float(f["v_rise"]), 6), round(float(f["v_fall"]), 6)
    (2.75, 2.25)
    """
    rin, rfb, vref = _a(rin), _a(rfb), _a(vref)
    rfb_h = rfb if rpull is None else rfb + _a(rpull)
    v_rise = vref * (1.0 + rin / rfb) - vol * rin / rfb
    v_fall = vref * (1.0 + rin / rfb_h) - voh * rin / rfb_h
    return {"v_rise": v_rise, "v_fall": v_fall, "hysteresis": v_rise - v_fall}


def comparator_inverting(rtop: ArrayLike, rfb: ArrayLike, vtop: float, voh: float, vol: float,
                         rbottom: ArrayLike | None = None, rpull: ArrayLike | None = None
                         ) -> dict[str, np.ndarray]:
    """Thresholds (V) of an inverting comparator with hysteresis.

    ``v_rise`` is the (+) node with the output high (input rising, output
    high -> low), ``v_fall`` with the output low.

    >>> f = comparator_inverting(1e6, 1e6, 5.0, 5.0, 0.0, rbottom=1e6)
    >>> round(float(f["v_rise"]), 4), round(float(f["v_fall"]), 4)
    (3.3333, 1.6667)
    """
    rt, rfb = _a(rtop), _a(rfb)
    g_top = 1.0 / rt
    g_bot = 0.0 if rbottom is None else 1.0 / _a(rbottom)
    rfb_h = rfb if rpull is None else rfb + _a(rpull)
    v_rise = (vtop * g_top + voh / rfb_h) / (g_top + g_bot + 1.0 / rfb_h)
    v_fall = (vtop * g_top + vol / rfb) / (g_top + g_bot + 1.0 / rfb)
    return {"v_rise": v_rise, "v_fall": v_fall, "hysteresis": v_rise - v_fall}


def opamp_inverting(rin: ArrayLike, rf: ArrayLike) -> dict[str, np.ndarray]:
    """Inverting amplifier: ``gain = -Rf / Rin`` (V/V, negative)."""
    return {"gain": -_a(rf) / _a(rin)}


def opamp_noninverting(rf: ArrayLike, rg: ArrayLike) -> dict[str, np.ndarray]:
    """Non-inverting amplifier: ``gain = 1 + Rf / Rg`` (V/V)."""
    return {"gain": 1.0 + _a(rf) / _a(rg)}


def led_resistor(r: ArrayLike, vcc: float, vf: float, vdrop: float = 0.0) -> dict[str, np.ndarray]:
    """LED series resistor: ``current = (vcc - vf - vdrop) / R`` (A), ``power = I^2 R`` (W)."""
    r = _a(r)
    i = (vcc - vf - vdrop) / r
    return {"current": i, "power": i * i * r}


# --------------------------------------------------------------------------
# Tolerance helpers
# --------------------------------------------------------------------------
def corner_signs(n: int) -> np.ndarray:
    """All ``2**n`` tolerance corners as a ``(2**n, n)`` array of -1 / +1.

    >>> corner_signs(2).tolist()
    [[-1.0, -1.0], [1.0, -1.0], [-1.0, 1.0], [1.0, 1.0]]
    """
    idx = np.arange(2 ** n)[:, None]
    return (((idx >> np.arange(n)[None, :]) & 1) * 2 - 1).astype(float)


def uniform_factors(rng: np.random.Generator, draws: int, n: int) -> np.ndarray:
    """``(draws, n)`` samples of U(-1, 1): a part's value is ``v (1 + u t)``."""
    return rng.uniform(-1.0, 1.0, size=(draws, n))


def response_db(num: np.ndarray, den: np.ndarray, f_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Magnitude (dB) and phase (degrees) of H(s) at ``f_hz``.

    ``num`` and ``den`` are coefficients in descending powers of s; the
    method is the definition, H(j w) = num(j w) / den(j w) with w = 2 pi f,
    each polynomial evaluated by Horner's rule (``numpy.polyval``). Cost
    O(len(f_hz) x order). The tests compare it with ``scipy.signal.freqs``.

    >>> mag, ph = response_db([1.0], [1.0, 1.0], [1 / TWO_PI])     # 1 / (s + 1) at w = 1
    >>> round(float(mag[0]), 4), round(float(ph[0]), 4)
    (-3.0103, -45.0)
    """
    s = 1j * (TWO_PI * np.atleast_1d(np.asarray(f_hz, dtype=float)))
    h = np.polyval(np.asarray(num), s) / np.polyval(np.asarray(den), s)
    with np.errstate(divide="ignore"):
        mag = 20.0 * np.log10(np.abs(h))
    return mag, np.degrees(np.angle(h))


def solve_quadratic_positive(a: ArrayLike, b: ArrayLike, c: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Both roots of ``a x^2 - b x + c = 0``, ``nan`` where not real and positive.

    Where ``a`` is 0 the single root ``c / b`` is returned twice.

    >>> [float(x) for x in solve_quadratic_positive(1.0, 3.0, 2.0)]
    [2.0, 1.0]
    """
    a, b, c = np.broadcast_arrays(_a(a), _a(b), _a(c))
    with np.errstate(divide="ignore", invalid="ignore"):
        disc = b * b - 4.0 * a * c
        sq = np.sqrt(np.where(disc >= 0, disc, np.nan))
        lin = c / b
        x1 = np.where(a == 0, lin, (b + sq) / (2.0 * a))
        x2 = np.where(a == 0, lin, (b - sq) / (2.0 * a))
    x1 = np.where(np.isfinite(x1) & (x1 > 0), x1, np.nan)
    x2 = np.where(np.isfinite(x2) & (x2 > 0), x2, np.nan)
    return x1, x2


def snap_to_grid(grid: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Values of sorted ``grid`` just below and just above each ``x`` (nan outside the grid / for nan).

    An ``x`` on the grid is its own value below. Method: binary search
    (``numpy.searchsorted``), O(len(x) log len(grid)).

    >>> [v.tolist() for v in snap_to_grid(np.array([1.0, 2.2, 4.7]), np.array([2.0, 2.2, 9.0]))]
    [[1.0, 2.2, 4.7], [2.2, 2.2, nan]]
    """
    x = np.asarray(x, dtype=float)
    i = np.searchsorted(grid, np.where(np.isfinite(x), x, 0.0))
    lo = np.where((i > 0) & np.isfinite(x), grid[np.clip(i - 1, 0, len(grid) - 1)], np.nan)
    hi = np.where((i < len(grid)) & np.isfinite(x), grid[np.clip(i, 0, len(grid) - 1)], np.nan)
    exact = np.isfinite(x) & (i < len(grid)) & (grid[np.clip(i, 0, len(grid) - 1)] == x)
    lo = np.where(exact, x, lo)
    return lo, hi

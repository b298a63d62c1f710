"""Measurement uncertainty of a calibration point, per the GUM
(JCGM 100:2008, "Evaluation of measurement data - Guide to the expression
of uncertainty in measurement"). Pure Python, no Django imports.

All quantities are in flow units unless stated otherwise. The model is
E = ind - ref with unit sensitivity coefficients, so the combined standard
uncertainty is the root-sum-square of the components (GUM 5.1.2, eq. 10,
uncorrelated inputs).
"""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass
from typing import Iterable

#: Common-practice minimum test uncertainty ratio (4:1), e.g. ANSI/NCSL Z540.
TUR_WARNING = 4.0


def _nonneg(name: str, v: float) -> float:
    v = float(v)
    if not math.isfinite(v) or v < 0:
        raise ValueError(f"{name} must be a finite number >= 0, got {v!r}")
    return v


def standard_from_expanded(U: float, k: float = 2) -> float:
    """Standard uncertainty u = U / k from an expanded uncertainty (GUM 6.2.1, 4.3.3)."""
    _nonneg("U", U)
    k = float(k)
    if not math.isfinite(k) or k <= 0:
        raise ValueError("coverage factor k must be > 0")
    return U / k


def reference_standard_u(reference_value: float, U_ref: float, basis: str, k: float = 2) -> float:
    """Standard uncertainty of the reference (Type B, GUM 4.3.3) in flow units.

    basis "pct_reading": U_ref is a percentage of the reference reading;
    basis "absolute": U_ref is in flow units. Certificate U assumed at coverage k.
    """
    _nonneg("U_ref", U_ref)
    if basis == "pct_reading":
        U_flow = U_ref * abs(float(reference_value)) / 100.0
    elif basis == "absolute":
        U_flow = U_ref
    else:
        raise ValueError(f"unknown reference uncertainty basis {basis!r}")
    return standard_from_expanded(U_flow, k)


def repeatability_u(readings: Iterable[float]) -> float:
    """Type A standard uncertainty of the mean: s(q)/sqrt(n), s with ddof=1 (GUM 4.2.2-4.2.3).

    Returns 0.0 for fewer than two readings (no Type A estimate possible).
    """
    values = [float(x) for x in readings]
    n = len(values)
    if n < 2:
        return 0.0
    return statistics.stdev(values) / math.sqrt(n)


def resolution_u(resolution: float) -> float:
    """Resolution of a digital indication: rectangular distribution of half-width
    res/2, u = res/sqrt(12) = res/(2*sqrt(3)) (GUM 4.3.7, F.2.2.1)."""
    return _nonneg("resolution", resolution) / math.sqrt(12.0)


def combine(*components: float) -> float:
    """Combined standard uncertainty, root-sum-square of uncorrelated components
    with unit sensitivity (GUM 5.1.2, eq. 10)."""
    return math.sqrt(sum(_nonneg("component", c) ** 2 for c in components))


@dataclass(frozen=True)
class PointUncertainty:
    """Uncertainty budget of one point, all in flow units."""

    u_ref: float
    u_rep: float
    u_res: float
    u_c: float
    U: float
    k: float


def point_uncertainty(
    reference_value: float,
    U_ref: float,
    ref_basis: str,
    repeats: Iterable[float],
    resolution: float,
    k: float = 2,
) -> PointUncertainty:
    """Budget for E = ind - ref: reference standard (Type B, certificate U_ref at k=2),
    repeatability of the indications (Type A), resolution of the DUT (Type B,
    rectangular); u_c by RSS and U = k * u_c (GUM 6.2.1)."""
    k = float(k)
    if not math.isfinite(k) or k <= 0:
        raise ValueError("coverage factor k must be > 0")
    u_ref = reference_standard_u(reference_value, U_ref, ref_basis)
    u_rep = repeatability_u(repeats)
    u_res = resolution_u(resolution)
    u_c = combine(u_ref, u_rep, u_res)
    return PointUncertainty(u_ref=u_ref, u_rep=u_rep, u_res=u_res, u_c=u_c, U=k * u_c, k=k)


def test_uncertainty_ratio(mpe_flow_units: float, U_ref_flow_units: float) -> float:
    """Test uncertainty ratio TUR = MPE / U_ref (tolerance half-width over the
    expanded uncertainty of the reference). Returns inf when U_ref is 0."""
    mpe = _nonneg("mpe_flow_units", mpe_flow_units)
    U = _nonneg("U_ref_flow_units", U_ref_flow_units)
    if U == 0:
        return math.inf
    return mpe / U


# Keep pytest from collecting the function above as a test when imported.
test_uncertainty_ratio.__test__ = False


def tur_warning(tur: float) -> str | None:
    """Message if TUR is below the common-practice 4:1 (TUR_WARNING), else None."""
    if tur < TUR_WARNING:
        return (
            f"Test uncertainty ratio {tur:.2f}:1 is below {TUR_WARNING:g}:1; "
            "the reference standard may be inadequate for this tolerance."
        )
    return None

"""Pure error arithmetic for a calibration point (no Django imports).

Error of indication, E = indicated - reference (VIM, JCGM 200:2012, 4.1
"measurement error" / 4.31 "error of indication"), expressed on one of
three bases used on flow-meter calibration certificates:

* ``"pct_reading"`` - 100 * (ind - ref) / ref   (percent of reading / rate)
* ``"pct_span"``    - 100 * (ind - ref) / span  (percent of full scale / span)
* ``"absolute"``    - ind - ref                 (flow units)
"""

from __future__ import annotations

import math

BASES = ("pct_reading", "pct_span", "absolute")


def _check_basis(basis: str) -> None:
    if basis not in BASES:
        raise ValueError(f"unknown error basis {basis!r}; expected one of {BASES}")


def _check_finite(**values: float) -> None:
    for name, v in values.items():
        try:
            finite = v is not None and not isinstance(v, bool) and math.isfinite(float(v))
        except (TypeError, ValueError):
            finite = False
        if not finite:
            raise ValueError(f"{name} must be a finite number, got {v!r}")


def _scale(basis: str, reference: float, span: float | None) -> float | None:
    """Flow units per 1 unit of the basis (None for absolute)."""
    _check_basis(basis)
    if basis == "pct_reading":
        _check_finite(reference=reference)
        if reference == 0:
            raise ValueError("percent-of-reading error is undefined for a zero reference")
        return abs(reference) / 100.0
    if basis == "pct_span":
        if span is None:
            raise ValueError("span is required for a percent-of-span basis")
        _check_finite(span=span)
        if span <= 0:
            raise ValueError("span must be > 0")
        return span / 100.0
    return None


def point_error(reference: float, indicated: float, basis: str, span: float | None = None) -> float:
    """Error of indication at one point, on the given basis.

    pct_reading: 100*(ind-ref)/|ref| (ValueError if ref == 0): one sign convention with the MPE, which is
                 mpe * |ref| / 100, so in reverse flow (ref < 0) an indication beyond the reference in
                 magnitude (-11 against -10) reads -10 %, the sign of ind - ref;
    pct_span:    100*(ind-ref)/span (span > 0 required);
    absolute:    ind-ref.
    Method: VIM (JCGM 200:2012) 4.31 error of indication, relative forms as
    commonly used on flow-meter certificates.
    """
    _check_basis(basis)
    _check_finite(reference=reference, indicated=indicated)
    diff = indicated - reference
    if basis == "absolute":
        return diff
    if basis == "pct_reading":
        if reference == 0:
            raise ValueError("percent-of-reading error is undefined for a zero reference")
        return 100.0 * diff / abs(reference)
    _scale(basis, reference, span)  # validates span
    return 100.0 * diff / span


def indication_for_error(reference: float, error: float, basis: str, span: float | None = None) -> float:
    """The indication that shows `error` at `reference` on the given basis (inverse of point_error)."""
    _check_basis(basis)
    if basis == "absolute":
        return reference + error
    _check_finite(reference=reference, error=error)
    if basis == "pct_reading":
        if reference == 0:
            raise ValueError("reference: a percent-of-reading error is undefined for a zero reference")
        return reference + error * abs(reference) / 100.0
    _scale(basis, reference, span)  # validates span
    return reference + error * span / 100.0


def mpe_in_flow_units(mpe_value: float, basis: str, reference: float, span: float | None = None) -> float:
    """Convert a maximum permissible error (MPE) stated on ``basis`` to flow units.

    pct_reading: mpe * |ref| / 100; pct_span: mpe * span / 100; absolute: mpe. A negative MPE is refused.
    """
    _check_finite(mpe_value=mpe_value)
    if mpe_value < 0:
        raise ValueError(f"mpe_value cannot be negative, got {mpe_value!r}")
    s = _scale(basis, reference, span)
    return mpe_value if s is None else mpe_value * s


def to_error_units(value_in_flow_units: float, basis: str, reference: float, span: float | None = None) -> float:
    """Express a flow-unit quantity (e.g. an expanded uncertainty U) in the error's basis.

    Inverse of :func:`mpe_in_flow_units`: pct_reading: 100*v/|ref|;
    pct_span: 100*v/span; absolute: v.
    """
    _check_finite(value_in_flow_units=value_in_flow_units)
    s = _scale(basis, reference, span)
    return value_in_flow_units if s is None else value_in_flow_units / s


def error_unit(device) -> str:
    """The unit errors, MPE and U of `meter` are stated in: its MPE basis, or its flow units for an absolute MPE."""
    if device.mpe_basis == "absolute":
        from plant.units import label_for

        return label_for(device.flow_units)
    return device.get_mpe_basis_display()

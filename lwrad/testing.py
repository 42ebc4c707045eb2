"""Test helpers that ship with the package.

Comparisons state their tolerance explicitly; validation sizes follow the
``LWRAD_FULL_VALIDATION`` environment variable (short form by default, so the
continuous-integration run stays quick; the full form for releases).
"""

from __future__ import annotations

import os

import numpy as np

__all__ = ["assert_allclose_rel", "full_validation", "scaled", "relative_error"]


def full_validation() -> bool:
    """True when ``LWRAD_FULL_VALIDATION=1``: run validations at full size."""
    return os.environ.get("LWRAD_FULL_VALIDATION", "0") not in ("", "0", "false", "no")


def scaled(short, full):
    """``full`` in a full validation run, else ``short``."""
    return full if full_validation() else short


def relative_error(actual, reference, *, floor: float = 0.0) -> float:
    """max |actual − reference| / max(|reference|, floor), as a float."""
    actual = np.asarray(actual)
    reference = np.asarray(reference)
    denom = max(float(np.max(np.abs(reference))), floor)
    if denom == 0.0:
        return float(np.max(np.abs(actual)))
    return float(np.max(np.abs(actual - reference)) / denom)


def assert_allclose_rel(actual, reference, rtol: float, *, what: str = "value", scale=None):
    """Assert agreement to ``rtol`` relative to ``scale`` (default: max |reference|).

    Comparing against the peak of the reference, rather than point by point,
    is what matters for spectra and maps whose zeros would otherwise make
    relative errors meaningless.
    """
    actual = np.asarray(actual, dtype=complex if np.iscomplexobj(actual) else float)
    reference = np.asarray(reference, dtype=actual.dtype)
    if actual.shape != reference.shape:
        raise AssertionError(f"{what}: shape {actual.shape} != reference {reference.shape}")
    denom = float(np.max(np.abs(reference))) if scale is None else float(scale)
    err = (
        float(np.max(np.abs(actual - reference))) / denom
        if denom
        else float(np.max(np.abs(actual)))
    )
    if not err <= rtol:
        raise AssertionError(f"{what}: relative error {err:.3e} exceeds tolerance {rtol:.1e}")
    return err

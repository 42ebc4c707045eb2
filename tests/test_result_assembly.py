"""Assembling chunk results: diagnostics merged, standard errors and bunch parts carried.

Sources: the standard error of a mean of two equally weighted samples, |I₁ − I₂|/2 (elementary
statistics: s/√M with s² = Σ(I − Ī)²/(M − 1), M = 2); superposition of fields (Jackson 3rd ed.
ch. 14). The path is an invented THz arc (a short bend at 50 MeV).
"""

import numpy as np
import pytest

from lwrad import ideal
from lwrad.observers import AngularGrid
from lwrad.radiation import Result, merge_diagnostics, radiate
from lwrad.trajectory import Bunch

OBS = AngularGrid([0.0, 0.01, 0.02], [0.0, 0.02])
PE = np.array([5e-4, 1e-3])  # eV
OPTS = dict(refinement=2.0)  # a fixed refinement: every chunk samples the path alike


def _arc(energy=50e6):
    return ideal.circular_arc(energy, 0.5, 0.05, n_samples=801)


def _with_diag(result, diag):
    return Result(
        result.photon_energy,
        result.observer,
        field=result.field,
        charge=result.charge,
        diagnostics=diag,
    )


def test_concatenate_merges_the_chunks_diagnostics():
    full = radiate(_arc(), OBS, PE, **OPTS)
    a = _with_diag(
        radiate(_arc(), OBS.take(np.arange(0, 4)), PE, **OPTS),
        {
            "converged": True,
            "estimated_relative_error": 1e-5,
            "n_not_converged": 2,
            "max_iterations": 7,
            "method": "direct",
        },
    )
    b = _with_diag(
        radiate(_arc(), OBS.take(np.arange(4, 6)), PE, **OPTS),
        {
            "converged": False,
            "estimated_relative_error": 3e-4,
            "n_not_converged": 1,
            "max_iterations": 4,
            "method": "direct",
        },
    )
    joined = Result.concatenate_pixels([a, b], OBS)
    # per-pixel results do not depend on the chunking (bit-identical, the solver's contract)
    assert np.array_equal(joined.field, full.field)
    d = joined.diagnostics
    assert d["converged"] is False  # one chunk missed its target: the whole result did
    assert d["estimated_relative_error"] == 3e-4  # the worst chunk bounds them all
    assert d["n_not_converged"] == 3  # event counts add
    assert d["max_iterations"] == 7
    assert d["method"] == "direct"
    # the order of the chunks does not change the merged figures (only the pixel order)
    swapped = merge_diagnostics([b.diagnostics, a.diagnostics])
    assert {k: swapped[k] for k in d} == d


def test_merge_diagnostics_flags_and_disagreeing_values():
    d = merge_diagnostics(
        [
            {"converged": True, "all_converged": True, "method": "fft"},
            {"converged": None, "all_converged": True, "method": "direct"},
        ]
    )
    assert d["converged"] is None  # one chunk was not tested: not all converged, none failed
    assert d["all_converged"] is True
    assert d["method"] == ["fft", "direct"]
    assert merge_diagnostics([{"x": 1.0}]) == {"x": 1.0}  # one chunk: unchanged


def test_chunked_solver_results_keep_convergence_flags():
    # real diagnostics of two chunks solved with convergence probes: merged is the worst of both
    parts = [
        radiate(_arc(), OBS.take(np.arange(0, 3)), PE, tolerance=1e-3),
        radiate(_arc(), OBS.take(np.arange(3, 6)), PE, tolerance=1e-3),
    ]
    joined = Result.concatenate_pixels(parts, OBS)
    errs = [p.diagnostics["estimated_relative_error"] for p in parts]
    assert joined.diagnostics["estimated_relative_error"] == max(errs)
    flags = [p.diagnostics["converged"] for p in parts]
    assert joined.diagnostics["converged"] == (False if False in flags else all(flags))


def test_incoherent_bunch_carries_its_standard_error_through_assembly():
    # two equally weighted particles of different energy: SE of the mean intensity = |I₁ − I₂|/2
    # (exact, rounding only: tolerance 1e-12 relative to the larger intensity)
    t1, t2 = _arc(50e6), _arc(55e6)
    i1, i2 = (np.sum(radiate(t, OBS, PE, **OPTS).moments[:3], axis=0) for t in (t1, t2))
    res = radiate(Bunch([t1, t2]), OBS, PE, **OPTS)
    assert res.standard_error.shape == (PE.size, *OBS.shape)
    scale = max(i1.max(), i2.max())
    assert np.allclose(res.standard_error, np.abs(i1 - i2) / 2, rtol=0, atol=1e-12 * scale)
    assert np.allclose(np.sum(res.moments[:3], axis=0), (i1 + i2) / 2, rtol=0, atol=1e-12 * scale)
    assert set(res.parts) == {"incoherent"}
    assert res.diagnostics["n_trajectories"] == 2
    # storage and chunk assembly keep it
    back = Result.from_arrays(res.to_arrays(), res.attrs)
    assert np.array_equal(back.standard_error, res.standard_error)
    chunks = [
        radiate(Bunch([t1, t2]), OBS.take(np.arange(a, b)), PE, **OPTS) for a, b in ((0, 2), (2, 6))
    ]
    joined = Result.concatenate_pixels(chunks, OBS)
    assert np.array_equal(joined.standard_error, res.standard_error)


@pytest.mark.parametrize("n_jobs", [1, 2])
def test_coherent_bunch_has_parts_and_does_not_depend_on_n_jobs(n_jobs):
    # two identical particles: Σ w Ẽ = 2 Ẽ₁ exactly (superposition); parts as radiate_bunch gives
    tr = _arc()
    one = radiate(tr, OBS, PE, **OPTS)
    res = radiate(Bunch([tr, tr]), OBS, PE, coherent=True, n_jobs=n_jobs, **OPTS)
    assert np.allclose(res.field, 2 * one.field, rtol=1e-13, atol=0)
    assert res.particles_per_result == 2.0
    assert set(res.parts) == {"incoherent", "coherent", "total"}
    assert res.diagnostics["all_converged"] is True

"""Is every level below the highest returned one present?  Checked at every sweep point.

A warm start from the previous point's vectors cannot find a state that has no component in them:
in a round dot a level of a new angular momentum that comes down from above is exactly orthogonal
to the whole previous block, so no amount of filtering finds it.  Two checks:

* **Level count** (Sylvester's law of inertia, :mod:`core.inertia`): a proof, used where the
  factorisation's estimated time is small next to the solve itself.
* **Filtered random probe**: a few random vectors, projected out of the returned states, are
  Chebyshev-filtered to amplify anything below the highest returned level E_top, and a
  Rayleigh-Ritz step is made on the returned states together with them.  By the Poincaré
  separation theorem (Ritz values of an orthonormal basis bound the eigenvalues from above,
  B. N. Parlett, *The Symmetric Eigenvalue Problem*, SIAM 1998, thm. 11.5.1 — Cauchy interlacing),
  a (k+1)-th Ritz value below E_top proves that a level was missed.  A missed level more than
  ``resolution`` below E_top is amplified past every other component by a factor of at least
  ``1e4 sqrt(N)`` (Chebyshev growth outside the damped interval; Y. Zhou, Y. Saad, M. L. Tiago,
  J. R. Chelikowsky, J. Comput. Phys. 219, 172 (2006)), so the probe misses one only if its random
  component is 1e4 times smaller than typical in every probe vector (probability about 1e-4 per
  vector, 1e-16 for four).  A randomized check with a stated resolution, not a proof.

The filtered probe vectors are returned so that the next warm start keeps fresh directions.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla

from ..eigensolve import Spectrum, energy_scale
from ..hamiltonian import Hamiltonian

__all__ = ["CompletenessCheck", "check_completeness", "PROBE_VECTORS"]

#: random vectors in the probe (two make a miss of probability ~1e-8, see the module notes)
PROBE_VECTORS = 2
#: the probe aims to find any level missed by more than this fraction of the mean level spacing ...
PROBE_RESOLUTION = 0.5
#: ... with a filter degree within these limits (the resolution reached is reported)
PROBE_DEGREE_RANGE = (24, 600)
#: a count by inertia is used when its estimated time is below this fraction of the solve's time
COUNT_COST_FRACTION = 0.2
#: amplification of a missed level against everything above E_top, divided by sqrt(N)
_AMPLIFICATION = 1e4


@dataclass(frozen=True)
class CompletenessCheck:
    """How one point's set of levels was checked.

    ``method`` is "level count", "filtered probe" or "none"; ``missed`` is True when the check
    found a level below the highest returned one (the point is then solved again);
    ``resolution`` (energy unit) is the probe's: no level more than this below the top was missed.
    """

    method: str
    missed: bool
    detail: str
    resolution: float = 0.0
    seconds: float = 0.0

    @property
    def certified(self) -> bool:
        return self.method == "level count" and not self.missed

    def to_dict(self) -> dict:
        return {"method": self.method, "missed": self.missed, "detail": self.detail,
                "resolution": self.resolution, "seconds": self.seconds}


def _orthonormal_rows(x: np.ndarray) -> np.ndarray:
    q, r = np.linalg.qr(x.T)
    keep = np.abs(np.diag(r)) > 1e-10 * max(float(np.abs(np.diag(r)).max()), 1e-300)
    return np.ascontiguousarray(q[:, keep].T)


def _probe(h: Hamiltonian, spectrum: Spectrum, rng, probes: int, previous=None) -> tuple:
    """(Ritz values of the returned states + filtered probes, probe Ritz vectors, resolution, degree)."""
    n = h.size
    dv = h.grid.volume_element
    k = spectrum.energies.size
    q = spectrum.states.reshape(k, -1) * math.sqrt(dv)          # orthonormal rows
    e = np.asarray(spectrum.energies, dtype=float)
    e_top = float(e.max())
    res = np.asarray(spectrum.residuals, dtype=float)
    scale = energy_scale(e)
    margin = max(float(spectrum.degeneracy_tolerance), 4.0 * float(np.nanmax(res)) if res.size else 0.0,
                 1e-9 * scale)
    lower, upper = h.bounds()
    cut = e_top + margin
    half = 0.5 * (upper - cut)
    centre = 0.5 * (upper + cut)
    # degree: enough to resolve a fraction of the mean level spacing, within fixed limits
    lo_deg, hi_deg = PROBE_DEGREE_RANGE
    target = math.acosh(_AMPLIFICATION * math.sqrt(n))
    spacing = (e_top - float(e.min())) / max(k - 1, 1) if k > 1 else 0.1 * scale
    want = max(PROBE_RESOLUTION * spacing, 1e-12 * scale)
    degree = int(np.clip(math.ceil(target / math.acosh(1.0 + want / half)), lo_deg, hi_deg))
    resolution = half * (math.cosh(target / degree) - 1.0)

    dtype = h.dtype
    shape = (probes,) + h.grid.shape
    x = rng.standard_normal((probes, n))
    if np.dtype(dtype).kind == "c":
        x = x + 1j * rng.standard_normal((probes, n))
    if previous is not None and len(previous):
        # directions filtered at the previous point (they keep converging across points) plus noise
        prev = np.asarray(previous).reshape(len(previous), -1)[:probes] * math.sqrt(dv)
        x[: len(prev)] = prev + 1e-3 * x[: len(prev)] / math.sqrt(n)
    x -= (x @ q.conj().T) @ q
    x /= np.linalg.norm(x, axis=1, keepdims=True)
    y0 = np.ascontiguousarray(x.reshape(shape), dtype=dtype)
    y1 = np.empty_like(y0)
    y2 = np.empty_like(y0)
    h.step(y0, y1, alpha=1.0 / half, shift=centre, beta=0.0, z=y0)
    for j in range(2, degree + 1):
        h.step(y1, y2, alpha=2.0 / half, shift=centre, beta=-1.0, z=y0)
        y0, y1, y2 = y1, y2, y0
        if j % 8 == 0:                                   # keep the growing recurrence in range
            s = 1.0 / max(float(np.abs(y1).max()), 1e-300)
            y0 *= s
            y1 *= s
    p = y1.reshape(probes, n)
    p = p - (p @ q.conj().T) @ q
    p = p - (p @ q.conj().T) @ q                          # twice: orthogonal to working precision
    p = _orthonormal_rows(p)
    basis = np.concatenate([q, p]) if p.size else q
    hb = h.apply(np.ascontiguousarray(basis.reshape((len(basis),) + h.grid.shape))).reshape(len(basis), -1)
    m = basis.conj() @ hb.T
    gram = basis.conj() @ basis.T
    m = 0.5 * (m + m.conj().T)
    gram = 0.5 * (gram + gram.conj().T)
    theta, vec = sla.eigh(m, gram)
    ritz = (vec[:, k:].T @ basis) / math.sqrt(dv) if len(theta) > k else np.empty((0, n))
    return theta, ritz.reshape((len(ritz),) + h.grid.shape), resolution, degree, margin


def check_completeness(h: Hamiltonian, spectrum: Spectrum, *, rng, probes: int = PROBE_VECTORS,
                       count: str = "auto", previous=None) -> tuple:
    """Check that no level below ``spectrum``'s highest one is missing.

    ``count`` is "auto" (a level count when it is cheap next to the solve, see
    ``COUNT_COST_FRACTION``), "always" or "never".  Returns ``(CompletenessCheck, probe_vectors)``;
    the probe vectors (grid-shaped rows, possibly empty) are the filtered directions for the next
    warm start, and when a level was missed they hold it.  ``previous`` (the probe vectors of the
    previous point) seeds the probe: its directions have been filtered already.
    """
    import time
    t0 = time.perf_counter()
    probe_vectors = np.empty((0,) + h.grid.shape, dtype=h.dtype)
    if count != "never":
        from ..inertia import certify_count, estimate_factorisation
        est = estimate_factorisation(h)
        if count == "always" or est.seconds <= COUNT_COST_FRACTION * max(spectrum.wall_time, 1e-3):
            cert = certify_count(h, spectrum)
            if cert.count_below is not None:
                missed = (cert.missing or 0) > 0
                if not missed or count == "always":
                    return CompletenessCheck("level count", missed, cert.reason, 0.0,
                                             time.perf_counter() - t0), probe_vectors
    from threadpoolctl import threadpool_limits
    with threadpool_limits(1):       # the block products are memory-bound (see DEVELOPERS.md)
        theta, ritz, resolution, degree, margin = _probe(h, spectrum, rng, probes, previous)
    k = spectrum.energies.size
    e_top = float(np.max(spectrum.energies))
    missed = len(theta) > k and theta[k] < e_top + margin
    if missed:
        below = int(np.count_nonzero(theta < e_top + margin)) - k
        detail = (f"a filtered random probe found {below} level(s) below the highest returned one "
                  f"(Ritz value {theta[k]:.6g} below {e_top:.6g})")
    else:
        detail = (f"a filtered random probe (degree {degree}) found no level more than {resolution:.2g} "
                  f"below the highest returned one")
    return (CompletenessCheck("filtered probe", bool(missed), detail, float(resolution), time.perf_counter() - t0),
            ritz)

"""The result of a sweep."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..project import Project
from ..units import get_units

__all__ = ["SweepResult"]


@dataclass(frozen=True, eq=False)
class SweepResult:
    parameter: str
    values: np.ndarray            # (P,)
    energies: np.ndarray          # (P, K), ascending at each point
    tracks: np.ndarray            # (T, P): level index of track t at point p
    anticrossings: tuple
    observables: dict             # name -> (P, K)
    project: Project
    states: np.ndarray | None = None   # (P, K, *grid) when kept
    wall_time: float = 0.0
    tracking_time: float = 0.0
    complete: bool = True
    notes: tuple = ()
    checks: tuple = ()            # per point: CompletenessCheck (how no level was missed), or None
    converged: np.ndarray | None = None   # (P,) bool: False where the solver stopped at its limit
    refinement_solves: int = 0
    two_electron: dict | None = None   # per point: energies, spin, exchange J (core.two_electron.sweep_columns)

    @property
    def units(self):
        return get_units(self.project.units)

    def track_energies(self) -> np.ndarray:
        """(T, P) energy of each tracked level along the sweep."""
        p = np.arange(self.values.size)
        return np.stack([self.energies[p, t] for t in self.tracks]) if self.tracks.size else np.zeros((0, p.size))

    def track_observable(self, name: str) -> np.ndarray:
        obs = self.observables[name]
        p = np.arange(self.values.size)
        return np.stack([obs[p, t] for t in self.tracks])

    @property
    def crossings(self) -> tuple:
        return tuple(a for a in self.anticrossings if a.kind == "crossing")

    @property
    def unsettled(self) -> tuple:
        return tuple(a for a in self.anticrossings if a.kind == "not settled")

    @property
    def certified_points(self) -> np.ndarray:
        """(P,) True where a level count proved that no level below the top one was missed."""
        return np.array([bool(c is not None and c.certified) for c in self.checks], dtype=bool)

    def _two_electron_json(self) -> dict:
        """The per-point columns and the singlet-triplet crossings (core.exchange_series)."""
        from dataclasses import asdict

        from ..exchange_series import singlet_triplet_crossings
        crossings = [dict(asdict(c), between=list(c.between)) for c in singlet_triplet_crossings(self)]
        return dict(self.two_electron, singlet_triplet_crossings=crossings)

    def to_json_dict(self) -> dict:
        return {"parameter": self.parameter, "values": self.values.tolist(),
                "energies": self.energies.tolist(), "tracks": self.tracks.tolist(),
                "anticrossings": [a.to_dict() for a in self.anticrossings if a.kind == "anticrossing"],
                "crossings": [a.to_dict() for a in self.anticrossings if a.kind == "crossing"],
                "not_settled": [a.to_dict() for a in self.anticrossings if a.kind == "not settled"],
                "completeness": [None if c is None else c.to_dict() for c in self.checks],
                "converged": (self.converged.tolist() if self.converged is not None
                              else [True] * int(self.values.size)),
                "refinement_solves": int(self.refinement_solves),
                **({"two_electron": self._two_electron_json()} if self.two_electron is not None else {}),
                "units": self.units.describe(), "complete": self.complete, "notes": list(self.notes)}

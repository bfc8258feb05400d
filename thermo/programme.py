"""The linear programme of the minimizer's column-generation stage, kept alive between solves.

min Σ_k G_k λ_k subject to Σ_k a_k λ_k = b, λ ≥ 0, over columns (a_k, G_k) that column
generation appends to between solves (White, Johnson & Dantzig 1958, J. Chem. Phys. 28:751;
Dantzig & Wolfe 1960, Oper. Res. 8:101). The equality duals are the chemical potentials μ.

HiGHS (Huangfu & Hall 2018, Math. Program. Comput. 10:119) through its own Python binding,
``highspy``, rather than :func:`scipy.optimize.linprog`: the model persists, appended columns
re-solve from the last optimal basis by the primal simplex method (a handful of pivots instead of
a fresh solve), and the per-call set-up of scipy's wrapper, several milliseconds on programmes of
a few hundred columns, is avoided. Costs are shifted by a reference μ (Σ a_k·μ_ref is constant on
the feasible set, so the optimal basis does not change) and scaled so the tolerances are relative.
"""

from __future__ import annotations

import contextlib
import os
import threading

import highspy
import numpy as np

#: Tight feasibility tolerances: reduced costs (driving forces) must resolve ~1e-4 J/mol on scaled objectives.
HIGHS_OPTIONS = {"primal_feasibility_tolerance": 1e-10, "dual_feasibility_tolerance": 1e-10}

_INF = highspy.kHighsInf
_OPTIMAL = highspy.HighsModelStatus.kOptimal
_INFEASIBLE = highspy.HighsModelStatus.kInfeasible
_banner_lock = threading.Lock()
_banner_done = False


@contextlib.contextmanager
def _quiet_stdout():
    """HiGHS prints a banner to file descriptor 1 when the first instance of a process is made."""
    global _banner_done
    with _banner_lock:
        if _banner_done:
            yield
            return
        try:
            saved = os.dup(1)
        except OSError:  # no standard output to protect (a daemon with fd 1 closed)
            _banner_done = True
            yield
            return
        try:
            with open(os.devnull, "wb") as null:
                os.dup2(null.fileno(), 1)
                yield
        finally:
            os.dup2(saved, 1)
            os.close(saved)
            _banner_done = True


def _new_highs() -> highspy.Highs:
    with _quiet_stdout():
        h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("presolve", "off")  # small dense programmes: presolve costs more than it saves
    h.setOptionValue("solver", "simplex")
    for key, value in HIGHS_OPTIONS.items():
        h.setOptionValue(key, value)
    return h


class InfeasibleError(Exception):
    """The bulk composition is not a non-negative combination of the columns."""


class ColumnProgramme:
    """A persistent HiGHS model over growing columns; :meth:`solve` returns (λ, μ) or None.

    None means HiGHS did not report an optimum (degenerate programme); the caller then uses
    another solver. :class:`InfeasibleError` is raised when the bulk cannot be made from the columns.
    """

    def __init__(self, bulk) -> None:
        self.bulk = np.asarray(bulk, dtype=float)
        self._h: highspy.Highs | None = None
        self._count = 0

    def reset(self) -> None:
        """Forget the model (the next solve builds it afresh from all columns)."""
        self._h, self._count = None, 0

    @property
    def size(self) -> int:
        """Columns in the model."""
        return self._count

    def drop(self, keep: np.ndarray) -> None:
        """Delete the columns where ``keep`` is False (non-basic ones: the basis stays valid)."""
        if self._h is None:
            return
        gone = np.flatnonzero(~np.asarray(keep, bool)).astype(np.int32)
        if gone.size:
            self._h.deleteCols(int(gone.size), gone)
            self._count -= int(gone.size)

    def _append(self, comp: np.ndarray) -> None:
        new = comp[self._count:]
        k, c = new.shape
        if k == 0:
            return
        h = self._h
        if self._count == 0:
            h.addRows(c, self.bulk, self.bulk, 0, np.zeros(0, np.int32), np.zeros(0, np.int32), np.zeros(0))
        starts = np.arange(0, k * c, c, dtype=np.int32)
        index = np.tile(np.arange(c, dtype=np.int32), k)
        h.addCols(k, np.zeros(k), np.zeros(k), np.full(k, _INF), k * c, starts, index,
                  np.ascontiguousarray(new, dtype=float).ravel())
        self._count += k

    def solve(self, comp: np.ndarray, g: np.ndarray, mu_ref: np.ndarray):
        """Optimum over columns ``comp`` (n, c) with molar G ``g`` (n,); the first ``size`` rows must be
        the columns already in the model (column generation only appends)."""
        comp = np.asarray(comp, dtype=float)
        cost = np.asarray(g, dtype=float) - comp @ mu_ref
        scale = max(1.0, float(np.abs(cost).max()))
        if self._h is None:
            self._h, self._count = _new_highs(), 0
        self._append(comp)
        n = self._count
        self._h.changeColsCost(n, np.arange(n, dtype=np.int32), cost / scale)
        self._h.run()
        status = self._h.getModelStatus()
        if status == _INFEASIBLE:
            raise InfeasibleError
        if status != _OPTIMAL:
            self._h, self._count = None, 0
            return None
        sol = self._h.getSolution()
        lam = np.asarray(sol.col_value, dtype=float)
        mu = mu_ref + scale * np.asarray(sol.row_dual, dtype=float)
        return lam, mu

"""The only place that reaches into pygam's internals.

The additive summary freezes a fitted ``LinearGAM``'s model matrix and penalty and applies
the smoother to every draw; pygam exposes neither publicly, so we read its private
``_modelmat`` and ``_P``. The versions whose internals we checked are pinned in
``pyproject.toml`` (:data:`CHECKED_VERSIONS`), and tests/test_additive.py fails loudly if
those internals move or change meaning.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

__all__ = ["model_matrix", "penalty_matrix", "CHECKED_VERSIONS", "PYGAM_RIDGE"]

#: pygam releases whose ``_modelmat`` / ``_P`` we read (keep in step with pyproject.toml).
CHECKED_VERSIONS = ">=0.9,<0.13"

#: pygam adds sqrt(machine epsilon) to the diagonal of every penalty "to improve condition"
#: (pygam/pygam.py, GAM._pirls: S = sp.sparse.diags(np.ones(m) * np.sqrt(EPS))); the frozen
#: smoother adds the same ridge so it equals pygam's own fit exactly.
PYGAM_RIDGE = float(np.sqrt(np.finfo(np.float64).eps))


def model_matrix(gam, X: np.ndarray, term: int | None = None) -> sp.csr_matrix:
    """The fitted model's design matrix at ``X`` (all terms, or only term ``term``), sparse CSR.

    ``gam.predict(X) == model_matrix(gam, X) @ gam.coef_`` for a Gaussian identity-link model.
    """
    mat = gam._modelmat(X) if term is None else gam._modelmat(X, term=term)
    return sp.csr_matrix(mat)


def penalty_matrix(gam) -> np.ndarray:
    """The fitted model's total penalty ``P`` (each term's lam times its penalty), dense (p, p),
    without pygam's ridge (:data:`PYGAM_RIDGE`)."""
    return np.asarray(gam._P().toarray(), dtype=np.float64)

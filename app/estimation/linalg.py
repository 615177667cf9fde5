"""Small, careful linear algebra on cross-product matrices."""

from __future__ import annotations

import numpy as np
from scipy import linalg


class SingularMatrixError(ArithmeticError):
    """A cross-product matrix that should be positive definite is not."""


def inverse_pd(matrix: np.ndarray) -> np.ndarray:
    """Inverse of a symmetric positive definite matrix, with Jacobi scaling.

    Scaling by the diagonal before the Cholesky factorisation keeps the
    inverse accurate when columns have very different magnitudes.
    """
    diag = np.sqrt(np.abs(np.diag(matrix)))
    if np.any(diag == 0):
        raise SingularMatrixError("a cross-product matrix has a zero diagonal element")
    scaled = matrix / np.outer(diag, diag)
    try:
        factor = linalg.cho_factor(scaled, lower=True, check_finite=True)
    except linalg.LinAlgError as error:
        raise SingularMatrixError(str(error)) from None
    inverse = linalg.cho_solve(factor, np.eye(matrix.shape[0]))
    inverse = inverse / np.outer(diag, diag)
    return (inverse + inverse.T) / 2


def solve_pd(matrix: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve ``matrix @ x = rhs`` for a symmetric positive definite ``matrix``."""
    return inverse_pd(matrix) @ rhs


def quadratic_form_inverse(vector: np.ndarray, matrix: np.ndarray) -> float:
    """``vector' matrix^{-1} vector`` for a positive definite ``matrix``."""
    return float(vector @ solve_pd(matrix, vector))


def is_positive_definite(matrix: np.ndarray) -> bool:
    """True when the symmetric matrix has only positive eigenvalues (relative tolerance)."""
    values = np.linalg.eigvalsh((matrix + matrix.T) / 2)
    return bool(values.min() > 1e-12 * max(abs(values.max()), np.finfo(float).tiny))


def whitening(matrix: np.ndarray) -> np.ndarray:
    """Upper-triangular ``U`` with ``U' matrix U = I`` for a symmetric positive definite ``matrix``.

    ``U = L^{-T}`` for the Cholesky factor ``matrix = L L'``, computed after
    the same Jacobi scaling as :func:`inverse_pd`.
    """
    diag = np.sqrt(np.abs(np.diag(matrix)))
    if np.any(diag == 0):
        raise SingularMatrixError("a cross-product matrix has a zero diagonal element")
    try:
        factor = linalg.cholesky(matrix / np.outer(diag, diag), lower=True, check_finite=True)
    except linalg.LinAlgError as error:
        raise SingularMatrixError(str(error)) from None
    inverse_factor = linalg.solve_triangular(factor, np.eye(matrix.shape[0]), lower=True)
    return inverse_factor.T / diag[:, None]

"""Leave-one-boring-out cross-validation of a kriging model.

Samples along one boring are strongly correlated, so leaving out one sample at a time flatters
the model: its neighbours in the same boring predict it almost exactly. The honest test for
boring data removes a whole boring and predicts its samples from the other borings.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from geo3d.errors import ModelError
from geo3d.geostats.covariance import CovarianceModel
from geo3d.geostats.kriging import OrdinaryKriging

__all__ = ["CrossValidation", "leave_one_group_out"]

log = logging.getLogger(__name__)


@dataclass
class CrossValidation:
    """Result of :func:`leave_one_group_out`.

    Attributes
    ----------
    samples
        One row per sample: ``group``, ``x``, ``y``, ``z``, ``observed``, ``estimate``,
        ``variance``, ``error`` (estimate - observed), ``std_error`` (error / sqrt(variance)).
    per_group
        One row per group: ``group``, ``n``, ``rmse``, ``mean_error``, ``mean_std_error``,
        ``var_std_error``.
    summary
        ``rmse``, ``mean_error``, ``mean_std_error`` (near 0 if unbiased), ``var_std_error``
        (near 1 if the kriging variance is right), ``n`` (samples predicted).
    """

    samples: pd.DataFrame
    per_group: pd.DataFrame
    summary: dict[str, float] = field(default_factory=dict)


def _stats(err: np.ndarray, std: np.ndarray) -> dict[str, float]:
    ok = np.isfinite(err)
    oks = np.isfinite(std)
    return {
        "rmse": float(np.sqrt(np.mean(err[ok] ** 2))) if ok.any() else float("nan"),
        "mean_error": float(np.mean(err[ok])) if ok.any() else float("nan"),
        "mean_std_error": float(np.mean(std[oks])) if oks.any() else float("nan"),
        "var_std_error": float(np.var(std[oks])) if oks.sum() > 1 else float("nan"),
        "n": int(ok.sum()),
    }


def _fold_predictions(
    coords: np.ndarray,
    values: np.ndarray,
    groups: np.ndarray,
    labels: np.ndarray,
    model: CovarianceModel,
    options: dict,
) -> tuple[np.ndarray, np.ndarray]:
    """Estimate and variance of every sample from the other groups' samples.

    One fit serves all folds: a moving neighbourhood searches without the left-out group
    (:meth:`OrdinaryKriging.predict_without_group`); a global neighbourhood uses the block
    form of the fast cross-validation formulas.
    """
    ok = OrdinaryKriging(model, **options)
    ok.fit(coords, values, groups)
    est = np.full(len(values), np.nan)
    var = np.full(len(values), np.nan)
    if ok.global_mode and ok.max_distance is None:
        est, var = _dubrule_blocks(ok, values, groups, labels)
        return est, var
    _, codes = np.unique(groups, return_inverse=True)
    order = np.argsort(codes, kind="stable")
    bounds = np.searchsorted(codes[order], np.arange(codes.max() + 2))
    for c, g in enumerate(np.unique(groups)):
        out = np.zeros(len(groups), dtype=bool)
        out[order[bounds[c] : bounds[c + 1]]] = True
        if ok.global_mode:
            fold = OrdinaryKriging(model, **options).fit(coords[~out], values[~out], groups[~out])
            est[out], var[out] = fold.predict(coords[out])
        else:
            est[out], var[out] = ok.predict_without_group(coords[out], g)
    return est, var


def _dubrule_blocks(
    ok: OrdinaryKriging, values: np.ndarray, groups: np.ndarray, labels: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Leave-one-group-out from the inverse ``Q`` of the global kriging matrix.

    For the samples ``B`` of one group, the errors (estimate - observed) are
    ``-(Q_BB)^-1 (Q [z; 0])_B`` and their kriging variances the diagonal of ``(Q_BB)^-1``.
    """
    n = len(values)
    lhs = ok._lhs(np.arange(n)[None, :])[0]
    q = np.linalg.inv(lhs)
    qz = q[:, :n] @ values
    est = np.full(n, np.nan)
    var = np.full(n, np.nan)
    for g in labels:
        b = np.flatnonzero(groups == g)
        q_bb = q[np.ix_(b, b)]
        inv_bb = np.linalg.inv(q_bb)
        est[b] = values[b] - inv_bb @ qz[b]
        var[b] = np.maximum(np.diag(inv_bb), 0.0)
    return est, var


def leave_one_group_out(
    coords: np.ndarray,
    values: np.ndarray,
    groups: np.ndarray,
    *,
    model: CovarianceModel,
    **kriging_options,
) -> CrossValidation:
    """Predict each group's samples by kriging from all other groups.

    Parameters
    ----------
    coords, values, groups
        Samples: ``(n, 3)`` x, y, z, ``(n,)`` values and ``(n,)`` group (boring) labels.
    model
        Covariance model.
    **kriging_options
        Passed to :class:`~geo3d.geostats.kriging.OrdinaryKriging` (``neighbors``,
        ``max_per_group``, ``drift``, ``max_distance``, ``global_mode``...).

    Returns
    -------
    CrossValidation

    References
    ----------
    Kitanidis, P.K. (1997). Introduction to Geostatistics. Cambridge University Press, sec. 3.5
    (orthonormal residuals: mean 0, variance 1 for a correct model).
    Dubrule, O. (1983). Cross validation of kriging in a unique neighborhood. Mathematical
    Geology 15(6), 687-699 (all folds from one inverse of the kriging matrix).
    """
    coords = np.asarray(coords, dtype=float)
    values = np.asarray(values, dtype=float)
    groups = np.asarray(groups)
    if not (len(coords) == len(values) == len(groups)):
        msg = (
            f"coords, values and groups must have the same length; got {len(coords)}, "
            f"{len(values)}, {len(groups)}"
        )
        raise ModelError(msg)
    labels = pd.unique(groups)
    if len(labels) < 2:
        msg = f"leave-one-group-out needs at least 2 groups, got {len(labels)}"
        raise ModelError(msg)
    est, var = _fold_predictions(coords, values, groups, labels, model, kriging_options)
    err = est - values
    with np.errstate(divide="ignore", invalid="ignore"):
        std = np.where(var > 0, err / np.sqrt(var), np.nan)
    samples = pd.DataFrame(
        {
            "group": groups,
            "x": coords[:, 0],
            "y": coords[:, 1],
            "z": coords[:, 2],
            "observed": values,
            "estimate": est,
            "variance": var,
            "error": err,
            "std_error": std,
        }
    )
    rows = []
    for g in labels:
        sel = groups == g
        rows.append({"group": g, **_stats(err[sel], std[sel])})
    per_group = pd.DataFrame(rows)
    per_group = per_group[["group", "n", "rmse", "mean_error", "mean_std_error", "var_std_error"]]
    summary = _stats(err, std)
    log.info("leave-one-group-out: %s", summary)
    return CrossValidation(samples=samples, per_group=per_group, summary=summary)

"""The one return type of every simulation design: a campaign whose true effects are known."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import numpy.typing as npt
import pandas as pd

from service.errors import DataError

__all__ = ["Label", "SimulatedCampaign"]

Label = int | str
"""A treatment label: ``0``/``1`` in the single-arm designs, a channel name otherwise."""


@dataclass(frozen=True, eq=False)
class SimulatedCampaign:
    """A simulated randomized (or confounded) campaign together with its ground truth.

    Attributes
    ----------
    X : pandas.DataFrame
        Features, one row per person; no treatment, outcome or truth columns.
    treatment : numpy.ndarray of shape (n,)
        Assigned label of each row: ``control`` or one of ``arms``.
    y : numpy.ndarray of shape (n,)
        Observed outcome as float; 0/1 when ``outcome_type == "binary"``.
    tau : numpy.ndarray of shape (n, n_arms)
        True uplift of each arm against control for each row, in the order of ``arms``.
        For a binary outcome it is the difference of true response probabilities.
    mu0 : numpy.ndarray of shape (n,)
        True expected outcome of each row without contact.
    propensity : numpy.ndarray of shape (n,)
        True probability of the treatment each row was actually assigned.
    propensity_matrix : numpy.ndarray of shape (n, 1 + n_arms)
        True assignment probabilities, columns in the order ``[control, *arms]``.
    control : int or str
        Label of the no-contact group.
    arms : tuple of int or str
        Labels of the contact arms.
    outcome_type : {"binary", "continuous"}
        Kind of outcome.
    name : str
        Name of the design that produced the campaign.
    groups : numpy.ndarray of shape (n,) or None
        Latent response group of each row ("persuadable", "sure_thing", "lost_cause",
        "sleeping_dog") in the designs that have one.
    ids : numpy.ndarray of shape (n,) or None
        Person identifiers, in the designs that have them.
    outcome_name, treatment_name, id_name : str
        Column names used by :meth:`to_frame`.
    """

    X: pd.DataFrame
    treatment: npt.NDArray[Any]
    y: npt.NDArray[np.float64]
    tau: npt.NDArray[np.float64]
    mu0: npt.NDArray[np.float64]
    propensity: npt.NDArray[np.float64]
    propensity_matrix: npt.NDArray[np.float64]
    control: Label
    arms: tuple[Label, ...]
    outcome_type: Literal["binary", "continuous"]
    name: str
    groups: npt.NDArray[Any] | None = None
    ids: npt.NDArray[Any] | None = None
    outcome_name: str = "outcome"
    treatment_name: str = "treatment"
    id_name: str = "customer_id"

    def __post_init__(self) -> None:
        n, k = len(self.X), len(self.arms)
        expected = {
            "treatment": (n,),
            "y": (n,),
            "tau": (n, k),
            "mu0": (n,),
            "propensity": (n,),
            "propensity_matrix": (n, 1 + k),
        }
        for field, shape in expected.items():
            actual = np.shape(getattr(self, field))
            if actual != shape:
                raise DataError(
                    f"SimulatedCampaign field {field!r} has shape {actual}, but {shape} was "
                    f"expected for {n} rows and {k} arm(s); build every array from the same rows."
                )
        for field in ("groups", "ids"):
            value = getattr(self, field)
            if value is not None and np.shape(value) != (n,):
                raise DataError(
                    f"SimulatedCampaign field {field!r} has shape {np.shape(value)}, but "
                    f"({n},) was expected; give one value per row or None."
                )

    @property
    def n_arms(self) -> int:
        """Number of contact arms (not counting control)."""
        return len(self.arms)

    @property
    def labels(self) -> tuple[Label, ...]:
        """All treatment labels in column order: ``(control, *arms)``."""
        return (self.control, *self.arms)

    def expected_outcomes(self) -> npt.NDArray[np.float64]:
        """True expected outcome of each row under each label, shape (n, 1 + n_arms).

        Columns follow :attr:`labels`; column 0 is ``mu0`` and column ``j`` is
        ``mu0 + tau[:, j - 1]``. Useful for the true value of any contact policy.
        """
        return np.column_stack([self.mu0, self.mu0[:, None] + self.tau])

    def truth_frame(self) -> pd.DataFrame:
        """The ground truth as columns: true uplift per arm, ``true_mu0``, propensity, group."""
        columns: dict[str, Any] = {
            f"true_uplift_{arm}": self.tau[:, j] for j, arm in enumerate(self.arms)
        }
        columns["true_mu0"] = self.mu0
        columns["propensity"] = self.propensity
        if self.groups is not None:
            columns["group"] = self.groups
        return pd.DataFrame(columns, index=self.X.index)

    def to_frame(self, *, truth: bool = False) -> pd.DataFrame:
        """One table for CSV writing: [id], features, treatment, outcome, [truth columns].

        Parameters
        ----------
        truth : bool, default False
            Also append the columns of :meth:`truth_frame`. Leave them out of any file
            that a model is trained on.

        Returns
        -------
        pandas.DataFrame
            Binary outcomes are written as integers 0/1.
        """
        parts: list[pd.DataFrame] = []
        if self.ids is not None:
            parts.append(pd.DataFrame({self.id_name: self.ids}, index=self.X.index))
        parts.append(self.X)
        y = self.y.astype(np.int64) if self.outcome_type == "binary" else self.y
        parts.append(
            pd.DataFrame(
                {self.treatment_name: self.treatment, self.outcome_name: y}, index=self.X.index
            )
        )
        if truth:
            parts.append(self.truth_frame())
        names = [str(c) for part in parts for c in part.columns]
        clashes = sorted({c for c in names if names.count(c) > 1})
        if clashes:
            raise DataError(
                f"Column name(s) {clashes} appear twice in the campaign table; rename the "
                "feature(s) or choose another outcome/treatment/id name."
            )
        return pd.concat(parts, axis=1)

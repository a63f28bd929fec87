"""Training: read and validate a campaign table, select and fit a learner, save a version."""

from __future__ import annotations

from service.training.data import read_table
from service.training.fingerprint import data_fingerprint
from service.training.train import AUTO_CANDIDATES, TrainingResult, train_model
from service.training.validate import TrainingData, prepare_training_data

__all__ = [
    "AUTO_CANDIDATES",
    "TrainingData",
    "TrainingResult",
    "data_fingerprint",
    "prepare_training_data",
    "read_table",
    "train_model",
]

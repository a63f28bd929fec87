"""The public surface of service.evaluation is exactly its ``__all__``."""

from __future__ import annotations

import inspect

import service.evaluation as evaluation


def test_all_names_exist_and_are_documented() -> None:
    for name in evaluation.__all__:
        member = getattr(evaluation, name)
        assert inspect.getdoc(member), f"{name} has no docstring"


def test_all_lists_every_public_function_and_class() -> None:
    public = {
        name
        for name, member in vars(evaluation).items()
        if not name.startswith("_") and (inspect.isfunction(member) or inspect.isclass(member))
    }
    assert public == set(evaluation.__all__)


def test_method_docstrings_cite_references() -> None:
    for name in evaluation.__all__:
        member = getattr(evaluation, name)
        if inspect.isfunction(member):
            assert "References" in (member.__doc__ or ""), f"{name} cites no reference"

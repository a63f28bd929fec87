"""The public surface of the service packages: every name in ``__all__`` exists."""

from __future__ import annotations

import importlib

import pytest


@pytest.mark.parametrize(
    "module", ["service.api", "service.scoring", "service.client", "service.config"]
)
def test_all_lists_exactly_what_the_module_offers(module: str) -> None:
    imported = importlib.import_module(module)
    names = imported.__all__
    assert len(names) == len(set(names))
    for name in names:
        assert hasattr(imported, name), f"{module}.{name} is listed but missing"
    public = {n for n in vars(imported) if not n.startswith("_") and n.isidentifier()}
    assert set(names) <= public

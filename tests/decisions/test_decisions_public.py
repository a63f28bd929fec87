"""The public surface of service.decisions is exactly its __all__."""

from __future__ import annotations

import types

import service.decisions as decisions


def test_every_public_name_is_exported_and_exists() -> None:
    assert len(decisions.__all__) == len(set(decisions.__all__))
    public = {
        name
        for name, obj in vars(decisions).items()
        if not name.startswith("_") and not isinstance(obj, types.ModuleType)
    }
    assert public - {"annotations"} == set(decisions.__all__)

"""The public surface of service.policy is exactly its __all__."""

from __future__ import annotations

import types

import service.policy as policy


def test_every_public_name_is_exported_and_exists() -> None:
    assert len(policy.__all__) == len(set(policy.__all__))
    public = {
        name
        for name, obj in vars(policy).items()
        if not name.startswith("_") and not isinstance(obj, types.ModuleType)
    }
    assert public - {"annotations"} == set(policy.__all__)

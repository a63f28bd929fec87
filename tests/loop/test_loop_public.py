"""The public surfaces of the loop packages are exactly their __all__."""

from __future__ import annotations

import types

import pytest

import service.loop
import service.monitoring
import service.offpolicy


@pytest.mark.parametrize("package", [service.loop, service.monitoring, service.offpolicy])
def test_every_public_name_is_exported_and_exists(package: types.ModuleType) -> None:
    names = package.__all__
    assert len(names) == len(set(names))
    public = {
        name
        for name, obj in vars(package).items()
        if not name.startswith("_") and not isinstance(obj, types.ModuleType)
    }
    assert public - {"annotations"} == set(names)

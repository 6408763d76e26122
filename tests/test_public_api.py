"""The public surface: every name in ``meanband.__all__`` loads, and nothing else is promised."""

from __future__ import annotations

import meanband


def test_every_public_name_resolves_from_its_home_module():
    assert set(meanband._HOME) == set(meanband.__all__)
    for name in meanband.__all__:
        value = getattr(meanband, name)
        assert getattr(value, "__name__", name) == name


def test_unknown_names_are_attribute_errors():
    import pytest

    with pytest.raises(AttributeError, match="no attribute 'mean_band'"):
        meanband.mean_band  # noqa: B018

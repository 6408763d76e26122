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


def test_the_licence_is_an_spdx_expression() -> None:
    # Before: `license = { text = "MIT" }`, a table setuptools deprecates, warned three times
    # on every install. PEP 639 writes the licence as an SPDX expression string.
    from pathlib import Path

    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10
        import tomli as tomllib

    project = tomllib.loads((Path(__file__).parents[1] / "pyproject.toml").read_text())
    assert project["project"]["license"] == "MIT"
    assert not any(c.startswith("License ::") for c in project["project"]["classifiers"])

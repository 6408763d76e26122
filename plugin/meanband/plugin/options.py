"""Where a value comes from: the command line, then the ini file, then the default.

Every ``--meanband-<word>`` option has the dest ``meanband_<name>`` and, where a project-wide
default makes sense, the ini key ``meanband_<name>`` (``<word>`` is ``<name>`` with dashes).
Paths have one rule: a path on the command line is relative to the directory pytest was
started in; a path in the ini file is relative to the ini file's directory (the rootdir when
there is no ini file); a default path lies under the rootdir. A bad value is a usage error that
names where it came from.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeVar

import pytest

from meanband.errors import MeanbandError

__all__ = ["Given", "given", "ini_base", "ini_value", "option_value", "resolve_path", "resolve_value"]

T = TypeVar("T")


@dataclass(frozen=True)
class Given:
    """A value as the user gave it, and where: ``option --meanband-x`` or ``ini key meanband_x``."""

    value: Any
    source: str


def option_value(config: pytest.Config, name: str) -> Given | None:
    """The command-line value of setting ``name``, or None when the option was not given."""
    value = config.getoption(f"meanband_{name}", None)
    if value is None:
        return None
    return Given(value, f"option --meanband-{name.replace('_', '-')}")


def ini_value(config: pytest.Config, name: str) -> Given | None:
    """The ini-file value of setting ``name``, or None when the key is unset or empty."""
    try:
        value = config.getini(f"meanband_{name}")
    except ValueError:  # an unregistered key
        return None
    if value is None or value == "" or value == []:
        return None
    return Given(value, f"ini key meanband_{name}")


def given(config: pytest.Config, name: str) -> Given | None:
    """The command line's value of ``name``, else the ini file's, else None."""
    return option_value(config, name) or ini_value(config, name)


def resolve_value(
    config: pytest.Config, name: str, parse: Callable[[Any], T], default: T
) -> T:
    """``parse`` of the given value (option > ini), or ``default``; errors name the source."""
    found = given(config, name)
    if found is None:
        return default
    try:
        return parse(found.value)
    except (MeanbandError, ValueError, TypeError) as exc:
        raise pytest.UsageError(f"{found.source}: {exc}") from None


def ini_base(config: pytest.Config) -> Path:
    """The directory that paths in the ini file are relative to."""
    return Path(config.inipath.parent) if config.inipath else Path(config.rootpath)


def resolve_path(config: pytest.Config, name: str, default: Path | str | None = None) -> Path | None:
    """The path setting ``name`` by the one rule of this module; ``default`` is under the rootdir."""
    option = option_value(config, name)
    if option is not None and option.value:
        return Path(config.invocation_params.dir, str(option.value))
    ini = ini_value(config, name)
    if ini is not None:
        return ini_base(config) / str(ini.value)
    return None if default is None else Path(config.rootpath) / default

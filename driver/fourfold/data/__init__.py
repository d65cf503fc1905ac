"""Bundled data tables (TOML), each value with its source."""

import tomllib
from functools import cache
from importlib import resources


@cache
def load_table(name: str) -> dict:
    """Parsed contents of ``data/<name>.toml`` (cached; callers must not mutate it)."""
    with resources.files(__name__).joinpath(f"{name}.toml").open("rb") as handle:
        return tomllib.load(handle)

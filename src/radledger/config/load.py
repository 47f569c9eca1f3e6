"""Reading a run config: a local file or an http(s) URL, safe YAML only, then validation."""

from __future__ import annotations

import os
from pathlib import Path

import yaml

from ..errors import ConfigError, Problems
from ..io.paths import fetch_text, is_url
from .schema import Config
from .validate import Validator

__all__ = ["load_config"]


def load_config(path: str | os.PathLike, *, output_override: str | os.PathLike | None = None) -> Config:
    """Read and validate a run config; raise :class:`Problems` listing every problem found.

    ``path`` may be an ``http(s)://`` URL; relative input paths then resolve
    against the config's URL, and a relative output.directory against the
    current folder.
    """
    if is_url(str(path)):
        text = fetch_text(str(path), what="config", error=ConfigError)
        return _parse(path, text, output_override)
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(f"{path}: config file not found; check the path") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot read the config ({exc.__class__.__name__}: {exc}); "
                          f"give a readable UTF-8 YAML file") from None
    return _parse(path, text, output_override)


def _parse(path, text: str, output_override) -> Config:
    try:
        raw = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        what = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise ConfigError(f"{path}:{where}: YAML syntax error: {what}; fix the YAML "
                          f"(only plain YAML is accepted, no tags)") from None
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise ConfigError(f"{path}: the config must be a YAML mapping of keys (title, grid, scenes, ...)")
    v = Validator(path, raw, output_override)
    cfg = v.build()
    if v.problems:
        if len(v.problems) == 1:
            raise v.problems[0]
        raise Problems(v.problems)
    return cfg

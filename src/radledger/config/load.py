"""Reading a run config: a local file or an http(s) URL, safe YAML only, then validation.

The YAML is read with PyYAML's safe loader and three bounds, so a hostile
config fails fast with a one-line message instead of eating memory:

* aliases (``*name``) may not expand the document to more than ten times the
  values written (and never to more than :data:`MAX_VALUES` beyond that),
  which refuses "billion laughs" bombs while leaving ordinary anchors alone;
* nesting deeper than :data:`MAX_DEPTH` levels is refused (a config is a few
  levels deep), before the rest is even read;
* a config larger than 16 MB is refused.

An impossible unquoted date (``2026-02-30``) stays text, so the validator
names its key like any other bad date.
"""

from __future__ import annotations

import os
from pathlib import Path

import yaml
from yaml.constructor import SafeConstructor
from yaml.nodes import MappingNode, SequenceNode

from ..errors import ConfigError, Problems
from ..io.paths import MAX_TEXT_BYTES, fetch_text, is_url, printable
from .schema import Config
from .validate import Validator

__all__ = ["load_config", "MAX_VALUES", "MAX_DEPTH"]

MAX_VALUES = 100_000      # values aliases may add to a config
MAX_DEPTH = 64            # levels of nesting


class _TooDeep(Exception):
    pass


class _Loader(yaml.SafeLoader):
    """The safe loader, refusing deep nesting; a timestamp that is not a real date or time stays a string."""

    _depth = 0

    def compose_node(self, parent, index):
        self._depth += 1
        try:
            if self._depth > MAX_DEPTH:
                raise _TooDeep
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


def _timestamp_or_text(loader, node):
    try:
        return SafeConstructor.construct_yaml_timestamp(loader, node)
    except (ValueError, OverflowError):
        return loader.construct_scalar(node)


_Loader.add_constructor("tag:yaml.org,2002:timestamp", _timestamp_or_text)


class _TooLarge(Exception):
    pass


def _check_expansion(root, path) -> None:
    """Refuse a document whose aliases expand it far beyond what is written (or that refers to itself)."""
    written: set[int] = set()
    sizes: dict[int, int] = {}
    on_path: set[int] = set()

    def count_written(node) -> None:
        stack = [node]
        while stack:
            n = stack.pop()
            if id(n) in written:
                continue
            written.add(id(n))
            if isinstance(n, SequenceNode):
                stack.extend(n.value)
            elif isinstance(n, MappingNode):
                for k, v in n.value:
                    stack.extend((k, v))

    count_written(root)
    limit = max(MAX_VALUES, 10 * len(written))

    def size(n) -> int:
        key = id(n)
        if key in sizes:
            return sizes[key]
        if key in on_path:
            raise ConfigError(f"{path}: YAML alias refers to itself; write the values out")
        on_path.add(key)
        total = 1
        if isinstance(n, SequenceNode):
            for c in n.value:
                total += size(c)
                if total > limit:
                    raise _TooLarge
        elif isinstance(n, MappingNode):
            for k, v in n.value:
                total += size(k) + size(v)
                if total > limit:
                    raise _TooLarge
        on_path.discard(key)
        sizes[key] = total
        return total

    try:
        size(root)
    except _TooLarge:
        raise ConfigError(f"{path}: YAML aliases (*name) expand this config to more than {limit:,} values; "
                          f"write the values out or use fewer aliases") from None


def load_config(path: str | os.PathLike, *, output_override: str | os.PathLike | None = None) -> Config:
    """Read and validate a run config; raise :class:`Problems` listing every problem found.

    ``path`` may be an ``http(s)://`` URL; relative input paths then resolve
    against the config's URL, every input must be an http(s) URL, and
    output.directory must stay below the current folder (``output_override``,
    the user's own choice, lifts that).
    """
    if output_override is not None and not _is_text(output_override):
        raise ConfigError(f"{printable(output_override)}: the output folder's path is not valid UTF-8 text; "
                          f"choose another folder")
    if is_url(str(path)):
        if not _is_text(os.getcwd()):
            raise ConfigError(f"{printable(os.getcwd())}: the current folder's path is not valid UTF-8 text; "
                              f"run from another folder or give --out DIR")
        text = fetch_text(str(path), what="config", error=ConfigError)
        return _parse(path, text, output_override)
    if not _is_text(path):
        raise ConfigError(f"{printable(path)}: the config's path is not valid UTF-8 text; rename the file "
                          f"or its folder")
    path = Path(path)
    try:
        if path.stat().st_size > MAX_TEXT_BYTES:
            raise ConfigError(f"{path}: the config is larger than {MAX_TEXT_BYTES // 2**20} MB; is it a config?")
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(f"{path}: config file not found; check the path") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot read the config ({exc.__class__.__name__}: {exc}); "
                          f"give a readable UTF-8 YAML file") from None
    return _parse(path, text, output_override)


def _is_text(path) -> bool:
    try:
        os.fsencode(path).decode("utf-8")
    except (UnicodeDecodeError, TypeError):
        return False
    return True


def _parse(path, text: str, output_override) -> Config:
    loader = _Loader(text)
    try:
        node = loader.get_single_node()
        if node is None:
            raw = None
        else:
            _check_expansion(node, path)
            raw = loader.construct_document(node)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        what = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise ConfigError(f"{path}:{where}: YAML syntax error: {what}; fix the YAML "
                          f"(only plain YAML is accepted, no tags)") from None
    except (_TooDeep, RecursionError):
        raise ConfigError(f"{path}: the YAML is nested more than {MAX_DEPTH} levels deep; a config is a few "
                          f"levels deep") from None
    finally:
        loader.dispose()
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

"""Reading YAML files for filmstack, with numbers read as numbers and line numbers kept.

Plain PyYAML follows YAML 1.1, where a float needs a decimal point: ``1e-3`` and ``5E2`` load as
*text*. :func:`load_yaml` reads them as floats (the YAML 1.2 core-schema rule), rejects duplicate
keys (PyYAML silently keeps the last one), and returns, beside the data, a side table of the
1-based line of every mapping key and sequence item, keyed by its path:

=====================  =====================================================
path                   what it points at
=====================  =====================================================
``""``                 the document itself
``"layers"``           the key ``layers`` of the top-level mapping
``"layers[2]"``        the third item of that sequence
``"layers[2].nm"``     the key ``nm`` inside it
=====================  =====================================================

so that validators can raise ``InputError(..., file=path, key=k, line=lines.get(k))``.
Syntax errors become :class:`~filmstack.errors.InputError` with the file and line.

Only standard YAML tags are constructed (safe loading); no Python objects, no ``eval``.
"""

from __future__ import annotations

import re
from pathlib import Path

import yaml

from ..errors import InputError

__all__ = ["load_yaml", "load_yaml_text", "line_of", "join_key"]


# libyaml's parser when PyYAML was built with it (about 5x faster on long n,k tables); the
# resolver (which decides int/float/str) is PyYAML's Python one in both cases.
_BaseLoader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


class _Loader(_BaseLoader):
    """Safe loader that also reads exponent floats without a dot (``1e-3``) as floats."""


# YAML 1.2 core-schema floats: 1e-3, 5E2, 1.5e+3, .5, 2. (the YAML 1.1 resolver needs a dot).
# Registered after PyYAML's own int/float resolvers, so plain integers stay int.
_Loader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"""^(?:[-+]?(?:[0-9][0-9_]*)(?:\.[0-9_]*)?[eE][-+]?[0-9]+
                    |[-+]?\.[0-9_]+(?:[eE][-+]?[0-9]+)?)$""", re.X),
    list("-+0123456789."),
)


def join_key(parent: str, key) -> str:
    """The key path of ``key`` under ``parent``: ``join_key("layers[2]", "nm") -> "layers[2].nm"``;
    an int key gives an index: ``join_key("layers", 2) -> "layers[2]"``."""
    if isinstance(key, int) and not isinstance(key, bool):
        return f"{parent}[{key}]"
    return f"{parent}.{key}" if parent else str(key)


def line_of(lines: dict, path: str) -> int | None:
    """The line of ``path`` or, if it is absent (e.g. a missing key), of its nearest parent."""
    while True:
        if path in lines:
            return lines[path]
        if not path:
            return None
        cut = max(path.rfind("."), path.rfind("["))
        path = path[:cut] if cut > 0 else ""


def _key(key_node, loader: _Loader):
    """The (hashable) Python value of a mapping key node."""
    try:
        key = loader.construct_object(key_node, deep=True)
        hash(key)
    except (yaml.YAMLError, TypeError):
        key = key_node.value if isinstance(key_node, yaml.ScalarNode) else str(key_node.value)
    return key


def _record_lines(node, path: str, lines: dict, loader: _Loader, file: str) -> None:
    """Walk the composed node tree and record the 1-based line of each key/item path."""
    if isinstance(node, yaml.MappingNode):
        seen: dict = {}
        for key_node, _ in node.value:  # explicit keys only ("<<" merges may be overridden)
            if key_node.tag == "tag:yaml.org,2002:merge":
                continue
            key = _key(key_node, loader)
            line = key_node.start_mark.line + 1
            if key in seen:
                raise InputError(f"duplicate key '{key}' (first given on line {seen[key]}); "
                                 "give each key once", file=file, key=join_key(path, key),
                                 line=line)
            seen[key] = line
        loader.flatten_mapping(node)  # resolve "<<" merge keys as the constructor will
        for key_node, value_node in node.value:
            sub = join_key(path, _key(key_node, loader))
            lines[sub] = key_node.start_mark.line + 1
            _record_lines(value_node, sub, lines, loader, file)
    elif isinstance(node, yaml.SequenceNode):
        for i, item in enumerate(node.value):
            sub = f"{path}[{i}]"
            lines[sub] = item.start_mark.line + 1
            _record_lines(item, sub, lines, loader, file)


def _char_at(text: str, line: int, column: int) -> str:
    """The character at 0-based ``line``, ``column`` of ``text`` ('' if there is none)."""
    lines = text.splitlines()
    if 0 <= line < len(lines) and 0 <= column < len(lines[line]):
        return lines[line][column]
    return ""


def load_yaml_text(text: str, name: str = "<text>") -> tuple[object, dict[str, int]]:
    """Parse YAML text; see :func:`load_yaml`. ``name`` is used in error messages."""
    loader = _Loader(text)
    try:
        node = loader.get_single_node()
        if node is None:
            return None, {}
        lines: dict[str, int] = {"": node.start_mark.line + 1}
        _record_lines(node, "", lines, loader, name)
        # Fresh constructor state (the key construction above cached objects).
        loader.constructed_objects = {}
        loader.recursive_objects = {}
        data = loader.construct_document(node)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else None
        col = f", column {mark.column + 1}" if mark is not None else ""
        what = " ".join(s for s in (exc.context, exc.problem) if s)
        if mark is not None and _char_at(text, mark.line, mark.column) == "\t":
            what += " (a tab: YAML indents with spaces only)"
        raise InputError(f"not valid YAML{col}: {what}", file=name, line=line) from None
    except yaml.YAMLError as exc:
        raise InputError(f"not valid YAML: {exc}", file=name) from None
    finally:
        loader.dispose()
    return data, lines


def load_yaml(path) -> tuple[object, dict[str, int]]:
    """Read a YAML file.

    Parameters
    ----------
    path
        A file path (str or Path).

    Returns
    -------
    (data, lines)
        ``data``: the document (dicts, lists, str, int, float, bool, None); ``1e-3`` is a float.
        ``lines``: ``{key path: 1-based line}``, e.g. ``lines["layers[2].nm"] == 7``.

    Raises
    ------
    InputError
        The file cannot be read, is not UTF-8, is not valid YAML, or repeats a key.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("file not found", file=str(p)) from None
    except IsADirectoryError:
        raise InputError("is a folder, expected a YAML file", file=str(p)) from None
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})",
                         file=str(p)) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", file=str(p)) from None
    return load_yaml_text(text, str(p))

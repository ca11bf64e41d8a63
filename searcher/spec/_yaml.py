"""Safe YAML reading that keeps the position of every key and value.

PyYAML's ``safe_load`` forgets where things were written, silently keeps the last of two
duplicate keys and reports tabs as obscure scanner errors.  We compose the node graph with
:class:`yaml.SafeLoader` and build plain Python values ourselves, so each problem can be
reported as ``file:line:column`` (1-based) with the dotted key path.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import yaml

from searcher.errors import Problem, UserError

__all__ = ["Pos", "Located", "read_yaml"]

# Scalars we build; anything else (python objects, sets, binary, ...) is refused.
_SCALAR_TAGS = {"tag:yaml.org,2002:" + t for t in ("str", "int", "float", "bool", "null")}
_TIMESTAMP = "tag:yaml.org,2002:timestamp"
_MAP, _SEQ = "tag:yaml.org,2002:map", "tag:yaml.org,2002:seq"
_MERGE = "tag:yaml.org,2002:merge"


@dataclass(frozen=True)
class Pos:
    """A 1-based position in a file."""

    file: str
    line: int
    column: int


@dataclass
class Located:
    """Plain data read from YAML plus the position of each value and key.

    ``values[path]`` is where the value at ``path`` (a tuple of keys / list indices) starts;
    ``keys[path]`` is where its key was written (absent for list items and the root).
    """

    data: object
    values: dict = field(default_factory=dict)
    keys: dict = field(default_factory=dict)


def _pos(file: str, mark) -> Pos:
    return Pos(file, mark.line + 1, mark.column + 1)


def _tab_problems(text: str, file: str) -> list[Problem]:
    out = []
    for no, line in enumerate(text.splitlines(), 1):
        indent = line[:len(line) - len(line.lstrip(" \t"))]
        if "\t" in indent:
            out.append(Problem("tab in indentation; YAML indents with spaces only",
                               file=file, line=no, column=indent.index("\t") + 1))
    return out


# Aliases may repeat a subtree many times ("billion laughs") or refer to themselves; a study
# file has a few hundred values, so these bounds only stop such files.
_MAX_VALUES = 100_000
_MAX_DEPTH = 64


class _Builder:
    def __init__(self, loader: yaml.SafeLoader, file: str):
        self.loader, self.file = loader, file
        self.out = Located(None)
        self.problems: list[Problem] = []
        self.count = 0

    def build(self, node, path: tuple):
        self.count += 1
        where = dict(file=self.file, line=node.start_mark.line + 1,
                     column=node.start_mark.column + 1, path=".".join(map(str, path)))
        if self.count > _MAX_VALUES:
            raise UserError.single(f"the file expands to more than {_MAX_VALUES} values "
                                   "(aliases repeated too often)", **where)
        if len(path) > _MAX_DEPTH:
            raise UserError.single(f"nesting deeper than {_MAX_DEPTH} levels (or an alias "
                                   "that contains itself) is not allowed", **where)
        self.out.values[path] = _pos(self.file, node.start_mark)
        if isinstance(node, yaml.MappingNode):
            return self._mapping(node, path)
        if isinstance(node, yaml.SequenceNode):
            if node.tag != _SEQ:
                return self._refuse(node, path)
            return [self.build(item, path + (i,)) for i, item in enumerate(node.value)]
        if node.tag == _TIMESTAMP:
            return node.value  # dates and clock times stay text, as written
        if node.tag not in _SCALAR_TAGS:
            return self._refuse(node, path)
        return self.loader.construct_object(node, deep=True)

    def _refuse(self, node, path):
        self.problems.append(Problem(
            f"tag {node.tag!r} is not allowed; only plain mappings, lists, text, numbers, "
            "booleans and null are read (safe loading)", file=self.file,
            line=node.start_mark.line + 1, column=node.start_mark.column + 1,
            path=".".join(map(str, path))))
        return None

    def _mapping(self, node, path):
        if node.tag != _MAP:
            return self._refuse(node, path)
        result: dict = {}
        merged: dict = {}
        for key_node, value_node in node.value:
            if key_node.tag == _MERGE:
                # '<<: *anchor' supplies defaults that explicit keys of this mapping override
                sources = value_node.value if isinstance(value_node, yaml.SequenceNode) \
                    else [value_node]
                for src in sources:
                    value = self.build(src, path)
                    if isinstance(value, dict):
                        merged = {**value, **merged}
                continue
            key = self.build(key_node, path + ("<key>",))
            self.out.values.pop(path + ("<key>",), None)
            if not isinstance(key, (str, int, float, bool)) or key is None:
                self.problems.append(Problem("mapping keys must be plain text", file=self.file,
                                             line=key_node.start_mark.line + 1,
                                             column=key_node.start_mark.column + 1,
                                             path=".".join(map(str, path))))
                continue
            key = str(key) if not isinstance(key, str) else key
            dotted = ".".join(map(str, path + (key,)))
            if key in result:
                first = self.out.keys[path + (key,)]
                self.problems.append(Problem(
                    f"duplicate key {key!r}; it was already given at line {first.line}",
                    file=self.file, line=key_node.start_mark.line + 1,
                    column=key_node.start_mark.column + 1, path=dotted))
                continue
            self.out.keys[path + (key,)] = _pos(self.file, key_node.start_mark)
            result[key] = self.build(value_node, path + (key,))
        for key, value in merged.items():
            result.setdefault(key, value)
        return result


def read_yaml(path: Path | str) -> Located:
    """Read one YAML file safely, keeping positions.

    Args:
        path: the file to read.

    Returns:
        The data (an empty mapping for an empty file) with value and key positions.

    Raises:
        UserError: unreadable file, tabs in indentation, syntax errors, duplicate keys,
            object-constructing tags, or a top level that is not a mapping; all problems of
            one file are reported together.
    """
    file = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise UserError.single(f"cannot read file: {exc}", file=file) from None
    problems = _tab_problems(text, file)
    if problems:
        raise UserError(problems)
    loader = yaml.SafeLoader(text)
    try:
        node = loader.get_single_node()
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        message = f"YAML syntax error: {exc.problem or exc.context}"
        raise UserError.single(message, file=file, line=mark.line + 1 if mark else 0,
                               column=mark.column + 1 if mark else 0) from None
    except yaml.YAMLError as exc:
        raise UserError.single(f"YAML syntax error: {exc}", file=file) from None
    finally:
        loader.dispose()
    if node is None:
        return Located({}, {(): Pos(file, 1, 1)})
    builder = _Builder(loader, file)
    data = builder.build(node, ())
    if builder.problems:
        raise UserError(builder.problems)
    if not isinstance(data, dict):
        raise UserError.single("a study file must be a mapping of sections at the top level",
                               file=file, line=node.start_mark.line + 1,
                               column=node.start_mark.column + 1)
    builder.out.data = data
    return builder.out

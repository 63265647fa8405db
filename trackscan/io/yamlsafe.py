"""YAML read in bounded work: size, nesting and alias expansion are checked first.

The safe loader refuses arbitrary Python objects, but not a few hundred
bytes whose aliases expand to billions of nodes (each level of ``&a [*b,
*b, ...]`` multiplies the size), nor nesting deep enough to exhaust
Python's recursion, nor an alias that contains itself.  Here the text is
read in three steps, each bounded:

1. the events are streamed (the parser keeps its own stack, it does not
   recurse) and the nesting depth is checked, before anything is composed;
2. the node graph is composed (aliases are shared nodes there, nothing is
   expanded), and one iterative walk over it counts what the aliases would
   expand to and finds cycles;
3. only then is it turned into Python data (:func:`to_python`), recording
   the line of every key path, refusing keys that are not plain values and
   strings holding a NUL byte or a lone surrogate.

Every refusal is one :class:`~trackscan.errors.ParseError` or
:class:`~trackscan.errors.ConfigError` naming the file, the line and, where
there is one, the key path.
"""

from __future__ import annotations

import re

import yaml

from trackscan.errors import ConfigError, ParseError

__all__ = ["compose_bounded", "to_python", "MAX_YAML_BYTES", "MAX_YAML_DEPTH",
           "MAX_YAML_NODES"]

MAX_YAML_BYTES = 8 * 1024 * 1024
"""Largest manifest text (8 MiB; a scan of 10000 listed frames takes under 1 MiB)."""

MAX_YAML_DEPTH = 64
"""Deepest nesting of mappings and lists, aliases expanded (manifests use about 5)."""

MAX_YAML_NODES = 200_000
"""Most nodes the document may hold once its aliases are expanded
(a listed frame takes about 7)."""

_MAP_TAG = "tag:yaml.org,2002:map"
_SEQ_TAG = "tag:yaml.org,2002:seq"
_BAD_CHARS = re.compile("[\x00\ud800-\udfff]")


def _line(mark) -> int | None:
    return None if mark is None else mark.line + 1


def _yaml_error(exc: yaml.YAMLError, path) -> ParseError:
    mark = getattr(exc, "problem_mark", None)
    problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
    return ParseError(f"bad YAML: {problem}", path, _line(mark))


def _check_depth(text: str, path) -> None:
    """Stream the events and refuse nesting deeper than MAX_YAML_DEPTH."""
    depth = 0
    try:
        for event in yaml.parse(text, Loader=yaml.SafeLoader):
            if isinstance(event, (yaml.MappingStartEvent, yaml.SequenceStartEvent)):
                depth += 1
                if depth > MAX_YAML_DEPTH:
                    raise ParseError(f"YAML nested deeper than {MAX_YAML_DEPTH} levels "
                                     "(a scan manifest needs about 5)", path,
                                     _line(event.start_mark))
            elif isinstance(event, (yaml.MappingEndEvent, yaml.SequenceEndEvent)):
                depth -= 1
    except yaml.YAMLError as exc:
        raise _yaml_error(exc, path) from None


def _children(node):
    """(label, child) pairs of a node; mapping keys are children too."""
    if isinstance(node, yaml.MappingNode):
        out = []
        for knode, vnode in node.value:
            label = knode.value if isinstance(knode, yaml.ScalarNode) else "?"
            out.append((None, knode))
            out.append((str(label), vnode))
        return out
    if isinstance(node, yaml.SequenceNode):
        return [(f"[{i}]", v) for i, v in enumerate(node.value)]
    return []


def _join(keypath: str, label: str | None) -> str:
    if label is None:
        return keypath
    if label.startswith("["):
        return keypath + label
    return f"{keypath}.{label}" if keypath else label


def _check_expansion(root, path) -> None:
    """Count the expanded size and depth of the node graph; refuse cycles and bombs.

    One iterative post-order walk, each node visited once (sizes of shared
    nodes are memoised), so the cost is that of the text, not of the
    expansion.
    """
    size: dict = {}
    depth: dict = {}
    on_stack: set = set()
    stack = [(root, "", False)]
    while stack:
        node, keypath, done = stack.pop()
        key = id(node)
        if done:
            kids = _children(node)
            size[key] = 1 + sum(size[id(c)] for _, c in kids)
            depth[key] = 1 + max((depth[id(c)] for _, c in kids), default=0)
            on_stack.discard(key)
            if depth[key] > MAX_YAML_DEPTH:
                raise ConfigError(f"YAML aliases nest deeper than {MAX_YAML_DEPTH} levels "
                                  "once expanded", path, keypath or None, _line(node.start_mark))
            if size[key] > MAX_YAML_NODES:
                raise ConfigError(f"YAML aliases expand to more than {MAX_YAML_NODES} nodes "
                                  "(an alias bomb?)", path, keypath or None,
                                  _line(node.start_mark))
            continue
        if key in size:
            continue
        if key in on_stack:
            raise ConfigError("recursive YAML alias (a node that contains itself)", path,
                              keypath or None, _line(node.start_mark))
        on_stack.add(key)
        stack.append((node, keypath, True))
        for label, child in reversed(_children(node)):
            if id(child) in on_stack:
                raise ConfigError("recursive YAML alias (a node that contains itself)", path,
                                  _join(keypath, label) or None, _line(child.start_mark))
            if id(child) not in size:
                stack.append((child, _join(keypath, label), False))


def compose_bounded(text: str, path):
    """The YAML node graph of `text`, after the size, depth and alias checks.

    Parameters
    ----------
    text : str
    path : path-like
        The file, for messages.

    Returns
    -------
    yaml.Node or None
        None for an empty document.

    Raises
    ------
    ParseError
        Bad YAML, a text longer than :data:`MAX_YAML_BYTES`, nesting deeper
        than :data:`MAX_YAML_DEPTH`.
    ConfigError
        A recursive alias, or aliases expanding past :data:`MAX_YAML_NODES`
        nodes or :data:`MAX_YAML_DEPTH` levels (with the key path).
    """
    if len(text) > MAX_YAML_BYTES:
        raise ParseError(f"the manifest is {len(text)} characters long, more than the "
                         f"{MAX_YAML_BYTES} a scan manifest may take", path)
    _check_depth(text, path)
    try:
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        raise _yaml_error(exc, path) from None
    if node is not None:
        _check_expansion(node, path)
    return node


def to_python(node, lines: dict, keypath: str = ""):
    """Construct Python data from a checked node graph, recording each key path's line.

    Raises
    ------
    ConfigError
        A non-default tag, a key that is a list or mapping, a duplicate key,
        a string with a NUL byte or a lone surrogate (the path is not filled
        in: the caller adds it).
    """
    lines[keypath] = node.start_mark.line + 1
    default_tags = {yaml.MappingNode: _MAP_TAG, yaml.SequenceNode: _SEQ_TAG}
    if type(node) in default_tags and node.tag != default_tags[type(node)]:
        raise ConfigError(f"unsupported YAML tag {node.tag!r}", None, keypath or None,
                          node.start_mark.line + 1)
    if isinstance(node, yaml.MappingNode):
        out = {}
        for knode, vnode in node.value:
            if not isinstance(knode, yaml.ScalarNode):
                what = "a list" if isinstance(knode, yaml.SequenceNode) else "a mapping"
                raise ConfigError(f"a key must be a plain value, not {what}", None,
                                  keypath or None, knode.start_mark.line + 1)
            key = _scalar(knode, keypath)
            sub = f"{keypath}.{key}" if keypath else str(key)
            if key in out:
                raise ConfigError("duplicate key", None, sub, knode.start_mark.line + 1)
            out[key] = to_python(vnode, lines, sub)
        return out
    if isinstance(node, yaml.SequenceNode):
        return [to_python(v, lines, f"{keypath}[{i}]") for i, v in enumerate(node.value)]
    return _scalar(node, keypath)


def _scalar(node, keypath: str):
    loader = yaml.SafeLoader("")
    try:
        value = loader.construct_object(node, deep=True)
    except yaml.constructor.ConstructorError as exc:
        raise ConfigError(f"unsupported YAML value ({exc.problem})", None, keypath or None,
                          node.start_mark.line + 1) from None
    finally:
        loader.dispose()
    if isinstance(value, str):
        bad = _BAD_CHARS.search(value)
        if bad:
            what = "a NUL byte" if bad.group() == "\x00" else \
                f"a lone surrogate U+{ord(bad.group()):04X} (not valid Unicode text)"
            raise ConfigError(f"{what} at character {bad.start() + 1}", None,
                              keypath or None, node.start_mark.line + 1)
    return value

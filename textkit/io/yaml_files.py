"""The one way textkit reads YAML (survey configs, lexicons): bounded in size, time and memory.

- Only regular files are read: a device (``/dev/zero``), a FIFO or a socket is
  refused before it is opened, so nothing blocks or reads forever.
- A file over :data:`MAX_YAML_BYTES` (16 MiB; the shipped lexicon of about
  1,600 terms is 40 KiB) is refused.
- :class:`BoundedLoader` is PyYAML's safe loader with three limits checked while
  the file is composed into nodes: at most :data:`MAX_ALIASES` aliases
  (``*name``), nesting at most :data:`MAX_DEPTH` levels deep, and, when aliases
  are used, at most :data:`MAX_EXPANDED_NODES` nodes once every alias is
  expanded. A "billion laughs" file thus fails at once with the line of the
  alias instead of running until memory runs out.

Breaking a limit raises a :class:`yaml.composer.ComposerError` carrying the
line, so each caller's existing handling of YAML errors reports it.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

import yaml
from yaml.composer import ComposerError

from ..errors import InputError, TextkitError

#: Largest YAML file read, in bytes.
MAX_YAML_BYTES = 16 * 1024 * 1024
#: Most aliases (``*name``) allowed in one YAML document.
MAX_ALIASES = 50
#: Deepest nesting of lists and mappings allowed.
MAX_DEPTH = 100
#: Most nodes a document may have with every alias expanded.
MAX_EXPANDED_NODES = 100_000


def check_regular_file(path: str | Path, what: str, max_bytes: int | None,
                       error: type[TextkitError] = InputError) -> int:
    """Size in bytes of ``path`` after checking it is a regular file no larger than ``max_bytes``.

    Raises
    ------
    InputError (or ``error``)
        Missing, a folder, a device / FIFO / socket, or too large (one line naming the file).
    """
    source = Path(path)
    try:
        info = os.stat(source)
    except FileNotFoundError:
        raise error(f"cannot read the {what}: no such file", source=source) from None
    except OSError as problem:
        raise error(f"cannot read the {what}: {problem.strerror}", source=source) from None
    if stat.S_ISDIR(info.st_mode):
        raise error(f"expected the {what} (a file), found a folder", source=source)
    if not stat.S_ISREG(info.st_mode):
        raise error(f"the {what} is not a regular file (a device, pipe or socket); give a file",
                         source=source)
    if max_bytes is not None and info.st_size > max_bytes:
        raise error(f"the {what} is {info.st_size / 2**20:.1f} MiB; the limit is "
                         f"{max_bytes / 2**20:.0f} MiB", source=source)
    return info.st_size


def read_yaml_bytes(path: str | Path, what: str = "YAML file", max_bytes: int = MAX_YAML_BYTES,
                    error: type[TextkitError] = InputError) -> bytes:
    """The bytes of a YAML file, after :func:`check_regular_file` (reads at most ``max_bytes``).

    Raises
    ------
    InputError (or ``error``)
        As :func:`check_regular_file`. OSError from reading passes through.
    """
    check_regular_file(path, what, max_bytes, error)
    with open(path, "rb") as handle:
        data = handle.read(max_bytes + 1)
    if len(data) > max_bytes:  # grew after the check
        raise error(f"the {what} is larger than the limit of {max_bytes / 2**20:.0f} MiB", source=path)
    return data


class BoundedLoader(yaml.SafeLoader):
    """``yaml.SafeLoader`` that refuses alias bombs and deep nesting (limits in the module notes)."""

    def __init__(self, stream) -> None:
        super().__init__(stream)
        self.alias_count = 0
        self.depth = 0

    def compose_node(self, parent, index):
        if self.check_event(yaml.AliasEvent):
            self.alias_count += 1
            if self.alias_count > MAX_ALIASES:
                mark = self.peek_event().start_mark
                raise ComposerError(None, None, f"more than {MAX_ALIASES} aliases (*name) in one file; "
                                    "write the values out instead", mark)
        self.depth += 1
        try:
            if self.depth > MAX_DEPTH:
                mark = self.peek_event().start_mark
                raise ComposerError(None, None, f"lists or mappings nested more than {MAX_DEPTH} deep", mark)
            return super().compose_node(parent, index)
        finally:
            self.depth -= 1

    def get_single_node(self):
        node = super().get_single_node()
        if node is not None and self.alias_count:
            _check_expansion(node)
        return node


def _check_expansion(root: yaml.Node) -> None:
    sizes: dict[int, int] = {}

    def size(node: yaml.Node) -> int:
        known = sizes.get(id(node))
        if known is not None:
            return known
        total = 1
        if isinstance(node, yaml.SequenceNode):
            total += sum(size(child) for child in node.value)
        elif isinstance(node, yaml.MappingNode):
            total += sum(size(key) + size(value) for key, value in node.value)
        sizes[id(node)] = total
        if total > MAX_EXPANDED_NODES:
            raise ComposerError(None, None, f"the aliases (*name) expand to more than {MAX_EXPANDED_NODES:,} "
                                "values; write the values out instead", node.start_mark)
        return total

    size(root)

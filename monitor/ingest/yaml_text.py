"""Load YAML text within bounds: no aliases, limited nesting, no exception from a value.

A YAML alias (``*name``) repeats a whole subtree by reference, so a few hundred bytes of
nested aliases stand for billions of entries once anything walks the tree (the line map
of the registry, a message that prints a value). :func:`load_yaml` refuses aliases and
nesting deeper than :data:`~monitor.ingest.limits.MAX_YAML_DEPTH` while composing,
before any tree exists, and reads values that Python cannot construct (an integer of
thousands of digits, the date 0000-01-01) as plain text, which the field checks refuse
with their field path. Unsafe tags stay refused (the loader is PyYAML's safe loader).
"""

from __future__ import annotations

import yaml

from monitor.domain.records import Problem
from monitor.ingest.limits import MAX_YAML_DEPTH, shorten


def load_yaml(text: str, name: str) -> tuple[object, yaml.Node | None] | Problem:
    """The document of ``text`` and its node tree (for source lines), or the problem."""
    try:
        loader = _BoundedLoader(text)
        try:
            node = loader.get_single_node()
            doc = loader.construct_document(node) if node is not None else None
        finally:
            loader.dispose()
    except yaml.YAMLError as e:
        return _yaml_problem(e, name)
    return doc, node


def _yaml_problem(e: yaml.YAMLError, name: str) -> Problem:
    """The problem of a YAML syntax error, with its line and column where known."""
    mark = getattr(e, "problem_mark", None)
    if mark is None:
        return Problem(name, None, None, None, f"invalid YAML: {shorten(str(e), 300)}")
    what = "; ".join(str(x) for x in (e.context, e.problem) if x)
    return Problem(
        name,
        mark.line + 1,
        f"column {mark.column + 1}",
        None,
        f"invalid YAML at line {mark.line + 1}, column {mark.column + 1}: {shorten(what, 300)}",
    )


class _BoundedLoader(yaml.SafeLoader):
    """The safe loader, refusing aliases and nesting deeper than MAX_YAML_DEPTH, and
    reading an integer no float can hold, or an impossible date, as plain text (which the
    field checks then refuse with the field path)."""

    def __init__(self, stream: str) -> None:
        super().__init__(stream)
        self._depth = 0

    def compose_node(self, parent: yaml.Node | None, index: object) -> yaml.Node | None:
        if self.check_event(yaml.AliasEvent):
            mark = self.peek_event().start_mark
            raise yaml.composer.ComposerError(
                None,
                None,
                "aliases (`*name`) are not allowed in a fleet registry: write each entry "
                "out in full",
                mark,
            )
        self._depth += 1
        try:
            if self._depth > MAX_YAML_DEPTH:
                raise yaml.composer.ComposerError(
                    None,
                    None,
                    f"the registry is nested more than {MAX_YAML_DEPTH} levels deep: expected "
                    "the sections oils, component_models, sites and units as in docs/formats.md",
                    self.peek_event().start_mark,
                )
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1

    def construct_yaml_int(self, node: yaml.ScalarNode) -> int | str:
        if len(node.value) > 300:  # beyond any float (and Python's digit limit)
            return node.value
        return super().construct_yaml_int(node)

    def construct_yaml_timestamp(self, node: yaml.ScalarNode) -> object:
        try:
            return super().construct_yaml_timestamp(node)
        except (ValueError, OverflowError):
            return node.value


_BoundedLoader.add_constructor("tag:yaml.org,2002:int", _BoundedLoader.construct_yaml_int)
_BoundedLoader.add_constructor(
    "tag:yaml.org,2002:timestamp", _BoundedLoader.construct_yaml_timestamp
)

"""Safe YAML reading that keeps line numbers and refuses duplicate keys.

Case files are data only: the loader is PyYAML's ``SafeLoader`` (no object
construction from tags), extended to remember the line of every key and list
item and to reject a key given twice in one mapping (plain PyYAML would keep
the last one silently).
"""

from __future__ import annotations

import yaml

from ..errors import CaseError

MAX_BYTES = 2_000_000  # a case file is a few kB; refuse anything absurdly large


class LineDict(dict):
    """A dict that knows the 1-based line of each key."""

    lines: dict


class LineList(list):
    """A list that knows the 1-based line of each item."""

    lines: list


class _Loader(yaml.SafeLoader):
    pass


def _construct_mapping(loader, node, deep=False):
    loader.flatten_mapping(node)
    out = LineDict()
    out.lines = {}
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=True)
        try:
            hash(key)
        except TypeError:
            raise CaseError("a mapping key must be plain text", line=key_node.start_mark.line + 1) from None
        if key in out:
            raise CaseError(
                f"key {key!r} is given twice in the same section",
                line=key_node.start_mark.line + 1,
            )
        out[key] = loader.construct_object(value_node, deep=True)
        out.lines[key] = value_node.start_mark.line + 1
    return out


def _construct_sequence(loader, node, deep=False):
    out = LineList(loader.construct_object(child, deep=True) for child in node.value)
    out.lines = [child.start_mark.line + 1 for child in node.value]
    return out


_Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)
_Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_SEQUENCE_TAG, _construct_sequence)


def read_yaml(text: str):
    """Parse YAML text safely.

    Raises
    ------
    CaseError
        Syntax errors, unsupported tags, duplicate keys, oversized input.
    """
    if len(text) > MAX_BYTES:
        raise CaseError(f"file is too large ({len(text)} characters; a case file is at most {MAX_BYTES})")
    loader = _Loader(text)  # derives from SafeLoader: no object construction
    try:
        return loader.get_single_data()
    except CaseError:
        raise
    except yaml.constructor.ConstructorError as exc:
        line = exc.problem_mark.line + 1 if exc.problem_mark else None
        tag = ""
        if exc.problem and "tag" in exc.problem:
            tag = exc.problem.split("tag", 1)[1].strip(" '")
        raise CaseError(
            f"YAML tag {tag} is not allowed: a case file is plain data".replace("  ", " "), line=line
        ) from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = mark.line + 1 if mark is not None else None
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise CaseError(f"YAML syntax error: {problem}", line=line) from None
    finally:
        loader.dispose()

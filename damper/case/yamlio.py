"""Safe YAML reading that keeps line numbers and refuses duplicate keys.

Case files are data only: the loader is PyYAML's ``SafeLoader`` (no object
construction from tags), extended to remember the line of every key and list
item. Before anything is constructed, the node tree is inspected (without
recursion, each shared node once) so that every refusal names its key path:

* a key given twice in one mapping (plain PyYAML keeps the last silently);
* a tag other than YAML's plain data tags (``!!python/...``, ``!custom``);
* a mapping key that is a list or a mapping;
* YAML 1.1 number forms that are almost always typos and would silently give a
  different number: leading-zero octal (``0500`` is 320), base 60 (``2:30`` is
  150), hexadecimal and binary integers;
* integers too long to be a number anyone meant.

Merge keys (``<<: *base``) work as YAML defines them: the mapping's own keys
override merged ones.
"""

from __future__ import annotations

import re

import yaml
from yaml.nodes import MappingNode, ScalarNode, SequenceNode

from ..errors import CaseError, Raw
from .ranges import MAX_CONDITIONS, MAX_LIST_ITEMS

MAX_BYTES = 2_000_000  # a case file is a few kB; refuse anything absurdly large

_TAG = "tag:yaml.org,2002:"
#: Tags a case file may carry (explicitly or by YAML's own resolution).
_PLAIN_TAGS = frozenset(_TAG + t for t in ("str", "int", "float", "bool", "null", "seq", "map", "merge", "timestamp"))

_OCTAL = re.compile(r"^[-+]?0[0-7_]+$")
_BASE60 = re.compile(r"^[-+]?[0-9][0-9_]*(?::[0-5]?[0-9])+(?:\.[0-9_]*)?$")
_HEX_OR_BINARY = re.compile(r"^[-+]?0[xXbB][0-9a-fA-F_]+$")
_MAX_INT_DIGITS = 60


class LineDict(dict):
    """A dict that knows the 1-based line of each key.

    ``texts`` keeps the source text of yes/no values (``off``, ``yes``), so a
    message can show what the user wrote rather than ``false``.
    """

    lines: dict
    texts: dict


class LineList(list):
    """A list that knows the 1-based line of each item."""

    lines: list


#: Longest list at a key path (top-level keys), counted while the file is composed.
_LIST_LIMITS = {"conditions": MAX_CONDITIONS}


class _Loader(yaml.SafeLoader):
    """SafeLoader that counts list items while composing, so an oversized list is refused at
    its first extra item instead of after the whole file is parsed."""

    _keys: list

    def compose_node(self, parent, index):
        if not hasattr(self, "_keys"):
            self._keys = []
        if isinstance(parent, SequenceNode):
            limit = _LIST_LIMITS.get(self._keys[-1]) if len(self._keys) == 2 and self._keys[0] is None else None
            limit = MAX_LIST_ITEMS if limit is None else limit
            if index >= limit:
                where = self._keys[-1] if len(self._keys) == 2 and self._keys[0] is None else ""
                raise CaseError(f"has more than {limit} items (refused while reading, before anything is built)",
                                where or "", line=parent.start_mark.line + 1)
            name = "[]"
        elif isinstance(parent, MappingNode) and isinstance(index, ScalarNode):
            name = index.value
        else:
            name = None
        self._keys.append(name)
        try:
            return super().compose_node(parent, index)
        finally:
            self._keys.pop()

    def flatten_mapping(self, node):
        """Resolve merge keys, keeping only the winning pair of each key.

        Without the de-duplication, nested merges of aliases grow the pair list
        exponentially (a "billion laughs" file through ``<<``).
        """
        super().flatten_mapping(node)
        last = {}
        for i, (key_node, _) in enumerate(node.value):
            last[_key_identity(key_node)] = i
        if len(last) != len(node.value):
            node.value = [pair for i, pair in enumerate(node.value) if last[_key_identity(pair[0])] == i]


def _key_identity(key_node):
    if isinstance(key_node, ScalarNode):
        return (key_node.tag, key_node.value)
    return id(key_node)


def _construct_mapping(loader, node, deep=False):
    loader.flatten_mapping(node)
    out = LineDict()
    out.lines = {}
    out.texts = {}
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=True)
        try:
            hash(key)
        except TypeError:
            raise CaseError("a mapping key must be plain text", line=key_node.start_mark.line + 1) from None
        # explicit duplicates were refused by _inspect; a repeat here comes from a
        # merge key, where the later (the mapping's own) value wins
        out[key] = loader.construct_object(value_node, deep=True)
        out.lines[key] = value_node.start_mark.line + 1
        if isinstance(value_node, ScalarNode) and value_node.tag == _TAG + "bool":
            out.texts[key] = value_node.value
        else:
            out.texts.pop(key, None)
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
        Syntax errors, unsupported tags, duplicate keys, risky number forms,
        too deep nesting, oversized input.
    """
    if len(text) > MAX_BYTES:
        raise CaseError(f"is too large for a case file ({len(text)} characters; at most {MAX_BYTES})")
    try:
        loader = _Loader(text)  # derives from SafeLoader: no object construction
    except yaml.reader.ReaderError as exc:
        raise _reader_error(exc, text) from None
    try:
        node = loader.get_single_node()
        if node is None:
            return None
        _inspect(node, loader)
        return loader.construct_document(node)
    except CaseError:
        raise
    except RecursionError:
        raise CaseError("YAML is nested too deeply for a case file") from None
    except yaml.constructor.ConstructorError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else None
        problem = exc.problem or "cannot read this YAML"
        raise CaseError(f"YAML error: {problem}", line=line) from None
    except yaml.reader.ReaderError as exc:
        raise _reader_error(exc, text) from None
    except yaml.YAMLError as exc:
        raise CaseError(_syntax_message(exc), line=_mark_line(exc)) from None
    except (ValueError, TypeError, OverflowError, IndexError, KeyError) as exc:  # a value PyYAML could not convert
        raise CaseError(f"YAML error: cannot read a value ({str(exc)[:80]})") from None
    finally:
        loader.dispose()


def _reader_error(exc, text) -> CaseError:
    line = text[: exc.position].count("\n") + 1 if isinstance(exc.position, int) else None
    char = exc.character
    code = f"U+{char:04X}" if isinstance(char, int) else repr(char)
    return CaseError(f"the file contains a control character ({code}) that YAML does not allow", line=line)


def _mark_line(exc):
    mark = getattr(exc, "problem_mark", None) or getattr(exc, "context_mark", None)
    return mark.line + 1 if mark is not None else None


def _syntax_message(exc) -> str:
    """PyYAML's problem, with its context and a hint for the usual causes."""
    problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
    context = getattr(exc, "context", None)
    context_mark = getattr(exc, "context_mark", None)
    problem_mark = getattr(exc, "problem_mark", None)
    text = problem
    if context and context.startswith("while "):
        if context_mark is not None and (problem_mark is None or context_mark.line != problem_mark.line):
            text += f" ({context} starting on line {context_mark.line + 1})"
        else:
            text += f" ({context})"
    elif context:
        text = f"{context}, {problem}"
    if "mapping values are not allowed" in problem:
        text += "; check the indentation, or put a value containing ': ' in quotes"
    elif "'\\t'" in problem:
        text += "; indent with spaces, not tabs"
    elif "another document" in problem:
        text += "; a case file is one document (remove the '---' line)"
    return f"YAML syntax error: {text}"


def _tag_text(tag: str) -> str:
    return "!!" + tag[len(_TAG):] if tag.startswith(_TAG) else tag


def _inspect(root, loader) -> None:
    """Refuse what YAML would otherwise read silently or dangerously; see the module notes."""
    seen = set()
    stack = [(root, "")]
    while stack:
        node, path = stack.pop()
        line = node.start_mark.line + 1
        if node.tag not in _PLAIN_TAGS:
            raise CaseError(
                f"YAML tag {_tag_text(node.tag)!r} is not allowed (a case file is plain data)", path, line=line
            )
        if isinstance(node, ScalarNode):
            _inspect_scalar(node, path, line, loader)
            continue
        if id(node) in seen:  # an alias: checked where the anchor is
            continue
        seen.add(id(node))
        if isinstance(node, SequenceNode):
            for i, child in enumerate(node.value):
                stack.append((child, f"{path}[{i}]"))
        elif isinstance(node, MappingNode):
            first = {}
            for key_node, value_node in node.value:
                key_line = key_node.start_mark.line + 1
                if key_node.tag == _TAG + "merge":
                    items = value_node.value if isinstance(value_node, SequenceNode) else [value_node]
                    if not all(isinstance(v, MappingNode) for v in items):
                        raise CaseError(
                            "a merge key '<<' needs a section (or a list of sections) to merge", path, line=key_line
                        )
                    stack.append((value_node, path))
                    continue
                if not isinstance(key_node, ScalarNode):
                    kind = "a list" if isinstance(key_node, SequenceNode) else "a section"
                    raise CaseError(f"a key must be plain text, not {kind}", path, line=key_line)
                if key_node.tag not in _PLAIN_TAGS:
                    raise CaseError(
                        f"YAML tag {_tag_text(key_node.tag)!r} is not allowed (a case file is plain data)",
                        path,
                        line=key_line,
                    )
                sub = f"{path}.{key_node.value}" if path else key_node.value
                ident = _key_identity(key_node)
                if ident in first:
                    raise CaseError(f"key given twice in one section (first on line {first[ident]})", sub, line=key_line)
                first[ident] = key_line
                stack.append((value_node, sub))


def _inspect_scalar(node, path, line, loader) -> None:
    text = node.value
    if node.tag in (_TAG + "int", _TAG + "float") and node.style is None:
        if _OCTAL.match(text) and text.strip("+-0_"):
            digits = text.lstrip("+-").lstrip("0_") or "0"
            raise CaseError(
                f"a number with a leading zero is octal in YAML (it would be {int(text.replace('_', ''), 8)}); "
                f"write {text[0] if text[0] in '+-' else ''}{digits}",
                path,
                Raw(text),
                line=line,
            )
        if _BASE60.match(text):
            raise CaseError(
                "YAML reads numbers with ':' in base 60 (2:30 is 150); write a plain number, or quote text",
                path,
                Raw(text),
                line=line,
            )
        if _HEX_OR_BINARY.match(text):
            raise CaseError("hexadecimal and binary numbers are not accepted; write a decimal number", path, Raw(text), line=line)
        if node.tag == _TAG + "int" and sum(c.isdigit() for c in text) > _MAX_INT_DIGITS:
            raise CaseError(
                f"is too large a number (more than {_MAX_INT_DIGITS} digits)", path, Raw(text[:20] + "..."), line=line
            )
    if node.tag in (_TAG + "int", _TAG + "float", _TAG + "timestamp", _TAG + "bool", _TAG + "null"):
        try:
            loader.construct_object(node)
        except Exception as exc:  # noqa: BLE001 - PyYAML's scalar converters raise many types ('!!int ' -> IndexError)
            problem = getattr(exc, "problem", None) or str(exc) or "not a valid " + node.tag[len(_TAG):]
            raise CaseError(f"YAML cannot read this value ({problem[:80]})", path, Raw(text[:40]), line=line) from None

"""House rules that keep damper/ readable, checked on the source with ``ast``.

Source: issue 18's definition of done and DEVELOPERS.md's conventions ("modules <= 600 lines,
functions <= 80 lines"; "no command imports another command"; "nothing outside damper/case
reads a raw case dict"). The output layer's imports are checked in tests/test_output_layers.py,
``Case.raw`` reads in tests/test_case_sections.py; each walk here is shown to catch a planted
breach, so none of these tests passes by finding nothing to look at.
"""

from __future__ import annotations

import ast
import os

from .test_output_layers import imported_modules

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
MAX_MODULE_LINES = 600  # common practice here: DEVELOPERS.md, "Conventions"
MAX_FUNCTION_LINES = 80  # common practice here: DEVELOPERS.md, "Conventions"
#: Functions allowed above MAX_FUNCTION_LINES, each with the place in the docs that says why (none today).
LONG_FUNCTIONS: dict = {}
#: The case layer's modules that turn the file's text into validated values (only damper/case reads those).
RAW_CASE_MODULES = ("damper.case.yamlio", "damper.case.schema", "damper.case.checks", "damper.case.spec_types")


def _modules(top):
    """(path relative to the parent of `top`'s package, module name, source) of every module under `top`."""
    parent = os.path.dirname(top)
    for base, _, names in os.walk(top):
        for name in sorted(names):
            if name.endswith(".py"):
                path = os.path.join(base, name)
                rel = os.path.relpath(path, parent)
                module = rel[:-3].replace(os.sep, ".")
                with open(path, encoding="utf-8") as fh:
                    yield rel, module, path, fh.read()


def long_modules(top, limit=MAX_MODULE_LINES):
    return [(rel, n) for rel, _, _, text in _modules(top) if (n := len(text.splitlines())) > limit]


def long_functions(top, limit=MAX_FUNCTION_LINES):
    found = []
    for rel, _, path, text in _modules(top):
        for node in ast.walk(ast.parse(text, path)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                first = min([node.lineno] + [d.lineno for d in node.decorator_list])
                n = node.end_lineno - first + 1
                if n > limit and f"{rel}:{node.name}" not in LONG_FUNCTIONS:
                    found.append((rel, node.name, n))
    return found


def commands_importing_commands(top, commands):
    """(command, imported command, line) of every import of one command module by another."""
    found = []
    for _, module, path, _ in _modules(top):
        module = module.removesuffix(".__init__")
        if module not in commands:
            continue
        for name, line in imported_modules(path, module):
            hit = [c for c in commands if c != module and (name == c or name.startswith(c + "."))]
            found += [(module, c, line) for c in hit]
    return sorted(set(found))  # `from .x import y` names both x and x.y


def raw_case_readers(top):
    """(module, imported module, line) of every import of the case layer's raw-value modules outside damper.case."""
    found = []
    for _, module, path, _ in _modules(top):
        if module.startswith("damper.case."):
            continue
        for name, line in imported_modules(path, module):
            found += [(module, name, line) for m in RAW_CASE_MODULES if name == m or name.startswith(m + ".")]
    return found


def test_no_module_over_600_lines():
    assert long_modules(os.path.join(ROOT, "damper")) == []


def test_no_function_over_80_lines():
    assert long_functions(os.path.join(ROOT, "damper")) == []


def test_no_command_imports_another_command():
    from damper.cli import COMMAND_MODULES

    assert len(COMMAND_MODULES) >= 7  # [derived] damper --help lists seven sub-commands
    assert commands_importing_commands(os.path.join(ROOT, "damper"), COMMAND_MODULES) == []


def test_nothing_outside_the_case_layer_reads_the_validated_values():
    assert raw_case_readers(os.path.join(ROOT, "damper")) == []


def test_each_walk_catches_a_planted_breach(tmp_path):
    top = tmp_path / "damper"
    (top / "commands").mkdir(parents=True)
    (top / "case").mkdir()
    for d in (top, top / "commands", top / "case"):
        (d / "__init__.py").write_text("")
    body = "\n".join(f"    x = {i}" for i in range(MAX_FUNCTION_LINES))  # a def line and 80 more: 81 lines
    (top / "commands" / "big.py").write_text(
        "from .other import run as other_run\n"  # line 1: a command importing a command
        f"def long():\n{body}\n"
        "def short():\n    from damper.case.schema import check\n"  # reads the raw values
        + "\n" * (MAX_MODULE_LINES - MAX_FUNCTION_LINES - 3)  # 84 lines so far: one over the module limit
    )
    (top / "commands" / "other.py").write_text("def run():\n    return 0\n")
    (top / "case" / "load.py").write_text("from .schema import check\n")  # allowed: the case layer itself
    commands = ("damper.commands.big", "damper.commands.other")
    assert long_modules(str(top)) == [(os.path.join("damper", "commands", "big.py"), MAX_MODULE_LINES + 1)]
    assert long_functions(str(top)) == [(os.path.join("damper", "commands", "big.py"), "long", MAX_FUNCTION_LINES + 1)]
    assert commands_importing_commands(str(top), commands) == [("damper.commands.big", "damper.commands.other", 1)]
    lines = sorted({line for *_, line in raw_case_readers(str(top))})
    assert lines == [MAX_FUNCTION_LINES + 4]  # [derived] the planted import's line: 1 + 81 + 1 + 1

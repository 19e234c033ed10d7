"""Output receives results: no module under damper/output imports the model or the measures.

Source: the layer rule of DEVELOPERS.md ("A lower layer never imports a higher one. Plotting
and file output never compute measures") and issue 18's definition of done ("damper/output
imports nothing from damper/model or damper/measures"). Every import is found with ``ast``,
also those inside functions (the package imports numpy-heavy modules lazily), and relative
imports are resolved against the module's package.
"""

from __future__ import annotations

import ast
import os

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FORBIDDEN = ("damper.model", "damper.measures")


def imported_modules(path, module):
    """Absolute names of every module `path` (the module `module`) imports, with their line numbers."""
    with open(path, encoding="utf-8") as fh:
        tree = ast.parse(fh.read(), path)
    package = module.split(".") if os.path.basename(path) == "__init__.py" else module.split(".")[:-1]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(a.name, node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - (node.level - 1)]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module
            found.append((name, node.lineno))
            found += [(f"{name}.{a.name}", node.lineno) for a in node.names]  # `from damper import model`
    return found


def forbidden_imports(top):
    """(file, line, module) of every import of the model or the measures under the package dir `top`."""
    bad = []
    outside = os.path.dirname(top)
    while os.path.exists(os.path.join(outside, "__init__.py")):  # module names start at the top package
        outside = os.path.dirname(outside)
    for base, _, names in os.walk(top):
        for name in sorted(names):
            if not name.endswith(".py"):
                continue
            path = os.path.join(base, name)
            rel = os.path.relpath(path, outside)
            module = rel[:-3].replace(os.sep, ".").removesuffix(".__init__")
            if name == "__init__.py":
                module += ".__init__"
            for mod, line in imported_modules(path, module):
                if any(mod == f or mod.startswith(f + ".") for f in FORBIDDEN):
                    bad.append((os.path.relpath(path, ROOT), line, mod))
    return bad


def test_output_imports_neither_the_model_nor_the_measures():
    bad = forbidden_imports(os.path.join(ROOT, "damper", "output"))
    assert bad == [], "\n".join(f"{p}:{line}: imports {m}" for p, line, m in bad)


def test_the_walk_finds_every_form_of_a_forbidden_import(tmp_path):
    """The check can fail: a planted package with each import form is caught, line by line."""
    pkg = tmp_path / "damper" / "output" / "figures"
    pkg.mkdir(parents=True)
    for d in (tmp_path / "damper", tmp_path / "damper" / "output", pkg):
        (d / "__init__.py").write_text("")
    (pkg / "bad.py").write_text(
        "import numpy as np\n"
        "from ...model.loop import loop_response\n"  # relative, two levels up
        "from ..style import PALETTE\n"  # allowed
        "def f():\n"
        "    import damper.measures.modes\n"  # absolute, inside a function
        "    from damper import model\n"  # the package itself as a name
        "    from ...analysis.assess import assess\n"  # allowed here (analysis)
    )
    bad = forbidden_imports(str(tmp_path / "damper" / "output"))
    lines = sorted({(line, mod.split(".")[1]) for _, line, mod in bad})
    assert lines == [(2, "model"), (5, "measures"), (6, "model")]  # [derived] the planted lines above


def test_captions_live_with_their_figures_only():
    """Source: issue 18 ("captions and labels come from the figures ..., not from copies"): every
    family's FigureKind has a stem and a caption, stems are unique, and no caption is typed again
    in the report's modules."""
    import glob

    from damper.output.figures import design, failures, robustness, schedule
    from damper.output.figures.kinds import FigureKind

    kinds = [k for family in (design, failures, robustness, schedule) for k in family.KINDS]
    assert all(isinstance(k, FigureKind) and k.stem and k.caption for k in kinds)
    assert len({k.stem for k in kinds}) == len(kinds)
    report = "".join(open(p, encoding="utf-8").read() for p in glob.glob(os.path.join(ROOT, "damper", "output", "report", "*.py")))
    copied = [k.caption for k in kinds if len(k.caption) > 25 and k.caption[:25] in report]
    assert copied == []


# ---------------------------------------------------------------------------------
# output receives results: no interpolation of a schedule, no judging of a slack
# ---------------------------------------------------------------------------------
#: Methods of analysis results that compute; output receives what they give
#: (damper/analysis/schedule_figures.py interpolates the schedule for its figures).
COMPUTING_METHODS = ("gain_at",)


def _names_slack(node) -> bool:
    """Whether an expression names a slack (a variable, attribute or dict key with 'slack' in it)."""
    for n in ast.walk(node):
        name = n.id if isinstance(n, ast.Name) else n.attr if isinstance(n, ast.Attribute) else (
            n.value if isinstance(n, ast.Constant) and isinstance(n.value, str) else "")
        if "slack" in name.lower():
            return True
    return False


def _is_zero(node) -> bool:
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        node = node.operand
    return isinstance(node, ast.Constant) and not isinstance(node.value, bool) and node.value == 0


def computing_in_output(top):
    """(file, line, what) of every call of a computing method and every slack compared with zero under `top`.

    The sign of a normalised slack is the verdict (met or missed): the analysis decides it
    (``WorstCase.met``, ``SampleSplit``, the documents' ``met`` keys) and output shows it.
    """
    bad = []
    for base, _, names in os.walk(top):
        for name in sorted(names):
            if not name.endswith(".py"):
                continue
            path = os.path.join(base, name)
            with open(path, encoding="utf-8") as fh:
                tree = ast.parse(fh.read(), path)
            rel = os.path.relpath(path, os.path.dirname(os.path.dirname(top)))
            for node in ast.walk(tree):
                if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                        and node.func.attr in COMPUTING_METHODS):
                    bad.append((rel, node.lineno, f".{node.func.attr}("))
                elif isinstance(node, ast.Compare):
                    sides = [node.left, *node.comparators]
                    if any(_is_zero(s) for s in sides) and any(_names_slack(s) for s in sides if not _is_zero(s)):
                        bad.append((rel, node.lineno, ast.unparse(node)))
    return bad


def test_output_neither_interpolates_a_schedule_nor_judges_a_slack():
    """Source: issue 18's definition of done ("damper/output ... calls no analysis function that
    computes (it receives results)") and DEVELOPERS.md (output computes nothing)."""
    bad = computing_in_output(os.path.join(ROOT, "damper", "output"))
    assert bad == [], "\n".join(f"{p}:{line}: {what}" for p, line, what in bad)


def test_the_walk_finds_every_computing_call_and_slack_sign(tmp_path):
    """The check can fail: each planted form is caught on its line, and harmless code is not."""
    pkg = tmp_path / "damper" / "output"
    pkg.mkdir(parents=True)
    (pkg / "bad.py").write_text(
        "k = result.schedule.gain_at([x])\n"  # 1: interpolation in output
        "ok = np.all(result.slacks[:, i, :] >= 0, 0)\n"  # 2: judging samples
        "missed = w.slack < 0\n"  # 3
        "met = 0.0 <= entry['slack']\n"  # 4: a dict key, zero on the left
        "neg = worst_slack < -0\n"  # 5: a signed zero
        "clip = np.nanmin(slack) < -2.0\n"  # allowed: a drawing limit, not the sign
        "gain = sch.gains[0] >= 0\n"  # allowed: no slack
        "unbounded = w.slack == np.inf\n"  # allowed: not the sign
    )
    assert sorted(line for _, line, _ in computing_in_output(str(pkg))) == [1, 2, 3, 4, 5]  # [derived] the planted lines

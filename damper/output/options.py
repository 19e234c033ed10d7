"""Command-line options shared by the commands that draw figures (cheap to import: no numpy)."""

from __future__ import annotations

__all__ = ["DEFAULT_FORMATS", "KNOWN_FORMATS", "add_figures_option"]

#: Figure formats :func:`damper.output.style.save_figure` can write.
KNOWN_FORMATS = ("png", "svg")

#: The ``--figures`` default: what the report needs (it embeds the SVGs), each figure drawn once.
DEFAULT_FORMATS = "svg"


def add_figures_option(parser) -> None:
    """The ``--figures FORMATS`` option of the commands that draw figures (one text for all)."""
    parser.add_argument(
        "--figures", default=DEFAULT_FORMATS, metavar="FORMATS",
        help=f"figure formats, comma-separated: {', '.join(KNOWN_FORMATS)} or both (default {DEFAULT_FORMATS}: "
        "what the report embeds; each figure is drawn once per format, so png,svg takes about 1.5x as long)")

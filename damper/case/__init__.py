"""Case files: YAML in, a validated, immutable case in SI out."""

from .load import load_case, load_case_text  # noqa: F401

"""damper: design and verification of pitch-rate dampers.

Preliminary engineering analysis only; see README.md for the cautions.
"""

__version__ = "0.1.0"

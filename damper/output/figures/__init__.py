"""Figures, one module per family; each family lists its plot jobs with their file stems and captions.

Families: :mod:`.design` (root locus, loop response and gain sweep per condition),
:mod:`.schedule` and :mod:`.schedule_maps`, :mod:`.robustness`, :mod:`.responses`,
:mod:`.failures`, :mod:`.compare`. Every figure draws with the look of
:mod:`damper.output.style` and computes nothing: it receives analysis results.
"""

"""The self-contained HTML reports: formatting and labels (:mod:`.format`), views of the run's
documents (:mod:`.conditions`, :mod:`.sections`, :mod:`.failures`), the build and its templates
(:mod:`.build`, ``templates/``) and the comparison report (:mod:`.compare`)."""

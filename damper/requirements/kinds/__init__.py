"""The criterion kinds, a module per family; :mod:`damper.requirements.registry` lists them in order."""

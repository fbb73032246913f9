"""Figure builders: one small module per figure kind, all sharing ``scan.plots.style``.

Builders take arrays (or small result objects) and return a matplotlib ``Figure``;
``save(fig, path_stem)`` writes PDF and PNG.  They never compute physics.  ``zetascan
plot`` reads result files through ``sources`` and ``inputs`` and calls the builders from
``make`` (one per figure kind).
"""

"""Physics: what the derived curvature means, and whether the author's claims about it hold.

``analysis`` puts together the matter content (``matter``), the energy conditions
(``energy_conditions``), horizons and surface gravity (``horizons``), singular loci
(``singularities``), closed timelike curves and light cones (``causality``), and
clocks and circular orbits (``clocks``), on the facts of the chart in ``chart``.
``claims`` decides the file's claims and its ``source`` (read in ``claim_sections``,
compared in ``comparison``, with the matter models of ``sources``).  Pure
computation on the frozen model and its curvature; nothing here prints.
"""

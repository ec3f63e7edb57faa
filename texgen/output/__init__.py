"""Output: derived results turned into paper — LaTeX and Markdown reports, JSON results, figures.

``latex`` is texgen's subclass of sympy's LaTeX printer with its width model and
line breaking; ``printer`` prints one spacetime's expressions and equations with
its names and ``shorthands``; ``context`` and ``results`` turn the curvature into
plain data for the templates and into JSON; ``sections`` does the same for the
later stages registered in ``stages``; ``figures`` draws from the derivation;
``render`` is the one Jinja2 environment and the atomic writer; ``document``
writes whole reports and the PDF.
"""

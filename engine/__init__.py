"""drillaxis engine: every computation of the tool, with no plotting imports.

Modules
-------
tables      reading collar, survey and interval tables; column matching; validation findings
desurvey    station directions, minimum curvature and tangential methods, positions at any depth
orientation unit axes and their structural-geology terms (trend, plunge, dip direction, dip, pitch)
outputs     atomic writing of output files
cli         the ``drillaxis`` command line

Conventions (angles, dip sign, units) are in docs/conventions.md.
"""

__version__ = "0.1.0"

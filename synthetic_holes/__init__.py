"""Seeded synthetic drill programs with a known truth (the invented Tarn Hill scenario).

>>> from synthetic_holes import ProgramSpec, generate_program
>>> program = generate_program(ProgramSpec(n_along=3, n_lines=2, hole_length_m=50), seed=7)
>>> sorted(program.truth["model"])[:3]
['axes', 'nugget', 'orientation']
"""

from .field import SHAPES, SpectralField, covariance, spectral_frequencies
from .program import FieldSpec, Program, ProgramSpec, Structure, generate_program

__all__ = [
    "SHAPES", "SpectralField", "covariance", "spectral_frequencies",
    "FieldSpec", "Program", "ProgramSpec", "Structure", "generate_program",
]

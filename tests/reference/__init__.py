"""Slow, obvious reference implementations that the fast kernels are compared against."""

"""Compiled-kernel plumbing: the numba cache stamp and the warm-up run before serving."""

"""The numeric core: numba-compiled STL and helpers on flat arrays, nothing else imported."""

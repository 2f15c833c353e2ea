"""Colour mathematics over arrays of shape (..., 3). Depends on nothing else of ours."""

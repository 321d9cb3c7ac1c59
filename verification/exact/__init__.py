"""Exact solutions: the case contract and the catalogue registry."""

from .case import ExactCase, PartSpec, Reference

__all__ = ["ExactCase", "PartSpec", "Reference"]

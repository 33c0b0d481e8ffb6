"""The worksheet layer: plain Python functions named as in DESIGN.md's catalogue."""

from .functions import VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLRISK, VOLSERIES, VOLTESTS

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "VOLTESTS", "VOLRISK", "VOLCOMPARE"]

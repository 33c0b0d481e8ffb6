"""The worksheet layer: plain Python functions named as in DESIGN.md's catalogue."""

from .functions import VOLCOMPARE, VOLCOVERAGE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK, VOLSERIES, VOLSIM, VOLTESTS

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "VOLTESTS", "VOLRISK", "VOLCOMPARE", "VOLCOVERAGE", "VOLSIM",
           "VOLNEWS"]

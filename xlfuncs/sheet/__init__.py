"""The worksheet layer: plain Python functions named as in DESIGN.md's catalogue."""

from .functions import VOLFIT, VOLFORECAST, VOLLOGLIK, VOLSERIES

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK"]

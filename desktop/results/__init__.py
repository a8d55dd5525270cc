"""The results views of the window: measurement, dynamics, innovations, fit, parameters."""

from lagwise.desktop.results.view import ResultsView

__all__ = ["ResultsView"]

"""Offline review of a bag: report with plots, calibration, counterfactual replay."""

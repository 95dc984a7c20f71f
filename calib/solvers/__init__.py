"""Solver adapters: every one maps its statuses through one table into calib.solvers.result.STATUSES."""

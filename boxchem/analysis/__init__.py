"""Analyses built on many runs: parameter sweeps (later: sensitivities, ensembles, fitting)."""
from .sweep import SweepError, parse_vary, run_sweep

__all__ = ["run_sweep", "parse_vary", "SweepError"]

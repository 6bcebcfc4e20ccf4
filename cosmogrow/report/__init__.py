"""Figures and reports drawn from results (the only layer that imports matplotlib)."""

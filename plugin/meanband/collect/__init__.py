"""Collecting trials: the clock, the timing engine, paired timing and bench logs."""

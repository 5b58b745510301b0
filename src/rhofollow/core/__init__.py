"""Shared foundations: types, weighted samples, timescales, the executor."""

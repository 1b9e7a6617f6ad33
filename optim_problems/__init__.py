"""Benchmark and scheduling problem families, reached by name through :mod:`optim.objectives.registry`."""

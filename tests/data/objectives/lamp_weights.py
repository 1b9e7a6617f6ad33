"""Weights imported by uses_neighbour.py (an invented example)."""

import numpy as np

WEIGHTS = np.array([1.0, 2.0, 4.0, 8.0])

"""A deceptive trap objective that takes a little time per generation, so a test can interrupt it."""

import time

import numpy as np


def score(X):
    time.sleep(0.03)
    ones = X.reshape(X.shape[0], -1, 3).sum(axis=2)
    return np.where(ones == 3, 3, 2 - ones).sum(axis=1).astype(float)

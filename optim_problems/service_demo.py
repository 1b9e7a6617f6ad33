"""An invented demo: find the fast settings of a simulated ticket-booking backend.

The service has 40 on/off toggles (``1`` = on). Its simulated latency in
milliseconds, to minimise, is a sum of terms::

    latency = base + sum_i main[i] * x[i] + sum over planted pairs of pair(x[a], x[b]) + noise

with ``base = 250`` and three kinds of planted pair:

``synergy`` (strength ``g > 0``): ``-g * x[a] * x[b]``
    Each toggle alone does not lower the latency (its main effect is ``>= 0``),
    the two together do.
``conflict`` (strength ``h > 0``): ``+h * x[a] * x[b]``
    Each toggle alone lowers the latency (main effect ``< 0``), but with both
    on the latency is higher than with both off.
``must-match`` (strength ``k > 0``): ``+k * (x[a] != x[b])``
    A mismatched pair is slower than either matched setting.

The statements after each kind hold with every other toggle off. Over any
background (the other toggles set in any way) the 2x2 interaction contrast
``f(11) - f(10) - f(01) + f(00)`` of a pair is exactly ``-g`` (synergy),
``+h`` (conflict) or ``-2k`` (must-match), since the model has no terms of
higher order. The structure is fixed (listed in :data:`TOGGLES` and
:data:`PLANTED`); ``seed`` only drives the optional Gaussian noise.

Because the objective is a sum of terms, the exact optimum comes from setting
each toggle without interactions by the sign of its main effect and
enumerating each connected group of interacting toggles (at most four here).
With all 40 toggles the optimum is 79 ms, reached by a single setting of the
toggles that have any effect (the ten with no effect may be either way).
"""

from __future__ import annotations

from typing import Dict, List, NamedTuple

import numpy as np

from optim.problem import Problem

__all__ = [
    "ServiceLatency",
    "service_latency",
    "PlantedPair",
    "TOGGLES",
    "PLANTED",
    "BASE_LATENCY",
    "PAIR_KINDS",
]

#: Latency with every toggle off (ms).
BASE_LATENCY = 250.0

#: The toggles in variable order with their main effects (ms; negative = faster).
TOGGLES = (
    ("connection-pool", -12.0),
    ("query-cache", 3.0),
    ("cache-warmup", 2.0),
    ("gzip-responses", -15.0),
    ("brotli-responses", -18.0),
    ("verbose-tracing", 14.0),
    ("payment-api-v3", -4.0),
    ("payment-webhooks-v3", -2.0),
    ("dark-mode-banner", 0.0),
    ("http-keepalive", -6.0),
    ("edge-rendering", -9.0),
    ("warmup-scheduler", 1.0),
    ("debug-sql-log", 20.0),
    ("new-checkout-copy", 0.0),
    ("prefetch-seats", 2.0),
    ("seat-map-snapshot", 1.0),
    ("optimistic-locking", -10.0),
    ("seat-hold-locks", -12.0),
    ("index-hints", -9.0),
    ("read-replicas", 4.0),
    ("replica-routing", 0.0),
    ("sync-audit-write", 11.0),
    ("edge-cdn-offload", -8.0),
    ("utc-timestamps", 0.0),
    ("timezone-normaliser", -1.0),
    ("batch-inserts", -4.0),
    ("fraud-check-inline", 7.0),
    ("legacy-session-store", 9.0),
    ("http2-push", -5.0),
    ("precompressed-assets", -3.0),
    ("feature-flag-ui", 0.0),
    ("loyalty-badges", 0.0),
    ("seat-recommendations", 0.0),
    ("holiday-theme", 0.0),
    ("ab-test-banner", 0.0),
    ("email-receipts-html", 0.0),
    ("waitlist-widget", 0.0),
    ("accessibility-audit-mode", 0.0),
    ("analytics-beacon", 0.0),
    ("queue-metrics-export", 0.0),
)

PAIR_KINDS = ("synergy", "conflict", "must-match")


class PlantedPair(NamedTuple):
    """A planted pairwise interaction (strength in ms, always positive)."""

    a: str
    b: str
    kind: str
    strength: float


#: The planted interactions. Two groups chain several pairs: query-cache,
#: cache-warmup, warmup-scheduler; and gzip-responses, brotli-responses,
#: edge-rendering, edge-cdn-offload.
PLANTED = (
    PlantedPair("query-cache", "cache-warmup", "synergy", 40.0),
    PlantedPair("cache-warmup", "warmup-scheduler", "must-match", 30.0),
    PlantedPair("prefetch-seats", "seat-map-snapshot", "synergy", 25.0),
    PlantedPair("read-replicas", "replica-routing", "synergy", 35.0),
    PlantedPair("gzip-responses", "brotli-responses", "conflict", 45.0),
    PlantedPair("brotli-responses", "edge-rendering", "conflict", 30.0),
    PlantedPair("edge-cdn-offload", "edge-rendering", "conflict", 25.0),
    PlantedPair("optimistic-locking", "seat-hold-locks", "conflict", 40.0),
    PlantedPair("payment-api-v3", "payment-webhooks-v3", "must-match", 60.0),
    PlantedPair("utc-timestamps", "timezone-normaliser", "must-match", 30.0),
)

#: Largest group of interacting toggles enumerated for the optimum.
_MAX_GROUP = 20


def _groups(count: int, pairs) -> List[List[int]]:
    """Connected groups (sorted index lists) of the interaction graph on ``count`` toggles."""
    parent = list(range(count))

    def root(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in pairs:
        parent[root(i)] = root(j)
    members: Dict[int, List[int]] = {}
    for i in range(count):
        members.setdefault(root(i), []).append(i)
    return [sorted(group) for group in members.values() if len(group) > 1]


class ServiceLatency(Problem):
    """Simulated latency (ms) of the ticket-booking backend, to minimise.

    Parameters
    ----------
    toggles : int
        Use the first ``toggles`` entries of :data:`TOGGLES` (2 … 40) and the
        planted pairs among them.
    noise : float
        Standard deviation (ms) of Gaussian noise added to every score; 0 for none.
    seed : int
        Seed of the noise stream.
    """

    def __init__(self, toggles: int = 40, noise: float = 0.0, seed: int = 0):
        if int(toggles) != toggles or not 2 <= toggles <= len(TOGGLES):
            raise ValueError(f"toggles must be an integer between 2 and {len(TOGGLES)}; got {toggles!r}")
        noise = float(noise)
        if not np.isfinite(noise) or noise < 0:
            raise ValueError(f"noise must be a non-negative number; got {noise!r}")
        toggles = int(toggles)
        names = [name for name, _ in TOGGLES[:toggles]]
        index = {name: i for i, name in enumerate(names)}
        self.base_latency = BASE_LATENCY
        self.main_effects = {name: effect for name, effect in TOGGLES[:toggles]}
        self.interactions = [pair for pair in PLANTED if pair.a in index and pair.b in index]
        self.planted_pairs = [(pair.a, pair.b, pair.kind) for pair in self.interactions]
        self.noise = noise
        self.seed = seed

        linear = np.array([effect for _, effect in TOGGLES[:toggles]], dtype=np.float64)
        first, second, coefficient = [], [], []
        for pair in self.interactions:
            i, j = index[pair.a], index[pair.b]
            first.append(i)
            second.append(j)
            if pair.kind == "synergy":
                coefficient.append(-pair.strength)
            elif pair.kind == "conflict":
                coefficient.append(pair.strength)
            else:
                linear[i] += pair.strength
                linear[j] += pair.strength
                coefficient.append(-2.0 * pair.strength)
        self._linear = linear
        self._first = np.array(first, dtype=np.int64)
        self._second = np.array(second, dtype=np.int64)
        self._coefficient = np.array(coefficient, dtype=np.float64)
        self._rng = np.random.default_rng(seed)

        settings, best = self._optimal_settings(toggles)
        self.optimal_settings = settings
        self.relevant_toggles = sorted({name for pair in self.interactions for name in (pair.a, pair.b)})
        source = "independent toggles by the sign of their main effect; interacting groups enumerated"
        if noise > 0:
            source += f" (noise-free latency; scores carry Gaussian noise of sd {noise:g} ms)"
        super().__init__(
            toggles,
            cardinality=2,
            goal="minimize",
            optimum=best,
            optimum_source=source,
            name=f"service-latency-{toggles}",
            variable_names=names,
        )

    def _optimal_settings(self, toggles: int):
        """An optimal setting (ties resolved towards off) and its noise-free latency."""
        settings = (self._linear < 0).astype(np.uint8)
        groups = _groups(toggles, zip(self._first.tolist(), self._second.tolist(), strict=True))
        for group in groups:
            size = len(group)
            if size > _MAX_GROUP:
                raise ValueError(f"an interacting group of {size} toggles is too large to enumerate")
            codes = np.arange(1 << size, dtype=np.int64)
            table = ((codes[:, None] >> np.arange(size)[None, :]) & 1).astype(np.uint8)
            candidates = np.repeat(settings[None, :], table.shape[0], axis=0)
            candidates[:, group] = table
            settings = candidates[int(np.argmin(self.expected_latency(candidates)))]
        return settings, float(self.expected_latency(settings[None, :])[0])

    def expected_latency(self, X: np.ndarray) -> np.ndarray:
        """Noise-free latency (ms) of each candidate."""
        X = np.asarray(X)
        if X.ndim != 2 or X.shape[1] != self._linear.size:
            raise ValueError(f"expected candidates of shape (count, {self._linear.size}); got {X.shape}")
        if X.size and X.max() > 1:
            raise ValueError("toggles take 0/1 values only")
        values = X.astype(np.float64)
        pairs = values[:, self._first] * values[:, self._second]
        return self.base_latency + values @ self._linear + pairs @ self._coefficient

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        """Latency (ms) of each candidate, with noise when ``noise > 0``."""
        latency = self.expected_latency(X)
        if self.noise > 0:
            latency = latency + self._rng.normal(0.0, self.noise, size=latency.shape[0])
        return latency

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(
            noise=self.noise,
            seed=self.seed,
            planted_pairs=[list(pair) for pair in self.planted_pairs],
        )
        return summary


def service_latency(noise: float = 0.0, seed: int = 0, toggles: int = 40) -> ServiceLatency:
    """The simulated ticket-booking backend (an invented demo of planted toggle interactions).

    Parameters
    ----------
    noise : float
        Standard deviation (ms) of Gaussian noise on each score; 0 makes it deterministic.
    seed : int
        Seed of the noise stream (the planted structure is fixed).
    toggles : int
        Number of toggles, the first ones of the fixed list (2 to 40).

    Returns
    -------
    ServiceLatency
    """
    return ServiceLatency(toggles=toggles, noise=noise, seed=seed)

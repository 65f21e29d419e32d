"""Simulated fields with a known truth for the unattended-analysis benchmark.

Each scenario is a Gaussian random field (plus, for one, a linear drift) simulated jointly
at the samples and at a regular grid of unsampled nodes by Cholesky factorisation of the
covariance matrix (``scipy.linalg.cholesky``; simulating a Gaussian vector as L·w with w
standard normal is common practice). The covariances are written here in numpy from the
service's published conventions (DESIGN §4 "Precise conventions": practical ranges, the
azimuth of the longest range clockwise from north, ``ratio`` × range across it) and not
taken from the service, so a convention mismatch shows up as a loss of efficiency.

Coordinates are invented, in metres: a 1,000 m square whose south-west corner is at
(431,000; 5,262,000).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import cholesky

ORIGIN = (431_000.0, 5_262_000.0)
SIDE = 1_000.0
GRID_NODES = 15
JITTER = 1e-9


def _unit_shape(family: str, h: np.ndarray) -> np.ndarray:
    """Semivariance of a unit structure at reduced distance ``h`` (distance / practical range)."""
    if family == "spherical":
        return np.where(h < 1.0, 1.5 * h - 0.5 * h**3, 1.0)
    if family == "exponential":
        return 1.0 - np.exp(-3.0 * h)  # scale = range / 3
    if family == "gaussian":
        return 1.0 - np.exp(-3.0 * h**2)  # scale = range / sqrt(3)
    raise ValueError(f"unknown family {family!r}")


def _reduced_distance(structure: dict, dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    anisotropy = structure.get("anisotropy")
    if anisotropy is None:
        return np.hypot(dx, dy) / structure["range"]
    azimuth = np.radians(anisotropy["azimuth"])
    along = dx * np.sin(azimuth) + dy * np.cos(azimuth)  # unit vector of the azimuth: (sin, cos)
    across = dx * np.cos(azimuth) - dy * np.sin(azimuth)
    return np.hypot(along, across / anisotropy["ratio"]) / structure["range"]


def semivariance(model: dict, dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """Semivariance of a model given as the API's JSON object, at separations (dx, dy) in metres.

    The nugget is a jump at the origin: gamma(0) = 0 and gamma(h) includes it for h > 0.
    """
    dx, dy = np.asarray(dx, dtype=float), np.asarray(dy, dtype=float)
    gamma = np.where((dx == 0) & (dy == 0), 0.0, model["nugget"])
    for structure in model["structures"]:
        gamma = gamma + structure["partial_sill"] * _unit_shape(
            structure["family"], _reduced_distance(structure, dx, dy)
        )
    return gamma


def sill(model: dict) -> float:
    """Total sill (nugget plus partial sills)."""
    return model["nugget"] + sum(s["partial_sill"] for s in model["structures"])


def simulate(model: dict, points: np.ndarray, rng: np.random.Generator, count: int | None = None) -> np.ndarray:
    """Zero-mean realisations at ``points`` (n × 2, metres) with covariance sill − gamma(h).

    Returns shape (n,) for one realisation, or (n, count) for ``count`` independent ones.
    A relative jitter of 1e-9 of the sill on the diagonal keeps the factorisation of smooth
    (gaussian) covariances numerically positive definite.
    """
    dx = points[:, None, 0] - points[None, :, 0]
    dy = points[:, None, 1] - points[None, :, 1]
    covariance = sill(model) - semivariance(model, dx, dy)
    factor = cholesky(covariance + JITTER * sill(model) * np.eye(len(points)), lower=True)
    return factor @ rng.standard_normal(len(points) if count is None else (len(points), count))


def grid_nodes(count: int = GRID_NODES) -> tuple[dict, np.ndarray]:
    """The unsampled nodes: the API grid object and the node coordinates (x fastest)."""
    spacing = SIDE / count
    origin = (ORIGIN[0] + spacing / 2, ORIGIN[1] + spacing / 2)
    xs = origin[0] + spacing * np.arange(count)
    ys = origin[1] + spacing * np.arange(count)
    gx, gy = np.meshgrid(xs, ys)  # rows by y, x fastest
    grid = {"origin": list(origin), "spacing": [spacing, spacing], "shape": [count, count]}
    return grid, np.column_stack([gx.ravel(), gy.ravel()])


def uniform_design(count: int, rng: np.random.Generator) -> np.ndarray:
    """Sample locations uniform over the square."""
    return np.asarray(ORIGIN) + rng.uniform(0.0, SIDE, (count, 2))


def clustered_design(count: int, rng: np.random.Generator, *, clusters: int = 8, spread: float = 35.0) -> np.ndarray:
    """A third of the samples uniform, the rest in tight clusters (normal scatter of ``spread`` m)."""
    background = count // 3
    centres = rng.uniform(0.1 * SIDE, 0.9 * SIDE, (clusters, 2))
    members = centres[rng.integers(0, clusters, count - background)] + rng.normal(0.0, spread, (count - background, 2))
    local = np.vstack([rng.uniform(0.0, SIDE, (background, 2)), np.clip(members, 0.0, SIDE)])
    return np.asarray(ORIGIN) + local


@dataclass(frozen=True)
class Scenario:
    """A simulated field with a known truth.

    Attributes
    ----------
    name : str
        Short label printed in the table.
    model : dict
        The true covariance model (the API's JSON form; metres, value units squared).
    samples : int
        Number of samples kept.
    mean : float
        Constant mean of the field (value units).
    drift : tuple of float, optional
        (a, b): a linear drift a·(x − x0)/SIDE + b·(y − y0)/SIDE added to the field.
    design : str
        ``uniform``, ``clustered`` or ``hot_spot`` (high values over-sampled).
    """

    name: str
    model: dict
    samples: int = 250
    mean: float = 10.0
    drift: tuple[float, float] | None = None
    design: str = "uniform"
    notes: str = field(default="")

    @property
    def ratio(self) -> float:
        """Smallest anisotropy ratio of the true model (1 for isotropic models)."""
        return min([s.get("anisotropy", {}).get("ratio", 1.0) for s in self.model["structures"]] or [1.0])

    @property
    def noise(self) -> bool:
        """True for a pure nugget (independent values)."""
        return not self.model["structures"]


def _structure(family, partial_sill, range_, azimuth=None, ratio=None) -> dict:
    structure = {"family": family, "partial_sill": partial_sill, "range": range_}
    if azimuth is not None:
        structure["anisotropy"] = {"azimuth": azimuth, "ratio": ratio}
    return structure


SCENARIOS = (
    Scenario("isotropic", {"nugget": 0.1, "structures": [_structure("spherical", 0.9, 300.0)]}),
    Scenario(
        "nested",
        {"nugget": 0.05, "structures": [_structure("spherical", 0.4, 90.0), _structure("spherical", 0.55, 500.0)]},
        samples=300,
    ),
    Scenario(
        "anisotropic",
        {"nugget": 0.05, "structures": [_structure("exponential", 0.95, 500.0, 30.0, 0.3)]},
        samples=300,
    ),
    Scenario(
        "trend",
        {"nugget": 0.1, "structures": [_structure("spherical", 0.9, 250.0)]},
        drift=(3.0, -2.0),
    ),
    Scenario("smooth", {"nugget": 0.02, "structures": [_structure("gaussian", 0.98, 350.0)]}),
    Scenario(
        "clustered",
        {"nugget": 0.1, "structures": [_structure("spherical", 0.9, 450.0, 120.0, 0.4)]},
        samples=300,
        design="clustered",
    ),
    Scenario(
        "hot_spot",
        {"nugget": 0.05, "structures": [_structure("exponential", 0.95, 450.0, 60.0, 0.4)]},
        design="hot_spot",
    ),
    Scenario("noise", {"nugget": 1.0, "structures": []}, samples=300),
)

HOT_SPOT_CANDIDATES = 1200
HOT_SPOT_STRENGTH = 1.5


@dataclass(frozen=True)
class Field:
    """One realisation: samples (x, y, value) and the truth at the grid nodes."""

    scenario: Scenario
    seed: int
    coords: np.ndarray
    values: np.ndarray
    grid: dict
    nodes: np.ndarray
    truth: np.ndarray


def _drift(scenario: Scenario, points: np.ndarray) -> np.ndarray:
    if scenario.drift is None:
        return np.zeros(len(points))
    a, b = scenario.drift
    return a * (points[:, 0] - ORIGIN[0]) / SIDE + b * (points[:, 1] - ORIGIN[1]) / SIDE


def realise(scenario: Scenario, seed: int, *, samples: int | None = None, nodes: int = GRID_NODES) -> Field:
    """Simulate ``scenario`` with ``seed``; ``samples`` overrides the scenario's sample count."""
    rng = np.random.default_rng(seed)
    count = samples or scenario.samples
    grid, node_xy = grid_nodes(nodes)
    if scenario.design == "hot_spot":
        candidates = uniform_design(HOT_SPOT_CANDIDATES, rng)
    elif scenario.design == "clustered":
        candidates = clustered_design(count, rng)
    else:
        candidates = uniform_design(count, rng)
    points = np.vstack([candidates, node_xy])
    if scenario.noise:
        field_ = np.sqrt(scenario.model["nugget"]) * rng.standard_normal(len(points))
    else:
        field_ = simulate(scenario.model, points, rng)
    field_ = scenario.mean + field_ + _drift(scenario, points)
    at_candidates, truth = field_[: len(candidates)], field_[len(candidates) :]
    if scenario.design == "hot_spot":
        # Preferential sampling: inclusion odds grow exponentially with the standardised value.
        z = (at_candidates - at_candidates.mean()) / at_candidates.std()
        odds = np.exp(HOT_SPOT_STRENGTH * z)
        keep = rng.choice(len(candidates), size=count, replace=False, p=odds / odds.sum())
        candidates, at_candidates = candidates[keep], at_candidates[keep]
    return Field(scenario, seed, candidates, at_candidates, grid, node_xy, truth)

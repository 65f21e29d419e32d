"""Conditioning unconditional realisations by kriging their residuals at the samples.

For a realisation U of the unconditional field (mean 0, the model's covariance, nugget
included) with values U(s_i) at the samples, the conditional realisation is

    simple:    Y(x) = m + U(x) + sum_i lambda_i(x) (y_i - m - U(s_i))
    ordinary:  Y(x) =     U(x) + sum_i lambda_i(x) (y_i - U(s_i))

with lambda(x) the kriging weights of x from the samples (Journel 1974, *Math.
Geology* 6(2); Journel & Huijbregts 1978, *Mining Geostatistics*, section VII.B.2;
Chilès & Delfiner 2012, section 7.3.1). Its mean and covariance are the kriging
estimate and the kriging-error covariance, whatever the realisation, so the weights
depend only on the locations: they are found once and applied to the residuals of
every realisation.

* Unique neighbourhood: the bordered system A = [[K, F], [F', 0]] is factorised once.
  With right-hand side [k(x); f(x)], lambda(x)' r = [k(x); f(x)]' A^-1 [r; 0], so each
  realisation's residuals r are solved once, A^-1 [r; 0], and combined with k(x) at
  each node: the same numbers as forming the weights, at n per node and realisation
  instead of n^2 per node.
* Moving neighbourhood: each node's weights (k neighbours) come from the same batched
  solves as predictions and are applied to the residuals of its neighbours.

With a micro-scale nugget a node on a sample takes its value (weight 1), as kriging does.
"""

from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.spatial import cKDTree
from scipy.spatial.distance import cdist

from ..data.samples import SampleSet
from ..deadline import check_deadline
from ..errors import InvalidInput, SingularSystem
from ..kriging.conditioning import RCOND_MIN, pivot_ratios
from ..kriging.cost import batch_rows
from ..kriging.neighbourhood import Neighbourhood, to_search_space
from ..kriging.systems import Covariance, Kriger, KrigingSpec
from ..modelling.models import VariogramModel, unit_semivariance

FLOAT = 8
COMPACT = ("spherical", "cubic", "pentaspherical", "circular")  # reach their sill at the range, exactly


class ResidualKriging:
    """Kriging weights of grid nodes from the samples, applied to realisations' residuals.

    Parameters
    ----------
    samples : SampleSet
        The samples, values in the transformed space.
    model : VariogramModel
        The model in transformed units (bounded).
    spec : KrigingSpec
        ``simple`` (with its mean) or ``ordinary``.
    neighbourhood : Neighbourhood
        Unique or moving.
    max_unique : int
        ``LAGWISE_MAX_UNIQUE_SAMPLES``.
    memory_budget : int
        Bytes for one chunk's working arrays.
    """

    def __init__(
        self,
        samples: SampleSet,
        model: VariogramModel,
        spec: KrigingSpec,
        neighbourhood: Neighbourhood,
        *,
        max_unique: int,
        memory_budget: int,
    ):
        self.kriger = Kriger(samples, model, spec, neighbourhood, max_unique=max_unique, memory_budget=memory_budget)
        self.samples = samples
        self.spec = spec
        self.cov = Covariance(model, spec)
        self.memory_budget = memory_budget
        self.unique = neighbourhood.unique
        self._spaces = [to_search_space(samples.coords, s.anisotropy) for s in self.cov.structural.structures]
        self._trees = [
            cKDTree(space) if s.family in COMPACT else None
            for s, space in zip(self.cov.structural.structures, self._spaces, strict=True)
        ]

    def residuals(self, at_samples: np.ndarray) -> np.ndarray:
        """Residuals (n, R) of realisations whose unconditional values at the samples are ``at_samples`` (n, R)."""
        shift = self.spec.mean if self.spec.type == "simple" else 0.0
        return (self.samples.values - shift)[:, None] - at_samples

    def prepare(self, residuals: np.ndarray) -> np.ndarray:
        """What the node corrections need: A^-1 [r; 0] (unique) or the residuals themselves (moving)."""
        if not self.unique:
            return residuals
        p = self.kriger.drift_terms
        return self.kriger.solve_unique(np.vstack([residuals, np.zeros((p, residuals.shape[1]))]))

    def rows_per_chunk(self, realisations: int) -> int:
        """Nodes whose correction one step may hold within the memory budget (>= 1)."""
        if self.unique:
            per_node = FLOAT * (3 * self.samples.size + 2 * realisations)
        else:
            k = self.kriger.neighbourhood.max_points or 1
            per_node = FLOAT * (k * (realisations + 2) + 2 * realisations)
        return max(1, self.memory_budget // per_node)

    def correction(self, nodes: np.ndarray, prepared: np.ndarray) -> np.ndarray:
        """sum_i lambda_i(x) r_i at nodes (c, 2) for every realisation: shape (c, R)."""
        if self.unique:
            return self._unique(nodes, prepared)
        return self._moving(nodes, prepared)

    def _unique(self, nodes: np.ndarray, solved: np.ndarray) -> np.ndarray:
        """k(x)' A^-1 [r; 0] + f(x)' (the drift part) at nodes (c, 2).

        C(h) = sum over structures of c_s (1 - g_s(h)) (+ the nugget where a node is a
        sample). Structures that reach their sill at the range (:data:`COMPACT`) add
        nothing beyond it, so their part is a sparse matrix of the node-sample pairs
        closer than the range (k-d tree search in the structure's isotropic space);
        the others are dense (``cdist``).
        """
        n = self.samples.size
        c = nodes.shape[0]
        alpha = solved[:n]
        out = np.zeros((c, alpha.shape[1]))
        dense = None
        coincident: list[tuple[np.ndarray, np.ndarray]] = []
        for structure, space, tree in zip(self.cov.structural.structures, self._spaces, self._trees, strict=True):
            at_nodes = to_search_space(nodes, structure.anisotropy)
            if tree is not None:
                pairs = cKDTree(at_nodes).sparse_distance_matrix(tree, structure.range, output_type="ndarray")
                h = pairs["v"]
                near = h < structure.range
                i, j, h = pairs["i"][near], pairs["j"][near], h[near]
                weight = structure.partial_sill * (
                    1.0 - unit_semivariance(structure.family, h, structure.range, structure.extra)
                )
                out += sparse.csr_matrix((weight, (i, j)), shape=(c, n)) @ alpha
                coincident.append((i[h == 0], j[h == 0]))
            else:
                h = cdist(at_nodes, space)
                part = structure.partial_sill * (
                    1.0 - unit_semivariance(structure.family, h, structure.range, structure.extra)
                )
                dense = part if dense is None else dense + part
                rows, cols = np.nonzero(h == 0)
                coincident.append((rows, cols))
        if dense is not None:
            out += dense @ alpha
        if self.cov.nugget:
            if coincident:
                i, j = coincident[0]
            else:
                i, j = np.nonzero(cdist(nodes, self.samples.coords) == 0)
            out[i] += self.cov.nugget * alpha[j]
        drift = self.kriger.frame.drift(self.spec, nodes)
        if drift.shape[1]:
            out += drift @ solved[n:]
        return out

    def _moving(self, nodes: np.ndarray, residuals: np.ndarray) -> np.ndarray:
        kriger = self.kriger
        out = np.zeros((nodes.shape[0], residuals.shape[1]))
        idx, valid = kriger.search.query(nodes)
        counts = valid.sum(axis=1)
        if self.spec.type != "simple" and np.any(counts == 0):
            node = int(np.flatnonzero(counts == 0)[0])
            raise InvalidInput.at(
                "/neighbourhood",
                f"grid node at ({nodes[node, 0]:g}, {nodes[node, 1]:g}) has fewer than min_points samples within "
                "the search radius; ordinary kriging cannot condition it (enlarge the radius, lower min_points, "
                "or use simple kriging, which leaves such nodes unconditioned)",
            )
        p = kriger.drift_terms
        for k in np.unique(counts[counts > 0]):
            group = np.flatnonzero(counts == k)
            batch = batch_rows(int(k), p, 2, self.memory_budget)
            for first in range(0, group.size, batch):
                check_deadline()
                rows = group[first : first + batch]
                weights = self._weights(nodes[rows], idx[rows, :k])
                out[rows] = np.einsum("ck,ckr->cr", weights, residuals[idx[rows, :k]])
        return out

    def _weights(self, targets: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Kriging weights (c, k) of targets (c, 2) from their neighbours idx (c, k)."""
        kriger = self.kriger
        pts = kriger.coords[idx]
        tgt = targets[:, None, :]
        k = idx.shape[1]
        solution, ok, K, _, _ = kriger.bordered_systems(
            pts, self.cov.between(pts, tgt)[..., 0], kriger.frame.drift(self.spec, tgt)[:, 0, :]
        )
        ok &= pivot_ratios(K) >= RCOND_MIN
        if not ok.all():
            bad = int(np.flatnonzero(~ok)[0])
            names = ", ".join(self.samples.ids[i] for i in idx[bad])
            raise SingularSystem.at(
                "/neighbourhood",
                f"the kriging system of the grid node at ({targets[bad, 0]:g}, {targets[bad, 1]:g}) is singular or "
                f"ill-conditioned (samples {names}): samples too close together for a model this smooth without a nugget",
            )
        return solution[:, :k]

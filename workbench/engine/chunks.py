"""The replicates of one run, drawn chunk by chunk within a memory budget, from the block streams.

Random numbers come from the block streams of :mod:`workbench.engine.streams`: replicate block ``b`` (of
:data:`~workbench.engine.streams.BLOCK` replicates) draws from child ``b`` of the root seed sequence, and
each replicate's draws are one contiguous run of its block's stream (:class:`BlockStream`). Chunks are
therefore only a matter of memory: a seed gives identical numbers whatever the chunk size.

A chunk is sized so that its working arrays stay near :data:`MEMORY_BUDGET` (:func:`replicates_per_chunk`):

- exact engine: per replicate a Wishart draw of the used variables' cross-products (the cost does not depend
  on ``n``); chunks are whole blocks, since the Bartlett draws of a block are taken together;
- raw engine: per replicate its ``k x n`` noise, evaluated in place into the variables' values, and the
  cross-products formed by one batched product; fits that need the rows (logistic, HC3, restriction) add
  their own arrays (:func:`raw_bytes_per_replicate`);
- a single replicate larger than the budget (very large ``n``) is drawn in row groups and its cross-products
  accumulated (:func:`draws_piecewise`), possible when every fit works from cross-products.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.engine.fitplan import fit_plan
>>> sc = load_preset("common_cause")
>>> chunks = ChunkDraws(sc, fit_plan(sc), "exact", 200, 600, np.random.SeedSequence(1))
>>> [(chunk.size, chunk.crossproducts.shape) for chunk in chunks]
[(600, (600, 3, 3))]
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench.engine.factored import FactoredCrossproducts
from workbench.engine.fitplan import Plan, used_covariance
from workbench.engine.generate import PIECE, draw_noise, evaluate, noise_pieces, structure
from workbench.engine.ols import crossproducts
from workbench.engine.streams import BLOCK, block_seed
from workbench.engine.wishart import bartlett_draws, bartlett_factors, square_root
from workbench.scenario.model import Scenario

__all__ = [
    "MEMORY_BUDGET",
    "BlockStream",
    "Chunk",
    "ChunkDraws",
    "raw_bytes_per_replicate",
    "replicates_per_chunk",
    "draws_piecewise",
]

MEMORY_BUDGET = 256 * 2**20
"""Working memory aimed at per chunk, in bytes (peak resident memory stays well below 1 GiB)."""


class BlockStream:
    """Walks the replicate blocks' random streams in order, whatever the chunk size.

    Parameters
    ----------
    root : numpy.random.SeedSequence
        The run's root sequence (:func:`workbench.engine.streams.seed_sequence`).

    Examples
    --------
    >>> stream = BlockStream(np.random.SeedSequence(3))
    >>> first, second = np.empty((2, 2, 4)), np.empty((1, 2, 4))
    >>> stream.noise(first[:1]); stream.noise(first[1:])
    >>> again = BlockStream(np.random.SeedSequence(3))
    >>> again.noise(second); bool(np.array_equal(second[0], first[0]))
    True
    """

    def __init__(self, root: np.random.SeedSequence):
        self.root = root
        self.block = 0
        self.offset = 0
        self.rng = np.random.default_rng(block_seed(root, 0))

    def _advance(self, count: int) -> None:
        self.offset += count
        if self.offset == BLOCK:
            self.block += 1
            self.offset = 0
            self.rng = np.random.default_rng(block_seed(self.root, self.block))

    def noise(self, out: np.ndarray) -> None:
        """Fill ``out`` (r, k, n) with the next r replicates' standard normals."""
        pos = 0
        while pos < out.shape[0]:
            take = min(out.shape[0] - pos, BLOCK - self.offset)
            draw_noise(self.rng, take, out.shape[1], out.shape[2], out=out[pos : pos + take])
            pos += take
            self._advance(take)

    def pieces(self, k: int, n: int, rows: int):
        """The next replicate's noise in row groups (see :func:`workbench.engine.generate.noise_pieces`)."""
        yield from noise_pieces(self.rng, k, n, rows)
        self._advance(1)

    def wishart(self, r: int, sigma: np.ndarray, df: int) -> FactoredCrossproducts:
        """The next r replicates' Wishart draws, as their factors; r must cover whole blocks (or end the
        run)."""
        k = sigma.shape[0]
        chi = np.empty((r, k))
        normals = np.empty((r, k * (k - 1) // 2))
        pos = 0
        while pos < r:
            take = min(r - pos, BLOCK - self.offset)
            if self.offset != 0:
                raise RuntimeError("exact engine chunks must start at a block boundary")
            chi[pos : pos + take], normals[pos : pos + take] = bartlett_draws(k, df, take, self.rng)
            pos += take
            self._advance(take)
        return FactoredCrossproducts(bartlett_factors(square_root(sigma), chi, normals))


def raw_bytes_per_replicate(n: int, k: int, plan: Plan) -> int:
    """Working memory of one raw-engine replicate of ``n`` rows and ``k`` variables, in bytes.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.fitplan import fit_plan
    >>> raw_bytes_per_replicate(100, 3, fit_plan(load_preset("common_cause")))
    4800
    """
    per = 8 * n * (k + 3)
    if plan.needs_rows:
        widest = max(len(f.regressors) for f in plan.fits) + 1
        per += 8 * n * (widest + 10)
    if plan.restricts:  # the masked copy of the rows behind the restricted cross-products
        per += 8 * n * (k + 1)
    return per


def replicates_per_chunk(
    engine: str,
    n: int,
    k: int,
    plan: Plan,
    replicates: int,
    chunk_size: int | None = None,
    reports: bool = False,
) -> int:
    """Replicates per chunk: ``chunk_size`` if given (whole blocks for the exact engine), else sized to
    :data:`MEMORY_BUDGET`; with ``reports`` (a progress callback) at most about a sixteenth of the run.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.fitplan import fit_plan
    >>> plan = fit_plan(load_preset("common_cause"))
    >>> replicates_per_chunk("exact", 200, 3, plan, 2000, chunk_size=300)
    250
    >>> replicates_per_chunk("raw", 200, 3, plan, 2000, reports=True)
    125
    """
    if engine == "exact":
        if chunk_size is None:
            per = 8 * (len(plan.used) + 1) ** 2 * (6 + len(plan.fits))
            chunk_size = max(1, MEMORY_BUDGET // per)
        chunk = max(BLOCK, (int(chunk_size) // BLOCK) * BLOCK)
        return min(chunk, replicates) if replicates > chunk else replicates
    if chunk_size is None:
        chunk_size = max(1, MEMORY_BUDGET // raw_bytes_per_replicate(n, k, plan))
        if reports:  # about 16 progress reports per run (the numbers do not depend on the chunk size)
            chunk_size = min(chunk_size, max(64, -(-replicates // 16)))
    return max(1, min(int(chunk_size), replicates))


def draws_piecewise(n: int, k: int, plan: Plan) -> bool:
    """One replicate alone exceeds the memory budget: draw its rows in groups and accumulate its
    cross-products (possible when every fit works from cross-products).

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.fitplan import fit_plan
    >>> draws_piecewise(1000, 3, fit_plan(load_preset("common_cause")))
    False
    """
    return n > PIECE and not plan.needs_rows and raw_bytes_per_replicate(n, k, plan) > MEMORY_BUDGET


@dataclass
class Chunk:
    """One chunk of replicates.

    Attributes
    ----------
    size : int
        Replicates in the chunk.
    crossproducts : ndarray or FactoredCrossproducts of shape (size, m, m)
        Centred cross-products of the variables: the used ones, as their Bartlett factors (exact engine), or
        all of them (raw engine).
    data : ndarray of shape (size, k, n) or None
        The rows (raw engine, not piecewise); a view of a buffer reused by the next chunk.
    """

    size: int
    crossproducts: np.ndarray | FactoredCrossproducts
    data: np.ndarray | None


class ChunkDraws:
    """The replicates of a run as an iterable of :class:`Chunk`, drawn from the block streams.

    Parameters
    ----------
    scenario : Scenario
    plan : Plan
        Its fitting plan.
    engine : {"exact", "raw"}
    n, replicates : int
    root : numpy.random.SeedSequence
    chunk_size : int, optional
        Replicates per chunk (see :func:`replicates_per_chunk`).
    reports : bool
        A progress callback will be called after each chunk.

    Attributes
    ----------
    index : list of int
        For each variable (file order) its row in the chunks' cross-products, -1 when absent.
    names : list of str
        The names of the cross-products' rows.
    chunk : int
        Replicates per chunk.
    """

    def __init__(
        self,
        scenario: Scenario,
        plan: Plan,
        engine: str,
        n: int,
        replicates: int,
        root: np.random.SeedSequence,
        chunk_size: int | None = None,
        reports: bool = False,
    ):
        self.structure = st = structure(scenario)
        self.engine, self.n, self.replicates = engine, n, replicates
        self.stream = BlockStream(root)
        self.chunk = replicates_per_chunk(engine, n, st.k, plan, replicates, chunk_size, reports)
        self.piecewise = engine == "raw" and draws_piecewise(n, st.k, plan)
        names = list(st.names)
        if engine == "exact":
            self.sigma = used_covariance(scenario, plan.used)
            position = {v: i for i, v in enumerate(plan.used)}
            self.index = [position.get(i, -1) for i in range(st.k)]
            self.names = [names[i] for i in plan.used]
        else:
            self.index = list(range(st.k))
            self.names = names
        if self.piecewise:
            self.chunk = 1
            self.group_rows = max(PIECE, MEMORY_BUDGET // (8 * (st.k + 3)))
        elif engine == "raw":
            self.buffer = np.empty((self.chunk, st.k, n))

    def __iter__(self):
        done = 0
        while done < self.replicates:
            r = min(self.chunk, self.replicates - done)
            if self.engine == "exact":
                yield Chunk(r, self.stream.wishart(r, self.sigma, self.n - 1), None)
            elif self.piecewise:
                yield Chunk(r, self._accumulated_crossproducts(), None)
            else:
                data = self.buffer[:r]
                self.stream.noise(data)
                evaluate(self.structure, data, axis=1, out=data)
                yield Chunk(r, crossproducts(data), data)
            done += r

    def _accumulated_crossproducts(self) -> np.ndarray:
        """One replicate's centred cross-products (1, k, k), its rows drawn and summed in row groups."""
        k, n = self.structure.k, self.n
        sums = np.zeros(k)
        M = np.zeros((k, k))
        for _, group in self.stream.pieces(k, n, self.group_rows):
            evaluate(self.structure, group, axis=0, out=group)
            sums += group.sum(axis=1)
            M += group @ group.T
        return (M - np.outer(sums, sums) / n)[None]

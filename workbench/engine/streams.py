"""Random streams: one way to turn a user's ``seed`` into numbers, and the block streams of the engine.

A ``seed`` is accepted in the forms numpy accepts, with numpy's meanings (Kern R. et al., NEP 19, "Random
number generator policy"; ``numpy.random.SeedSequence``):

- ``None``: fresh entropy from the operating system (the run can still be repeated: results record the
  entropy drawn, see :func:`seed_entropy`);
- a non-negative ``int``: ``SeedSequence(seed)``;
- a ``numpy.random.SeedSequence``: used as it is;
- a ``numpy.random.Generator``: one 63-bit integer is drawn from it and used as the seed.

The engine never reads or seeds numpy's global state. Replicate block ``b`` (of :data:`BLOCK` replicates)
draws from child ``b`` of the root sequence (:func:`block_seed`), never one stream per chunk, so a seed gives
identical numbers whatever the chunk size.

Examples
--------
>>> seed_sequence(7).entropy
7
>>> seed_entropy(seed_sequence(7))
7
>>> block_seed(7, 2).spawn_key
(2,)
"""

from __future__ import annotations

from numbers import Integral

import numpy as np

from workbench.errors import SimulationError

__all__ = ["BLOCK", "seed_sequence", "seed_entropy", "block_seed", "generator"]

BLOCK = 250
"""Replicates per random-stream block: block ``b`` draws from child ``b`` of the root seed sequence."""


def seed_sequence(seed=None, *, where: str = "seed") -> np.random.SeedSequence:
    """The root ``SeedSequence`` of a run, from any accepted form of ``seed``.

    Parameters
    ----------
    seed : None, int, numpy.random.SeedSequence or numpy.random.Generator
    where : str, default "seed"
        The place named in the error message.

    Returns
    -------
    numpy.random.SeedSequence

    Raises
    ------
    SimulationError
        For a negative number or any other type.

    Examples
    --------
    >>> seed_sequence(np.random.SeedSequence(3)).entropy
    3
    >>> seed_sequence(-1)
    Traceback (most recent call last):
    ...
    workbench.errors.SimulationError: seed: must be None, a non-negative integer, a numpy SeedSequence or a numpy Generator, got -1
    """
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if isinstance(seed, np.random.Generator):
        return np.random.SeedSequence(int(seed.integers(2**63)))
    if seed is None:
        return np.random.SeedSequence()
    if isinstance(seed, Integral) and not isinstance(seed, bool) and seed >= 0:
        return np.random.SeedSequence(int(seed))
    raise SimulationError(
        f"must be None, a non-negative integer, a numpy SeedSequence or a numpy Generator, got {seed!r}",
        where=where,
    )


def seed_entropy(sequence: np.random.SeedSequence):
    """The entropy of a root sequence, as results report it: an ``int`` (a list of ints for a sequence built
    from several words). Passing it back as ``seed`` repeats the run.

    Examples
    --------
    >>> isinstance(seed_entropy(seed_sequence(None)), int)
    True
    """
    entropy = sequence.entropy
    return int(entropy) if isinstance(entropy, Integral) else [int(e) for e in entropy]


def block_seed(seed, block: int) -> np.random.SeedSequence:
    """The seed sequence of replicate block ``block``: child ``block`` of the root sequence.

    Examples
    --------
    >>> block_seed(7, 2).entropy == np.random.SeedSequence(7).spawn(3)[2].entropy
    True
    """
    root = seed_sequence(seed)
    return np.random.SeedSequence(
        root.entropy, spawn_key=tuple(root.spawn_key) + (block,), pool_size=root.pool_size
    )


def generator(seed=None) -> np.random.Generator:
    """A ``Generator`` for one data set: the given Generator itself, else the first block's stream.

    Examples
    --------
    >>> float(generator(1).random()) == float(np.random.default_rng(block_seed(1, 0)).random())
    True
    """
    if isinstance(seed, np.random.Generator):
        return seed
    return np.random.default_rng(block_seed(seed, 0))

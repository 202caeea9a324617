"""Benchmark: finding every minimal valid adjustment set with 15 candidate covariates (issue 2, target < 2 s).

Random DAGs over 15 observed covariates, an exposure and an outcome, each possible forward arrow present with
probability p (and exposure -> outcome always), are analysed by ``workbench.graph.minimal_sets`` in a
fresh cache; the search is also run against a brute-force reference that tests every subset with networkx's
``is_d_separator``, and the two must agree. Prints the slowest time per density and its ratio to the target.

    python benchmarks/graph.py
"""

from __future__ import annotations

import itertools
import time

import networkx as nx
import numpy as np

from workbench import loads_scenario
from workbench.graph import build, criteria, search

TARGET_SECONDS = 2.0


def random_scenario(p: float, seed: int):
    rng = np.random.default_rng(seed)
    names = [f"c{i}" for i in range(15)] + ["x", "y"]
    lines = ['title = "bench"', "[question]", 'exposure = "x"', 'outcome = "y"']
    lines += [f"[variables.{n}]" for n in names]
    for i, a in enumerate(names):
        for b in names[i + 1 :]:
            if rng.random() < p or (a, b) == ("x", "y"):
                lines += ["[[arrows]]", f'from = "{a}"', f'to = "{b}"', "effect = 0.2"]
    lines += ["[[strategies]]", 'name = "u"', "adjust = []"]
    return loads_scenario("\n".join(lines))


def brute_force(sc) -> list[tuple[str, ...]]:
    G = build.build_graph(sc)
    H = criteria.backdoor_graph(G, "x", "y")
    forb = criteria.forbidden_set(G, "x", "y")
    others = [n for n in sc.names if n not in ("x", "y") and n not in forb]
    found: list[set[str]] = []
    for k in range(len(others) + 1):
        for z in itertools.combinations(others, k):
            if any(f <= set(z) for f in found):
                continue
            if nx.is_d_separator(H, {"x"}, {"y"}, set(z)):
                found.append(set(z))
    return sorted(tuple(sorted(f)) for f in found)


def main() -> None:
    print(f"date {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}")
    for p in (0.2, 0.3, 0.5, 0.7, 0.9):
        worst, sets = 0.0, 0
        for seed in range(5):
            sc = random_scenario(p, seed)
            search.clear_search_cache()
            start = time.perf_counter()
            found = search.minimal_sets(sc)
            worst = max(worst, time.perf_counter() - start)
            sets = max(sets, len(found))
            if seed == 0 and p <= 0.5:
                assert sorted(tuple(sorted(f)) for f in found) == brute_force(sc), "search disagrees"
        print(
            f"p = {p}: slowest of 5 graphs {worst * 1000:.1f} ms for up to {sets} minimal sets "
            f"({worst / TARGET_SECONDS:.3f}x the 2 s target)"
        )


if __name__ == "__main__":
    main()

"""Small graphs for the graph SDP families: named graphs and Erdős–Rényi random graphs.

Graphs are edge arrays of shape (n_edges, 2) with i < j in each row, sorted, on nodes 0..nodes-1.
A random graph is G(n, M) (Erdős & Rényi 1959): exactly M = max(1, round(edge_prob * n(n-1)/2))
edges drawn uniformly without replacement, so the edge count, and with it the number of SDP
constraints, is fixed by the parameters.
"""

from __future__ import annotations

import numpy as np

from calib.families.base import fraction, positive_int, require

#: graph name -> smallest allowed number of nodes
GRAPHS = {"random": 2, "cycle": 3, "complete": 2, "petersen": 10}

PARAM_DOC = {
    "graph": "'random' (Erdős–Rényi G(n, M)), 'cycle' (C_n), 'complete' (K_n) or 'petersen' (nodes = 10)",
    "nodes": "number of vertices n, integer >= 2 (>= 3 for a cycle, exactly 10 for petersen)",
    "edge_prob": "for 'random': fraction of the n(n-1)/2 vertex pairs joined by an edge, in (0, 1]",
}
DEFAULTS = {"graph": "random", "nodes": None, "edge_prob": 0.5}


def pair_count(nodes: int) -> int:
    return nodes * (nodes - 1) // 2


def edge_count(params: dict) -> int:
    """Number of edges the graph described by ``params`` has (known before drawing it).

    >>> edge_count({"graph": "petersen", "nodes": 10, "edge_prob": 0.5})
    15
    >>> edge_count({"graph": "random", "nodes": 10, "edge_prob": 0.3})
    14
    """
    graph, nodes = params["graph"], params["nodes"]
    if graph == "random":
        return max(1, int(round(params["edge_prob"] * pair_count(nodes))))
    return {"cycle": nodes, "complete": pair_count(nodes), "petersen": 15}[graph]


def check(params: dict) -> None:
    graph = params["graph"]
    require(graph in GRAPHS, "graph", f"unknown graph {graph!r}", f"choose one of {', '.join(GRAPHS)}")
    positive_int(params, "nodes", GRAPHS[graph])
    require(graph != "petersen" or params["nodes"] == 10, "nodes", "the Petersen graph has 10 nodes", "set nodes = 10")
    fraction(params, "edge_prob")


def edges(params: dict, rng: np.random.Generator) -> np.ndarray:
    """The edge array of the graph described by ``params``; only 'random' draws from ``rng``."""
    graph, nodes = params["graph"], params["nodes"]
    if graph == "cycle":
        pairs = np.column_stack([np.arange(nodes), (np.arange(nodes) + 1) % nodes])
    elif graph == "petersen":
        outer = np.arange(5)
        pairs = np.vstack([np.column_stack([outer, (outer + 1) % 5]),            # outer 5-cycle
                           np.column_stack([outer, outer + 5]),                  # spokes
                           np.column_stack([outer + 5, (outer + 2) % 5 + 5])])  # inner pentagram
    else:
        rows, cols = np.triu_indices(nodes, k=1)
        pairs = np.column_stack([rows, cols])
        if graph == "random":
            pairs = pairs[rng.choice(pairs.shape[0], size=edge_count(params), replace=False)]
    pairs = np.sort(pairs, axis=1)
    return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]


def laplacian(nodes: int, pairs: np.ndarray) -> np.ndarray:
    """Graph Laplacian L = D - W of the unit-weight graph, shape (nodes, nodes)."""
    W = np.zeros((nodes, nodes))
    W[pairs[:, 0], pairs[:, 1]] = W[pairs[:, 1], pairs[:, 0]] = 1.0
    return np.diag(W.sum(axis=1)) - W

"""Dependency order of named things (params, blocks) without loading networkx on every start.

`DepGraph` keeps nodes and each node's successors in insertion order, as networkx's DiGraph does, and
`order()` is networkx's `topological_sort` (generation by generation, Kahn's algorithm), so the order, and
with it every finding, is the one networkx gives. Only a graph with a cycle (an error in the file) loads
networkx, so that the cycle named in the finding is the one `networkx.find_cycle` reports.
"""

from __future__ import annotations


class DepGraph:
    def __init__(self) -> None:
        self._succ: dict = {}  # node -> {successor: None}; dicts keep insertion order

    def add_node(self, node) -> None:
        self._succ.setdefault(node, {})

    def add_edge(self, u, v) -> None:
        self.add_node(u)
        self.add_node(v)
        self._succ[u][v] = None

    def order(self) -> list | None:
        """Every node after the nodes it depends on (networkx.topological_sort's order); None on a cycle."""
        waiting = {n: 0 for n in self._succ}
        for succ in self._succ.values():
            for v in succ:
                waiting[v] += 1
        ready = [n for n, k in waiting.items() if k == 0]
        waiting = {n: k for n, k in waiting.items() if k > 0}
        out: list = []
        while ready:
            generation, ready = ready, []
            for node in generation:
                for child in self._succ[node]:
                    waiting[child] -= 1
                    if waiting[child] == 0:
                        ready.append(child)
                        del waiting[child]
            out.extend(generation)
        return None if waiting else out

    def find_cycle(self) -> list:
        """The cycle's nodes in order, as networkx.find_cycle finds it (only called when order() is None)."""
        import networkx as nx  # here: only a file with a cycle needs it

        return [u for u, _ in nx.find_cycle(self._networkx())]

    def simple_cycles(self) -> list:
        """Every elementary cycle, as networkx.simple_cycles lists them; [] without loading it when acyclic."""
        if self.order() is not None:
            return []
        import networkx as nx  # here: only a file with a cycle needs it

        return list(nx.simple_cycles(self._networkx()))

    def _networkx(self):
        """The same graph as a networkx DiGraph: nodes and each node's successors in the same order."""
        import networkx as nx

        graph = nx.DiGraph()
        graph.add_nodes_from(self._succ)
        for u, succ in self._succ.items():
            for v in succ:
                graph.add_edge(u, v)
        return graph

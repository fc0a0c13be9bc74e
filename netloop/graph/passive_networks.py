"""Passive networks (nodes joined by two-way passive edges) collapsed to one hub each for loop enumeration.

Passives pass signal both ways, so an RC mesh is one strongly connected blob with a huge number of
elementary cycles, none of them a feedback loop (a loop needs at least one active, one-way edge).
Each connected set of signal nodes joined by passive edges is therefore replaced, for cycle
enumeration, by a hub vertex joined both ways to its *ports* (the nodes where an active edge
starts or ends); nodes inside the network with no active edge vanish, and a network with fewer
than two ports vanishes whole (a load hanging on one node closes no loop). A loop then crosses a
network at most once, from one port to another; the crossing is described by the shortest passive
path between the two ports, and the nodes it must pass (the separators: every passive path between
the ports goes through them) are break points of that loop too: the cut vertices between them in
the network's block-cut tree, built once per network in linear time.
"""

from __future__ import annotations

from collections import deque

__all__ = ["PassiveNetworks"]


class PassiveNetworks:
    """Passive pairs, grouped into networks from the ports outward (networks without a port are never visited)."""

    def __init__(self) -> None:
        self.pairs: list[tuple[str, str, str]] = []  # (a, b, element)
        self._adjacency: dict[str, dict[str, list[str]]] | None = None
        self._root: dict[str, str] = {}
        self._passages: dict[tuple[str, str], tuple[tuple[tuple[str, ...], str, str], ...]] = {}
        self._separators: dict[tuple[str, str], tuple[str, ...]] = {}
        self._trees: dict[str, tuple[dict[str, list[int]], list[list[str]]]] = {}

    def join(self, a: str, b: str, element: str) -> None:
        """Record a passive element between signal nodes a and b."""
        self.pairs.append((a, b, element))

    def _build(self) -> dict[str, dict[str, list[str]]]:
        if self._adjacency is None:
            adj: dict[str, dict[str, list[str]]] = {}
            for a, b, el in self.pairs:
                row = adj.get(a)
                if row is None:
                    adj[a] = {b: [el]}
                else:
                    row.setdefault(b, []).append(el)
                row = adj.get(b)
                if row is None:
                    adj[b] = {a: [el]}
                else:
                    row.setdefault(a, []).append(el)
            self._adjacency = adj
        return self._adjacency

    def label(self, ports) -> None:
        """Find the network of every port (breadth-first from each port not yet labelled)."""
        adj = self._build()
        root_of = self._root
        for p in ports:
            if p in root_of or p not in adj:
                continue
            root_of[p] = p
            todo = deque([p])
            while todo:
                n = todo.popleft()
                for m in adj[n]:
                    if m not in root_of:
                        root_of[m] = p
                        todo.append(m)

    def find(self, node: str) -> str:
        """The network (its first labelled port) of a labelled node; the node itself otherwise."""
        return self._root.get(node, node)

    def _bfs(self, start: str, goal: str) -> dict[str, str] | None:
        adj = self._build()
        prev = {start: start}
        todo = deque([start])
        while todo:
            n = todo.popleft()
            if n == goal:
                return prev
            for m in adj.get(n, ()):
                if m not in prev:
                    prev[m] = n
                    todo.append(m)
        return None

    def passage(self, p: str, q: str) -> tuple[tuple[tuple[str, ...], str, str], ...]:
        """The shortest passive path from p to q as (elements in parallel, from, to) steps."""
        key = (p, q)
        got = self._passages.get(key)
        if got is None:
            prev = self._bfs(p, q)
            if prev is None:
                raise ValueError(f"{p} and {q} are not in one passive network")
            path = [q]
            while path[-1] != p:
                path.append(prev[path[-1]])
            path.reverse()
            adj = self._build()
            got = tuple((tuple(sorted(set(adj[a][b]))), a, b) for a, b in zip(path, path[1:]))
            self._passages[key] = got
        return got

    def _block_tree(self, start: str) -> tuple[dict[str, list[int]], list[list[str]]]:
        """Biconnected blocks of the network of ``start`` (Hopcroft and Tarjan, iterative): node -> block ids, block -> its cut vertices."""
        root = self.find(start)
        got = self._trees.get(root)
        if got is not None:
            return got
        adj = self._build()
        index = {start: 0}
        low = {start: 0}
        counter = 1
        vstack = [start]
        frames = [(start, None, iter(adj.get(start, ())))]
        blocks: list[list[str]] = []
        while frames:
            v, parent, it = frames[-1]
            for w in it:
                if w == parent:
                    continue
                if w in index:
                    if index[w] < low[v]:
                        low[v] = index[w]
                else:
                    index[w] = low[w] = counter
                    counter += 1
                    vstack.append(w)
                    frames.append((w, v, iter(adj[w])))
                    break
            else:
                frames.pop()
                if parent is not None:
                    if low[v] < low[parent]:
                        low[parent] = low[v]
                    if low[v] >= index[parent]:
                        block = [parent]
                        while True:
                            x = vstack.pop()
                            block.append(x)
                            if x == v:
                                break
                        blocks.append(block)
        member: dict[str, list[int]] = {}
        for b, nodes in enumerate(blocks):
            for n in nodes:
                member.setdefault(n, []).append(b)
        cuts = [[n for n in nodes if len(member[n]) > 1] for nodes in blocks]
        self._trees[root] = (member, cuts)
        return member, cuts

    def separators(self, p: str, q: str) -> tuple[str, ...]:
        """Inner nodes every passive path from p to q passes, in path order.

        They are the cut vertices on the path from p to q in the network's block-cut tree, which
        is built once per network (linear in its size).
        """
        key = (p, q)
        got = self._separators.get(key)
        if got is None:
            member, cuts = self._block_tree(p)
            goal = set(member.get(q, ()))
            prev: dict[object, object] = {}
            todo = deque()
            for b in member.get(p, ()):
                prev[("b", b)] = None
                todo.append(("b", b))
            end = None
            while todo:
                v = todo.popleft()
                if v[0] == "b" and v[1] in goal:
                    end = v
                    break
                nxt = [("c", c) for c in cuts[v[1]]] if v[0] == "b" else [("b", b) for b in member[v[1]]]
                for w in nxt:
                    if w not in prev:
                        prev[w] = v
                        todo.append(w)
            out = []
            while end is not None:
                if end[0] == "c" and end[1] not in (p, q):
                    out.append(end[1])
                end = prev[end]
            path = [p, *(b for _, _, b in self.passage(p, q))]
            at = {n: i for i, n in enumerate(path)}
            got = tuple(sorted(out, key=lambda n: at.get(n, 0)))
            self._separators[key] = got
        return got

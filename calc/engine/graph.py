"""The dependency graph of cells: order of evaluation, cycles, what lies downstream.

Edges run from a cell to the cells it uses. :meth:`DependencyGraph.order`
returns every cell after the cells it uses, in file order where the
dependencies allow, plus the cycles (strongly connected components of more
than one cell, or a cell that uses itself), each as a closed path
``[a, b, a]``.
"""

from __future__ import annotations

import heapq


class DependencyGraph:
    def __init__(self) -> None:
        self.uses: dict[str, set[str]] = {}
        self.users: dict[str, set[str]] = {}
        self.rank: dict[str, int] = {}  # file order, for stable output

    def add(self, name: str, uses, rank: int) -> None:
        self.rank[name] = rank
        self.set_uses(name, uses)

    def set_uses(self, name: str, uses) -> bool:
        """Replace the cells ``name`` uses; returns True when they changed."""
        new = set(uses)
        old = self.uses.get(name, set())
        if new == old and name in self.uses:
            return False
        for dep in old - new:
            self.users.get(dep, set()).discard(name)
        for dep in new - old:
            self.users.setdefault(dep, set()).add(name)
        self.uses[name] = new
        self.users.setdefault(name, set())
        return True

    def order(self) -> tuple[list[str], list[tuple[list[str], set[str]]]]:
        """(cells in evaluation order, cycles). Each cycle is a closed path through it and
        every cell of its strongly connected component (a path shows one loop; the component
        may hold more cells on other loops). Cells in a cycle are not in the order."""
        out = self._kahn(set())
        if len(out) == len(self.uses):
            return out, []  # every cell ordered: no cycle (the usual case; no need for Tarjan)
        components = self._components()
        in_cycle: set[str] = set()
        cycles: list[tuple[list[str], set[str]]] = []
        for comp in components:
            if len(comp) > 1 or comp[0] in self.uses.get(comp[0], ()):
                cycles.append((self._cycle_path(set(comp)), set(comp)))
                in_cycle.update(comp)
        out = self._kahn(in_cycle)
        cycles.sort(key=lambda c: min(self.rank.get(n, 0) for n in c[1]))
        return out, cycles

    def _kahn(self, in_cycle: set[str]) -> list[str]:
        """Kahn's algorithm over the cells not in ``in_cycle``, smallest file rank first."""
        uses = self.uses
        remaining = {n: len([d for d in uses[n] if d in uses and d not in in_cycle])
                     for n in uses if n not in in_cycle}
        rank = self.rank
        ready = [(rank.get(n, 0), n) for n, k in remaining.items() if k == 0]
        heapq.heapify(ready)
        out: list[str] = []
        users = self.users
        while ready:
            _, name = heapq.heappop(ready)
            out.append(name)
            for user in users.get(name, ()):
                if user in remaining:
                    remaining[user] -= 1
                    if remaining[user] == 0:
                        heapq.heappush(ready, (rank.get(user, 0), user))
        return out

    def _components(self) -> list[list[str]]:
        """Tarjan's strongly connected components, without recursion."""
        index: dict[str, int] = {}
        low: dict[str, int] = {}
        on_stack: set[str] = set()
        stack: list[str] = []
        result: list[list[str]] = []
        counter = 0
        for root in sorted(self.uses, key=lambda n: self.rank.get(n, 0)):
            if root in index:
                continue
            work = [(root, iter(sorted(self.uses.get(root, ()))))]
            index[root] = low[root] = counter
            counter += 1
            stack.append(root)
            on_stack.add(root)
            while work:
                node, children = work[-1]
                advanced = False
                for child in children:
                    if child not in self.uses:
                        continue
                    if child not in index:
                        index[child] = low[child] = counter
                        counter += 1
                        stack.append(child)
                        on_stack.add(child)
                        work.append((child, iter(sorted(self.uses.get(child, ())))))
                        advanced = True
                        break
                    if child in on_stack:
                        low[node] = min(low[node], index[child])
                if advanced:
                    continue
                work.pop()
                if work:
                    parent = work[-1][0]
                    low[parent] = min(low[parent], low[node])
                if low[node] == index[node]:
                    comp = []
                    while True:
                        member = stack.pop()
                        on_stack.discard(member)
                        comp.append(member)
                        if member == node:
                            break
                    result.append(comp)
        return result

    def _cycle_path(self, members: set[str]) -> list[str]:
        """The shortest closed path through a component, from its first cell in file order."""
        start = min(members, key=lambda n: self.rank.get(n, 0))
        if start in self.uses[start]:
            return [start, start]
        parent: dict[str, str] = {}
        frontier = [start]
        while frontier:
            following = []
            for node in frontier:
                for dep in sorted(self.uses[node] & members, key=lambda n: self.rank.get(n, 0)):
                    if dep == start:
                        path = [node]
                        while path[-1] != start:
                            path.append(parent[path[-1]])
                        return path[::-1] + [start]
                    if dep not in parent:
                        parent[dep] = node
                        following.append(dep)
            frontier = following
        return [start, start]  # unreachable for a true component

    def downstream(self, name: str) -> set[str]:
        """Every cell that depends on ``name``, directly or not."""
        return _reach(self.users, name)

    def upstream(self, name: str) -> set[str]:
        """Every cell ``name`` depends on, directly or not."""
        return _reach(self.uses, name)


def _reach(edges: dict[str, set[str]], start: str) -> set[str]:
    seen: set[str] = set()
    todo = [start]
    while todo:
        for nxt in edges.get(todo.pop(), ()):
            if nxt not in seen:
                seen.add(nxt)
                todo.append(nxt)
    return seen

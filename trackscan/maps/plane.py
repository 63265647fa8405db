"""The grid of a plane scan: its values, its edges, the frames lying on each edge."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Edge", "plane_edges", "edge_frames", "along_value", "on_edge_values"]


@dataclass(frozen=True)
class Edge:
    """Two grid neighbours of a plane scan.

    Attributes
    ----------
    a, b : int
        Frame indices (scan order); `a` has the smaller value along `axis`.
    axis : int
        0 when the first coordinate varies along the edge (the second is
        fixed), 1 when the second varies.
    """

    a: int
    b: int
    axis: int

    @property
    def fixed_axis(self) -> int:
        """The coordinate that is the same at both ends."""
        return 1 - self.axis


def plane_edges(values, refined=None, added=()) -> list:
    """Edges between grid neighbours.

    Parameters
    ----------
    values : sequence of (float, float)
        Coordinate values of every frame, in scan order.
    refined : sequence of bool, optional
        True for frames that refinement added; they lie on edges and make
        none of their own.
    added : sequence of ((v1, v2), (v1, v2))
        Edges refinement added inside grid cells; included (after the grid
        edges) when frames sit at both ends.

    Returns
    -------
    list of Edge
        Neighbours along the first coordinate, then along the second, each
        in scan order.  The grid is that of the distinct values of the
        frames not made by refinement; where a grid point has no frame, the
        edges to it are missing.
    """
    refined = refined or [False] * len(values)
    base = {tuple(v): k for k, (v, r) in enumerate(zip(values, refined)) if not r}
    axes = [sorted({v[0] for v in base}), sorted({v[1] for v in base})]
    edges = []
    for axis in (0, 1):
        for k in sorted(base.values()):
            v = values[k]
            ax = axes[axis]
            i = ax.index(v[axis])
            if i + 1 >= len(ax):
                continue
            nxt = list(v)
            nxt[axis] = ax[i + 1]
            j = base.get(tuple(nxt))
            if j is not None:
                edges.append(Edge(k, j, axis))
    at = {tuple(v): k for k, v in enumerate(values)}
    for p, q in added:
        a, b = at.get(tuple(p)), at.get(tuple(q))
        if a is None or b is None:
            continue
        axis = 0 if p[1] == q[1] else 1
        if values[a][axis] > values[b][axis]:
            a, b = b, a
        edges.append(Edge(a, b, axis))
    return edges


def on_edge_values(edge: Edge, values) -> tuple:
    """The fixed coordinate and the range along an edge: ``(fixed, lo, hi)``."""
    va, vb = values[edge.a], values[edge.b]
    return va[edge.fixed_axis], va[edge.axis], vb[edge.axis]


def edge_frames(edge: Edge, values) -> list:
    """Indices of the frames on an edge (its two ends and any refined between), by value."""
    fixed, lo, hi = on_edge_values(edge, values)
    on = [k for k, v in enumerate(values)
          if v[edge.fixed_axis] == fixed and lo <= v[edge.axis] <= hi]
    return sorted(on, key=lambda k: values[k][edge.axis])


def along_value(edge: Edge, value: float, values) -> tuple:
    """The point of the plane on `edge` where its varying coordinate is `value`."""
    fixed = values[edge.a][edge.fixed_axis]
    out = [0.0, 0.0]
    out[edge.axis] = float(value)
    out[edge.fixed_axis] = float(fixed)
    return tuple(out)

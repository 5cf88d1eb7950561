"""Over-water distances and paths: :class:`WaterRouter`.

Shortest paths over a visibility graph of the reflex vertices of a simplified,
slightly shrunk copy of the water, with line-of-sight tested against a clearance
raster (a distance transform); the reach zone is a distance field on a
16-neighbour grid seeded with the graph's exact node distances, refined by line of
sight to the seed. ``docs/methods.md`` ("Sampling frame") gives the method and its
error bound. :func:`geosample.geometry.build_frame` builds one when the plan has
access points and stores it in :attr:`geosample.model.Frame.router`.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from .errors import InfeasibleError, LayerError
from .shapes import polygonal as _polygonal

__all__ = ["WaterRouter", "Legs", "StraightLegs", "GRID_RELATIVE_ERROR"]

_SQRT2 = math.sqrt(2.0)
GRID_RELATIVE_ERROR = 1.0 / math.cos(math.atan(0.5) / 2.0) - 1.0
"""Largest relative excess of a 16-neighbour grid path over the straight line (about 2.75 %)."""


def _erode(geom: Any, d: float) -> Any:
    """A polygon inside ``geom`` shrunk by at least ``d`` (cheap: simplify, then buffer)."""
    if d <= 0:
        return geom
    # simplify moves edges by <= d/4; a 2-segment-per-quadrant round join keeps >= 0.924 of the distance
    return geom.simplify(d / 4.0).buffer(-1.4 * d, quad_segs=2)


def _reflex_vertices(poly: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Vertices of ``poly`` where the water's interior angle exceeds 180 degrees, with their neighbours."""
    import shapely
    from shapely.geometry.polygon import orient

    pts, prv, nxt = [], [], []
    for part in shapely.get_parts(poly):
        if part.is_empty or part.geom_type != "Polygon":
            continue
        part = orient(part, sign=1.0)  # exterior CCW, holes CW: water on the left of every ring
        for ring in [part.exterior, *part.interiors]:
            c = np.asarray(ring.coords, dtype=float)[:-1]
            if len(c) < 3:
                continue
            a, b = np.roll(c, 1, axis=0), np.roll(c, -1, axis=0)
            cross = (c[:, 0] - a[:, 0]) * (b[:, 1] - c[:, 1]) - (c[:, 1] - a[:, 1]) * (b[:, 0] - c[:, 0])
            scale = np.hypot(*(c - a).T) * np.hypot(*(b - c).T)
            m = cross < -1e-9 * scale  # right turn = reflex for the water
            pts.append(c[m]), prv.append(a[m]), nxt.append(b[m])
    if not pts:
        z = np.zeros((0, 2))
        return z, z, z
    return np.vstack(pts), np.vstack(prv), np.vstack(nxt)


def _tangent(v: np.ndarray, vprev: np.ndarray, vnext: np.ndarray, other: np.ndarray) -> np.ndarray:
    """True where the line v-other leaves both neighbours of v on one side (a shortest path may bend at v)."""
    d = other - v
    s1 = d[:, 0] * (vprev[:, 1] - v[:, 1]) - d[:, 1] * (vprev[:, 0] - v[:, 0])
    s2 = d[:, 0] * (vnext[:, 1] - v[:, 1]) - d[:, 1] * (vnext[:, 0] - v[:, 0])
    return s1 * s2 >= 0.0


class WaterRouter:
    """Shortest paths over water, around islands and peninsulas.

    Method (``docs/methods.md``, "Sampling frame"): the water polygon is
    simplified (tolerance ``t``) and shrunk (distance ``delta``); the reflex
    vertices of that polygon are the nodes of a visibility graph whose edges are
    the segments between nodes that are tangent at both ends and clear of land.
    "Clear of land" is decided on a clearance raster: a distance transform of the
    conservatively rasterised water (cell ``cell_m``) gives, for every point, a
    lower bound on its distance to land; a segment is accepted by sphere tracing
    when that bound stays above ``cell_m / 4`` along it. Accepted segments
    therefore never cross land. Query points are joined to every node they see
    and to each other, and the graph is searched with Dijkstra's algorithm.

    Error bound: a computed distance is never shorter than the true over-water
    distance between the (snapped) points, and is longer by at most
    ``clearance_m * (2 + T)`` where ``T`` is the total turning angle of the path in
    radians; :attr:`error_m` states it for paths that turn through up to one full
    circle (``T = 2 pi``). Channels narrower than about ``2 * clearance_m`` are
    treated as closed.

    Parameters
    ----------
    water : shapely Polygon or MultiPolygon
        The water, in a metric CRS.
    resolution_m : float, optional
        Cell of the clearance raster; default: the water's bounding box over
        ``max_cells`` cells.
    max_nodes : int
        The simplification tolerance grows until the graph has at most this many nodes.
    max_cells : int
        Largest clearance raster when ``resolution_m`` is not given.

    Attributes
    ----------
    error_m : float
        The stated bound on how much a distance can be too long (see above).
    clearance_m : float
        ``delta + t``: how far the shrunk polygon may lie inside the water.
    cell_m : float
        Clearance raster cell.
    n_nodes : int
        Nodes of the visibility graph.

    Examples
    --------
    >>> import shapely
    >>> lake = shapely.box(0, 0, 1000, 400).difference(shapely.box(450, 0, 550, 300))
    >>> router = WaterRouter(lake)
    >>> d = router.distance_matrix([[100.0, 100.0], [900.0, 100.0]])
    >>> bool(d[0, 1] > 800.0)  # around the peninsula, not straight through it
    True
    """

    def __init__(self, water: Any, *, resolution_m: float | None = None, max_nodes: int = 4000,
                 max_cells: int = 2_000_000):
        import shapely
        from scipy import ndimage

        water = _polygonal(shapely.make_valid(water))
        if water.is_empty:
            raise LayerError("the water layer has no area to route over")
        self.water = water
        x0, y0, x1, y1 = water.bounds
        w, h = max(x1 - x0, 1e-6), max(y1 - y0, 1e-6)
        r = float(resolution_m) if resolution_m else max(math.sqrt(w * h / max_cells), 1e-3 * max(w, h) / 100)
        self.cell_m = r
        pad = 3
        nx, ny = int(math.ceil(w / r)) + 2 * pad, int(math.ceil(h / r)) + 2 * pad
        self._x0, self._y0 = x0 - pad * r, y0 - pad * r
        xs = self._x0 + (np.arange(nx) + 0.5) * r
        ys = self._y0 + (np.arange(ny) + 0.5) * r
        inner = _erode(water, r / _SQRT2)  # a cell whose centre is here holds only water
        shapely.prepare(inner)
        open_ = shapely.contains_xy(inner, xs[None, :], ys[:, None])
        edt = ndimage.distance_transform_edt(open_) * r
        self._clear = (edt - _SQRT2 * r).astype(np.float32)  # lower bound of the clearance anywhere in a cell
        self._rho = 0.25 * r
        self._build_graph(max_nodes)

    # ------------------------------------------------------------------ clearance and line of sight
    def clearance_lower_bound(self, xy: Any) -> np.ndarray:
        """A lower bound on the distance from each point to land (negative: maybe on land)."""
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        i = np.floor((xy[:, 0] - self._x0) / self.cell_m).astype(np.int64)
        j = np.floor((xy[:, 1] - self._y0) / self.cell_m).astype(np.int64)
        ny, nx = self._clear.shape
        inside = (i >= 0) & (i < nx) & (j >= 0) & (j < ny)
        out = np.full(len(xy), -np.inf)
        out[inside] = self._clear[j[inside], i[inside]]
        return out

    def visible(self, a: Any, b: Any) -> np.ndarray:
        """For pairs of points (rows of ``a`` and ``b``), whether the segment between them is clear of land.

        Conservative: True means the segment lies over water at least ``cell_m / 4``
        from land; False may also mean it passes very close to land.
        """
        a = np.asarray(a, dtype=float).reshape(-1, 2)
        b = np.asarray(b, dtype=float).reshape(-1, 2)
        n = len(a)
        ok = np.zeros(n, dtype=bool)
        d = b - a
        length = np.hypot(d[:, 0], d[:, 1])
        idx = np.arange(n)
        u = np.zeros(n)
        while idx.size:
            frac = np.divide(u, length[idx], out=np.zeros_like(u), where=length[idx] > 0)
            p = a[idx] + frac[:, None] * d[idx]
            c = self.clearance_lower_bound(p)
            blocked = c < self._rho
            u = u + np.where(blocked, 0.0, c)
            done = ~blocked & (u >= length[idx])
            ok[idx[done]] = True
            keep = ~blocked & ~done
            idx, u = idx[keep], u[keep]
        return ok

    # ------------------------------------------------------------------ graph
    def _build_graph(self, max_nodes: int) -> None:
        import shapely
        import scipy.sparse as sp

        r, rho = self.cell_m, self._rho
        t = 0.5 * r
        while True:
            delta = (t + 2 * _SQRT2 * r + rho) / 0.92
            shrunk = _polygonal(shapely.make_valid(self.water.simplify(t).buffer(-delta, quad_segs=2)))
            nodes, prv, nxt = _reflex_vertices(shrunk)
            if len(nodes) <= max_nodes or shrunk.is_empty:
                break
            t *= max(1.5, (len(nodes) / max_nodes) ** 2)  # node counts fall about as t ** -0.5
        ok = self.clearance_lower_bound(nodes) >= rho
        nodes, prv, nxt = nodes[ok], prv[ok], nxt[ok]
        self._shrunk = shrunk
        self._shrunk_boundary = shrunk.boundary if not shrunk.is_empty else None
        self.simplify_m = t
        self.shrink_m = delta
        self.clearance_m = delta + t
        self.error_m = float(self.clearance_m * (2.0 + 2.0 * math.pi))
        self._nodes, self._prev, self._next = nodes, prv, nxt
        n = len(nodes)
        self.n_nodes = n
        rows, cols, wts = [], [], []
        ua, ub = prv - nodes, nxt - nodes  # each node's two shore edges
        block = max(1, 1_000_000 // max(n, 1))
        for start in range(0, n, block):
            ii = np.arange(start, min(n, start + block))
            jj = np.arange(start, n)
            dx = nodes[None, jj, 0] - nodes[ii, None, 0]
            dy = nodes[None, jj, 1] - nodes[ii, None, 1]
            # tangent at i: both shore edges of i on one side of the line i-j; the same at j
            tan = ((dx * ua[ii, None, 1] - dy * ua[ii, None, 0]) * (dx * ub[ii, None, 1] - dy * ub[ii, None, 0]) >= 0)
            tan &= (dx * ua[None, jj, 1] - dy * ua[None, jj, 0]) * (dx * ub[None, jj, 1] - dy * ub[None, jj, 0]) >= 0
            tan &= jj[None, :] > ii[:, None]
            bi, bj = np.nonzero(tan)
            i, j = ii[bi], jj[bj]
            if not i.size:
                continue
            vis = self.visible(nodes[i], nodes[j])
            i, j = i[vis], j[vis]
            rows.append(i), cols.append(j), wts.append(np.hypot(*(nodes[j] - nodes[i]).T))
        if rows:
            rows_a, cols_a, w_a = np.concatenate(rows), np.concatenate(cols), np.concatenate(wts)
        else:
            rows_a = cols_a = np.zeros(0, dtype=np.int64)
            w_a = np.zeros(0)
        self._edges = (rows_a, cols_a, np.maximum(w_a, 1e-9))
        self.n_edges = int(rows_a.size)
        self._sp = sp

    def _snap(self, xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Points moved onto the routable water where they are too close to land; and how far."""
        import shapely

        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        out = xy.copy()
        moved = np.zeros(len(xy))
        bad = self.clearance_lower_bound(xy) < self._rho
        if bad.any():
            if self._shrunk_boundary is None:
                raise LayerError("the water is too narrow to route over at this resolution")
            pts = shapely.points(xy[bad])
            lines = shapely.shortest_line(self._shrunk_boundary, pts)
            near = shapely.get_coordinates(shapely.get_point(lines, 0))
            out[bad] = near
            moved[bad] = np.hypot(*(near - xy[bad]).T)
        return out, moved

    def _query_graph(self, q: np.ndarray) -> Any:
        """The visibility graph with the query points ``q`` appended as nodes n..n+k-1."""
        n, k = self.n_nodes, len(q)
        rows, cols, wts = [self._edges[0]], [self._edges[1]], [self._edges[2]]
        if n:
            qi, vi = np.meshgrid(np.arange(k), np.arange(n), indexing="ij")
            qi, vi = qi.ravel(), vi.ravel()
            tan = _tangent(self._nodes[vi], self._prev[vi], self._next[vi], q[qi])
            qi, vi = qi[tan], vi[tan]
            vis = self.visible(q[qi], self._nodes[vi])
            qi, vi = qi[vis], vi[vis]
            rows.append(vi), cols.append(qi + n), wts.append(np.hypot(*(q[qi] - self._nodes[vi]).T))
        if k > 1:
            a, b = np.triu_indices(k, 1)
            vis = self.visible(q[a], q[b])
            a, b = a[vis], b[vis]
            rows.append(a + n), cols.append(b + n), wts.append(np.hypot(*(q[b] - q[a]).T))
        r, c, w = np.concatenate(rows), np.concatenate(cols), np.maximum(np.concatenate(wts), 1e-9)
        size = n + k
        return self._sp.csr_matrix((np.r_[w, w], (np.r_[r, c], np.r_[c, r])), shape=(size, size))

    def node_distances(self, sources: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Over-water distance from the nearest source to every graph node.

        Returns ``(node_xy, node_distance, source_xy_snapped)``; sources are included
        as nodes (distance = their snap distance).
        """
        from scipy.sparse.csgraph import dijkstra

        src, moved = self._snap(np.asarray(sources, dtype=float).reshape(-1, 2))
        g = self._query_graph(src)
        n, k = self.n_nodes, len(src)
        # a virtual root joined to each source by its snap distance
        gc = g.tocoo()
        size = n + k + 1
        rows = np.r_[np.zeros(k, dtype=np.int64), gc.row + 1]
        cols = np.r_[np.arange(k) + n + 1, gc.col + 1]
        big = self._sp.csr_matrix((np.r_[moved + 1e-12, gc.data], (rows, cols)), shape=(size, size))
        d = dijkstra(big, directed=True, indices=0)[1:]
        xy = np.vstack([self._nodes, src]) if n else src
        return xy, d, src

    def legs(self, xy: Any) -> "Legs":
        """Every over-water leg between the points ``xy`` from one search.

        One query graph and one multi-source Dijkstra search (from every point) give
        the distance matrix and the predecessor tree of each point, so
        :meth:`Legs.path` draws exactly the path whose length the matrix holds.
        Points on land or near the shore are first moved to the nearest routable
        water; the move is part of their legs.
        """
        from scipy.sparse.csgraph import dijkstra

        pts = np.asarray(xy, dtype=float).reshape(-1, 2)
        k = len(pts)
        n = self.n_nodes
        if k == 0:
            return Legs(pts, np.zeros((0, 0)), np.zeros((0, 0), dtype=np.int32), pts, np.zeros((0, 2)), n)
        q, moved = self._snap(pts)
        g = self._query_graph(q)
        dist, pred = dijkstra(g, directed=False, indices=np.arange(n, n + k), return_predecessors=True)
        d = dist[:, n:] + moved[:, None] + moved[None, :]
        np.fill_diagonal(d, 0.0)
        same = np.all(pts[:, None, :] == pts[None, :, :], axis=2)
        d[same] = 0.0
        nodes = np.vstack([self._nodes, q]) if n else q
        return Legs(pts, d, pred, q, nodes, n)

    def distance_matrix(self, xy: Any) -> np.ndarray:
        """Over-water distances in metres between the points ``xy`` (a ``(k, 2)`` array in the frame CRS).

        Symmetric, zero diagonal, ``inf`` between points in waters that do not connect.
        Points on land or near the shore are first moved to the nearest routable
        water; the move is added to their distances. Same as ``legs(xy).dist``.
        """
        return self.legs(xy).dist

    def path(self, a: Any, b: Any) -> list[tuple[float, float]]:
        """The over-water polyline from ``a`` to ``b`` as ``(x, y)`` tuples, first ``a``, last ``b``.

        For many legs among the same points use :meth:`legs` (one search for all).

        Raises
        ------
        InfeasibleError
            When ``a`` and ``b`` are in waters that do not connect.
        """
        return self.legs(np.asarray([a, b], dtype=float).reshape(2, 2)).path(0, 1)

    # ------------------------------------------------------------------ reach zone
    def reach_zone(self, sources: Any, reach_m: float, *, resolution_m: float | None = None,
                   max_cells: int = 400_000) -> tuple[Any, dict]:
        """The water within ``reach_m`` of over-water travel from the nearest source point.

        A distance field on a grid (cell ``resolution_m``; default: the water area
        over ``max_cells``, at least twice :attr:`cell_m`), computed by Dijkstra's
        algorithm on the grid's 16-neighbour graph from seeds at every visibility
        graph node (at its exact graph distance) and at the sources; each cell near
        the limit is then re-measured along the straight line to its seed when that
        line is clear. The cells within ``reach_m`` are joined and clipped to the water.

        Returns
        -------
        (polygon, info)
            ``info`` has ``cell_m``, ``error_m`` (the stated bound: the router's
            bound, plus 2.75 % of ``reach_m`` for a last leg measured on the grid,
            plus three cells) and ``method``.
        """
        import shapely
        from scipy import ndimage
        from scipy.sparse.csgraph import dijkstra

        water = self.water
        rg = float(resolution_m) if resolution_m else max(2.0 * self.cell_m, math.sqrt(water.area / max_cells))
        node_xy, node_d, _src = self.node_distances(sources)
        x0, y0, x1, y1 = water.bounds
        nx, ny = int(math.ceil((x1 - x0) / rg)) + 1, int(math.ceil((y1 - y0) / rg)) + 1
        gx0, gy0 = x0, y0
        xs = gx0 + (np.arange(nx) + 0.5) * rg
        ys = gy0 + (np.arange(ny) + 0.5) * rg
        shapely.prepare(water)
        wet = shapely.contains_xy(water, xs[None, :], ys[:, None])
        cx, cy = np.meshgrid(xs, ys)
        clear = self.clearance_lower_bound(np.c_[cx.ravel(), cy.ravel()]).reshape(ny, nx)
        open_ = wet & (clear >= 1.12 * rg)  # a knight move (sqrt 5 cells) stays within both end disks
        idx = np.full((ny, nx), -1, dtype=np.int64)
        m = int(open_.sum())
        idx[open_] = np.arange(m)
        rows, cols, wts = [], [], []
        for dy, dx in ((0, 1), (1, 0), (1, 1), (1, -1), (1, 2), (2, 1), (1, -2), (2, -1)):
            a = idx[0:ny - dy, max(0, -dx):nx - max(0, dx)]
            b = idx[dy:ny, max(0, dx):nx - max(0, -dx)]
            both = (a >= 0) & (b >= 0)
            rows.append(a[both]), cols.append(b[both])
            wts.append(np.full(int(both.sum()), rg * math.hypot(dx, dy)))
        # seeds: each finite node / source joins the open cells around it that it sees
        fin = np.isfinite(node_d)
        sxy, sd = node_xy[fin], node_d[fin]
        s = len(sxy)
        ci = np.floor((sxy[:, 0] - gx0) / rg).astype(np.int64)
        cj = np.floor((sxy[:, 1] - gy0) / rg).astype(np.int64)
        seed_rows, seed_cols, seed_w = [], [], []
        for dj in (-1, 0, 1):
            for di in (-1, 0, 1):
                ii, jj = ci + di, cj + dj
                inside = (ii >= 0) & (ii < nx) & (jj >= 0) & (jj < ny)
                cell = np.full(s, -1, dtype=np.int64)
                cell[inside] = idx[jj[inside], ii[inside]]
                use = cell >= 0
                if not use.any():
                    continue
                centre = np.c_[xs[np.clip(ii, 0, nx - 1)], ys[np.clip(jj, 0, ny - 1)]]
                su = np.flatnonzero(use)
                vis = self.visible(sxy[su], centre[su])
                su = su[vis]
                seed_rows.append(su), seed_cols.append(cell[su])
                seed_w.append(np.hypot(*(centre[su] - sxy[su]).T))
        # vertex layout: 0 = root, 1..s = seed points, s+1.. = open cells
        sr = np.concatenate(seed_rows) if seed_rows else np.zeros(0, dtype=np.int64)
        sc = np.concatenate(seed_cols) if seed_cols else np.zeros(0, dtype=np.int64)
        sw = np.concatenate(seed_w) if seed_w else np.zeros(0)
        gr, gc, gw = np.concatenate(rows), np.concatenate(cols), np.concatenate(wts)
        off = 1 + s
        r_all = np.r_[np.zeros(s, dtype=np.int64), 1 + sr, gr + off, gc + off]
        c_all = np.r_[1 + np.arange(s), sc + off, gc + off, gr + off]
        w_all = np.maximum(np.r_[sd, sw, gw, gw], 1e-12)
        g = self._sp.csr_matrix((w_all, (r_all, c_all)), shape=(off + m, off + m))
        dist, pred = dijkstra(g, directed=True, indices=0, return_predecessors=True)
        dcell = dist[off:]
        # the seed each cell was reached from (pointer jumping up the shortest-path tree)
        par = pred.copy()
        par[par < 0] = np.flatnonzero(par < 0)
        par[1:off] = np.arange(1, off)
        par[0] = 0
        for _ in range(64):
            nxt = par[par]
            if np.array_equal(nxt, par):
                break
            par = nxt
        origin = par[off:]
        cell_xy = np.c_[cx[open_], cy[open_]]
        limit_hi = reach_m * (1 + GRID_RELATIVE_ERROR) + 4 * rg
        band = np.flatnonzero((dcell > reach_m) & (dcell <= limit_hi) & (origin >= 1) & (origin <= s))
        if band.size:
            o = origin[band] - 1
            cand = sd[o] + np.hypot(*(cell_xy[band] - sxy[o]).T)
            better = cand < dcell[band]
            bb = band[better]
            vis = self.visible(sxy[o[better]], cell_xy[bb])
            dcell[bb[vis]] = cand[better][vis]
        field = np.full((ny, nx), np.inf)
        field[open_] = dcell
        # carry distances into the shore strip the grid cannot enter (a few cells wide)
        # cells that may hold some water: centre in it, or next to such a cell (the shore's partial cells)
        wet = ndimage.binary_dilation(wet, structure=np.ones((3, 3), dtype=bool))
        for _ in range(2 * int(math.ceil(2.5 + 1.12 + 2 * _SQRT2 * self.cell_m / rg)) + 2):
            best = field.copy()
            for dy in (-1, 0, 1):
                for dx in (-1, 0, 1):
                    if dx == dy == 0:
                        continue
                    shifted = np.full_like(field, np.inf)
                    ys_a = slice(max(0, dy), ny + min(0, dy))
                    xs_a = slice(max(0, dx), nx + min(0, dx))
                    ys_b = slice(max(0, -dy), ny + min(0, -dy))
                    xs_b = slice(max(0, -dx), nx + min(0, -dx))
                    shifted[ys_a, xs_a] = field[ys_b, xs_b] + rg * math.hypot(dx, dy)
                    best = np.minimum(best, shifted)
            field = np.where(wet & ~open_, best, field)
        inside = wet & (field <= reach_m)
        zone = _cells_to_polygon(inside, gx0, gy0, rg)
        zone = _polygonal(shapely.make_valid(zone.intersection(water))) if not zone.is_empty else zone
        err = self.error_m + GRID_RELATIVE_ERROR * reach_m + 3 * rg
        info = {"cell_m": rg, "error_m": float(err), "field": field, "xs": xs, "ys": ys,
                "method": "visibility graph + 16-neighbour grid distance field"}
        return zone, info


def _cells_to_polygon(mask: np.ndarray, x0: float, y0: float, cell: float) -> Any:
    """The union of the grid cells where ``mask`` is True (row runs joined into boxes, then dissolved)."""
    import shapely

    boxes = []
    ny, nx = mask.shape
    padded = np.zeros((ny, nx + 2), dtype=np.int8)
    padded[:, 1:-1] = mask
    diff = np.diff(padded, axis=1)
    jr, start = np.nonzero(diff == 1)
    _, stop = np.nonzero(diff == -1)
    if not jr.size:
        return shapely.Polygon()
    boxes = shapely.box(x0 + start * cell, y0 + jr * cell, x0 + stop * cell, y0 + (jr + 1) * cell)
    return _polygonal(shapely.union_all(boxes))


# =========================================================================== constraints


class Legs:
    """The legs among ``k`` points found by one search (:meth:`WaterRouter.legs`).

    Attributes
    ----------
    points : (k, 2) array
        The points as given.
    dist : (k, k) array
        Over-water distances in metres (snap moves included; ``inf`` where waters do not connect).
    """

    def __init__(self, points: np.ndarray, dist: np.ndarray, pred: np.ndarray, snapped: np.ndarray,
                 nodes: np.ndarray, n_graph: int):
        self.points = points
        self.dist = dist
        self._pred = pred
        self._snapped = snapped
        self._nodes = nodes
        self._n = n_graph

    def __len__(self) -> int:
        return len(self.points)

    def path(self, i: int, j: int) -> list[tuple[float, float]]:
        """The polyline of the leg from point ``i`` to point ``j``; its length is ``dist[i, j]``.

        Raises
        ------
        InfeasibleError
            When the two points lie in waters that do not connect.
        """
        a, b = self.points[i], self.points[j]
        if i == j or self.dist[i, j] == 0.0:
            return [tuple(map(float, a)), tuple(map(float, b))]
        if not np.isfinite(self.dist[i, j]):
            raise InfeasibleError(f"no over-water path joins ({a[0]:.1f}, {a[1]:.1f}) and "
                                  f"({b[0]:.1f}, {b[1]:.1f}): they lie in waters that do not connect")
        n, pred = self._n, self._pred[i]
        chain = [n + j]
        while chain[-1] != n + i:
            chain.append(int(pred[chain[-1]]))
        chain.reverse()
        out = [tuple(map(float, a))]
        for c in chain:
            p = tuple(map(float, self._nodes[c]))
            if p != out[-1]:
                out.append(p)
        end = tuple(map(float, b))
        if out[-1] != end:
            out.append(end)
        return out


class StraightLegs(Legs):
    """Straight-line legs, for a frame without a router."""

    def __init__(self, points: Any):
        pts = np.asarray(points, dtype=float).reshape(-1, 2)
        diff = pts[:, None, :] - pts[None, :, :]
        super().__init__(pts, np.hypot(diff[..., 0], diff[..., 1]), np.zeros((0, 0), dtype=np.int32), pts, pts, 0)

    def path(self, i: int, j: int) -> list[tuple[float, float]]:
        return [tuple(map(float, self.points[i])), tuple(map(float, self.points[j]))]

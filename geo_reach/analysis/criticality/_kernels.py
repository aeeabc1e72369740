"""Compiled kernels (numba) behind the criticality and incremental functions.

One search engine serves every caller: a lexicographic Dijkstra over pairs
``(cost, hub)`` - the cheapest trip, ties going to the lowest hub index - run
on a directed graph held as two CSR tables (``push``: the arcs leaving a
node in the search direction; ``pull``: the arcs entering it), plus a small
table of *added* arcs (new or changed links of a scenario), plus the hub
*seeds* (a hub's walk leg onto the network: the node it reaches, its cost,
the edge it enters or -1).

A search is always a *repair* of a set ``A`` of nodes whose values are not
known: each node of ``A`` starts from the best offer across its boundary
(arcs from nodes outside ``A``, and hub seeds), then an ordinary Dijkstra
runs from those starts (:func:`seed_boundary`, :func:`run`).  With ``A`` =
every node this is the full search; with ``A`` = the subtrees below closed
links it is the bounded repair; with extra offers pushed in (cheaper or
new arcs) and the search left unrestricted it propagates decreases.

Conventions inside the kernels: ``NO_HUB`` (2**62) is "no hub" (it sorts
after every hub index); ``inf`` is "no trip"; ``par`` is the previous node in
the search direction (-1 where the node is reached straight from a hub's
leg, or not at all); ``via`` is the edge of that arc or leg (-1 for a leg
onto a node, or none).  Work is counted as node settlements plus arc and
seed scans, the same units for a full search and a repair.

References
----------
.. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
.. [2] Ramalingam, G. and Reps, T. (1996). An incremental algorithm for a
   generalization of the shortest-path problem. Journal of Algorithms
   21(2), 267-305 (from memory): the repair of the affected part only.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["full_search", "preorder", "collect_subtrees", "place_cost", "place_costs", "link_chunk", "update",
           "seeds_still_there", "seeds_changed"]

NO_HUB = np.int64(2**62)


@numba.njit(cache=True, inline="always")
def better(d1, l1, d2, l2):
    """Lexicographic ``(d1, l1) < (d2, l2)``."""
    return d1 < d2 or (d1 == d2 and l1 < l2)


@numba.njit(cache=True)
def heap_push(hd, hl, hv, size, d, lab, v):
    i = size
    while i > 0:
        p = (i - 1) >> 1
        if better(d, lab, hd[p], hl[p]):
            hd[i] = hd[p]
            hl[i] = hl[p]
            hv[i] = hv[p]
            i = p
        else:
            break
    hd[i] = d
    hl[i] = lab
    hv[i] = v
    return size + 1


@numba.njit(cache=True)
def heap_pop(hd, hl, hv, size):
    d, lab, v = hd[0], hl[0], hv[0]
    size -= 1
    if size > 0:
        ld, ll, lv = hd[size], hl[size], hv[size]
        i = 0
        while True:
            c = 2 * i + 1
            if c >= size:
                break
            if c + 1 < size and better(hd[c + 1], hl[c + 1], hd[c], hl[c]):
                c += 1
            if better(hd[c], hl[c], ld, ll):
                hd[i] = hd[c]
                hl[i] = hl[c]
                hv[i] = hv[c]
                i = c
            else:
                break
        hd[i] = ld
        hl[i] = ll
        hv[i] = lv
    return d, lab, v, size


@numba.njit(cache=True)
def seed_boundary(A, nA, need, stamp, cur, full, dist, lab, par, via, n0,
                  pull_ptr, pull_tail, pull_cost, pull_edge,
                  apull_ptr, apull_tail, apull_cost, apull_edge,
                  seed_ptr, seed_hub, seed_cost, seed_edge,
                  closed_base, closed_new, hd, hl, hv, size):
    """Give every node of ``A`` its best offer from outside ``A`` and push it.

    Nodes of ``A`` carry ``stamp == cur``.  ``full``: ``A`` is every node, so
    only hub seeds can offer (the arc scan is skipped).  ``need[i]`` false:
    every in-arc of ``A[i]`` is known to come from inside ``A`` (its scan is
    skipped; the check counts as one scan).  Base arcs are
    skipped where ``closed_base[edge]``; added arcs and seeds where
    ``closed_new[edge]``.  Returns (heap size, scans).
    """
    scans = 0
    inf = np.inf
    for i in range(nA):
        a = A[i]
        bd = inf
        bl = NO_HUB
        bp = -1
        be = -1
        if not full and not need[i]:
            scans += 1
        elif not full:
            if a < n0:
                for j in range(pull_ptr[a], pull_ptr[a + 1]):
                    scans += 1
                    p = pull_tail[j]
                    if stamp[p] == cur:
                        continue
                    e = pull_edge[j]
                    if closed_base[e]:
                        continue
                    dp = dist[p]
                    if dp == inf:
                        continue
                    nd = dp + pull_cost[j]
                    if better(nd, lab[p], bd, bl):
                        bd = nd
                        bl = lab[p]
                        bp = p
                        be = e
            for j in range(apull_ptr[a], apull_ptr[a + 1]):
                scans += 1
                p = apull_tail[j]
                if stamp[p] == cur:
                    continue
                e = apull_edge[j]
                if closed_new[e]:
                    continue
                dp = dist[p]
                if dp == inf:
                    continue
                nd = dp + apull_cost[j]
                if better(nd, lab[p], bd, bl):
                    bd = nd
                    bl = lab[p]
                    bp = p
                    be = e
        for j in range(seed_ptr[a], seed_ptr[a + 1]):
            scans += 1
            e = seed_edge[j]
            if e >= 0 and closed_new[e]:
                continue
            if better(seed_cost[j], seed_hub[j], bd, bl):
                bd = seed_cost[j]
                bl = seed_hub[j]
                bp = -1
                be = e
        dist[a] = bd
        lab[a] = bl
        par[a] = bp
        via[a] = be
        if bd < inf:
            size = heap_push(hd, hl, hv, size, bd, bl, a)
    return size, scans


@numba.njit(cache=True)
def offer(v, d, lab_, p, e, dist, lab, par, via, hd, hl, hv, size):
    """Offer ``(d, lab_)`` to node ``v`` (from node ``p`` over edge ``e``); push it if better."""
    if better(d, lab_, dist[v], lab[v]):
        dist[v] = d
        lab[v] = lab_
        par[v] = p
        via[v] = e
        size = heap_push(hd, hl, hv, size, d, lab_, v)
    return size


@numba.njit(cache=True)
def run(stamp, cur, restrict, dist, lab, par, via, n0,
        push_ptr, push_head, push_cost, push_edge,
        apush_ptr, apush_head, apush_cost, apush_edge,
        closed_base, closed_new, hd, hl, hv, size):
    """Dijkstra from what the heap holds.  ``restrict``: relax only into nodes of ``A``.

    Returns (settled nodes, arc scans).
    """
    pops = 0
    scans = 0
    while size > 0:
        d, lv, v, size = heap_pop(hd, hl, hv, size)
        if d != dist[v] or lv != lab[v]:
            continue
        pops += 1
        if v < n0:
            for j in range(push_ptr[v], push_ptr[v + 1]):
                scans += 1
                h = push_head[j]
                if restrict and stamp[h] != cur:
                    continue
                e = push_edge[j]
                if closed_base[e]:
                    continue
                nd = d + push_cost[j]
                if better(nd, lv, dist[h], lab[h]):
                    dist[h] = nd
                    lab[h] = lv
                    par[h] = v
                    via[h] = e
                    size = heap_push(hd, hl, hv, size, nd, lv, h)
        for j in range(apush_ptr[v], apush_ptr[v + 1]):
            scans += 1
            h = apush_head[j]
            if restrict and stamp[h] != cur:
                continue
            e = apush_edge[j]
            if closed_new[e]:
                continue
            nd = d + apush_cost[j]
            if better(nd, lv, dist[h], lab[h]):
                dist[h] = nd
                lab[h] = lv
                par[h] = v
                via[h] = e
                size = heap_push(hd, hl, hv, size, nd, lv, h)
    return pops, scans


@numba.njit(cache=True)
def full_search(n, push_ptr, push_head, push_cost, push_edge, seed_ptr, seed_hub, seed_cost, seed_edge,
                closed):
    """The whole forest of cheapest trips from the seeds (``A`` = every node).

    Returns dist, lab, par, via, work.
    """
    dist = np.full(n, np.inf)
    lab = np.full(n, NO_HUB, np.int64)
    par = np.full(n, -1, np.int64)
    via = np.full(n, -1, np.int64)
    cap = n + len(push_head) + len(seed_hub) + 1
    hd = np.empty(cap)
    hl = np.empty(cap, np.int64)
    hv = np.empty(cap, np.int64)
    A = np.arange(n)
    stamp = np.zeros(n, np.int64)
    z = np.zeros(n + 1, np.int64)
    ei = np.zeros(0, np.int64)
    ef = np.zeros(0)
    size, s1 = seed_boundary(A, n, np.ones(1, np.bool_), stamp, 1, True, dist, lab, par, via, n,
                             push_ptr, ei, ef, ei, z, ei, ef, ei,
                             seed_ptr, seed_hub, seed_cost, seed_edge, closed, closed, hd, hl, hv, 0)
    pops, s2 = run(stamp, 1, False, dist, lab, par, via, n, push_ptr, push_head, push_cost, push_edge,
                   z, ei, ef, ei, closed, closed, hd, hl, hv, size)
    return dist, lab, par, via, s1 + pops + s2


@numba.njit(cache=True)
def preorder(par, dist):
    """Preorder of the search forest: ``order``, ``tin`` (position, -1 if unreached), ``size``.

    The subtree of ``v`` is ``order[tin[v] : tin[v] + size[v]]``.
    """
    n = len(par)
    cptr = np.zeros(n + 1, np.int64)
    for v in range(n):
        p = par[v]
        if p >= 0:
            cptr[p + 1] += 1
    for v in range(n):
        cptr[v + 1] += cptr[v]
    kids = np.empty(cptr[n], np.int64)
    fill = cptr[:n].copy()
    for v in range(n):
        p = par[v]
        if p >= 0:
            kids[fill[p]] = v
            fill[p] += 1
    order = np.empty(n, np.int64)
    tin = np.full(n, -1, np.int64)
    size = np.zeros(n, np.int64)
    stack = np.empty(n, np.int64)
    t = 0
    for r in range(n):
        if par[r] >= 0 or dist[r] == np.inf:
            continue
        sp = 0
        stack[0] = r
        while sp >= 0:
            v = stack[sp]
            sp -= 1
            tin[v] = t
            order[t] = v
            t += 1
            for j in range(cptr[v + 1] - 1, cptr[v] - 1, -1):
                sp += 1
                stack[sp] = kids[j]
    for i in range(t - 1, -1, -1):
        v = order[i]
        size[v] += 1
        p = par[v]
        if p >= 0:
            size[p] += size[v]
    return order[:t], tin, size


@numba.njit(cache=True)
def in_span(tin, dist, pull_ptr, pull_tail):
    """Lowest and highest preorder position (``tin``) of each node's reached in-neighbours.

    A node with none gets (n, -1): an empty span inside every range.
    """
    n = len(tin)
    lo = np.full(n, n, np.int64)
    hi = np.full(n, -1, np.int64)
    for a in range(n):
        for j in range(pull_ptr[a], pull_ptr[a + 1]):
            p = pull_tail[j]
            if dist[p] == np.inf:
                continue
            t = tin[p]
            if t < lo[a]:
                lo[a] = t
            if t > hi[a]:
                hi[a] = t
    return lo, hi


@numba.njit(cache=True)
def seeds_still_there(nodes, hubs, edges, costs, ptr, s_hub, s_edge, s_cost):
    """For each ``(nodes[i], hubs[i], edges[i])``: is there a seed of that hub at that node entering
    that edge, costing at most ``costs[i]``?  (Seeds as a CSR table over nodes.)"""
    out = np.zeros(len(nodes), np.bool_)
    n = len(ptr) - 1
    for i in range(len(nodes)):
        v = nodes[i]
        if v >= n:
            continue
        for j in range(ptr[v], ptr[v + 1]):
            if s_hub[j] == hubs[i] and s_edge[j] == edges[i] and s_cost[j] <= costs[i]:
                out[i] = True
                break
    return out


@numba.njit(cache=True)
def seeds_changed(ptr, hub, edge, cost, old_ptr, old_hub, old_edge, old_cost):
    """For each seed of the new table: True unless the old table has the same seed at the same node
    (same hub, edge and cost).  ``old_hub`` already renumbered (-1 = removed hub)."""
    n = len(ptr) - 1
    n_old = len(old_ptr) - 1
    out = np.ones(len(hub), np.bool_)
    for v in range(n):
        if v >= n_old:
            break
        for j in range(ptr[v], ptr[v + 1]):
            for i in range(old_ptr[v], old_ptr[v + 1]):
                if old_hub[i] == hub[j] and old_edge[i] == edge[j] and old_cost[i] == cost[j]:
                    out[j] = False
                    break
    return out


@numba.njit(cache=True)
def children(par):
    """Children of each node in the search forest, as a CSR table (ptr, kids)."""
    n = len(par)
    cptr = np.zeros(n + 1, np.int64)
    for v in range(n):
        p = par[v]
        if p >= 0:
            cptr[p + 1] += 1
    for v in range(n):
        cptr[v + 1] += cptr[v]
    kids = np.empty(cptr[n], np.int64)
    fill = cptr[:n].copy()
    for v in range(n):
        p = par[v]
        if p >= 0:
            kids[fill[p]] = v
            fill[p] += 1
    return cptr, kids


@numba.njit(cache=True)
def collect_subtrees(roots, cptr, kids, stamp, cur, A):
    """Every node below ``roots`` (roots included) into ``A``, marked ``stamp = cur``; returns the count."""
    nA = 0
    for r in roots:
        if stamp[r] == cur:
            continue
        stamp[r] = cur
        A[nA] = r
        nA += 1
        i = nA - 1
        while i < nA:
            v = A[i]
            i += 1
            for j in range(cptr[v], cptr[v + 1]):
                c = kids[j]
                if stamp[c] != cur:
                    stamp[c] = cur
                    A[nA] = c
                    nA += 1
    return nA


@numba.njit(cache=True)
def place_cost(s, dist, closed, leg_ptr, leg_node, leg_cost, leg_edge, dir_ptr, dir_cost, dir_edge):
    """Cheapest trip of place ``s``: over its legs not on a closed edge, and its direct trips."""
    best = np.inf
    for j in range(leg_ptr[s], leg_ptr[s + 1]):
        e = leg_edge[j]
        if e >= 0 and closed[e]:
            continue
        dn = dist[leg_node[j]]
        if dn == np.inf:
            continue
        c = dn + leg_cost[j]
        if c < best:
            best = c
    for j in range(dir_ptr[s], dir_ptr[s + 1]):
        e = dir_edge[j]
        if e >= 0 and closed[e]:   # -1: a walk off the network, which no closure touches
            continue
        if dir_cost[j] < best:
            best = dir_cost[j]
    return best


@numba.njit(cache=True)
def place_costs(dist, closed, leg_ptr, leg_node, leg_cost, leg_edge, dir_ptr, dir_cost, dir_edge):
    """:func:`place_cost` for every place (one kind): shape (n_places,)."""
    P = len(leg_ptr) - 1
    out = np.empty(P)
    for s in range(P):
        out[s] = place_cost(s, dist, closed, leg_ptr, leg_node, leg_cost, leg_edge, dir_ptr, dir_cost, dir_edge)
    return out


@numba.njit(cache=True)
def link_chunk(links, n, m,
               push_ptr, push_head, push_cost, push_edge,
               pull_ptr, pull_tail, pull_cost, pull_edge,
               seed_ptr, seed_hub, seed_cost, seed_edge,
               d0, l0, order, tin, size, lo, hi, via_ptr, via_nodes,
               people, reached,
               leg_ptr, leg_node, leg_cost, leg_edge, node_p_ptr, node_p, edge_p_ptr, edge_p,
               dir_ptr, dir_cost, dir_edge, p_cost0, p_people):
    """Close each link of ``links`` in turn and measure who loses what (all hub kinds).

    Per kind ``k`` (rows of the 2-D inputs): ``d0``/``l0`` the baseline
    forest, ``order``/``tin``/``size`` its preorder, ``via_ptr``/``via_nodes``
    the nodes whose tree arc or hub leg uses each edge (CSR over edges),
    ``seed_ptr`` the hub seeds per node, ``lo``/``hi`` the lowest and
    highest preorder position of each node's reached in-neighbours (a node
    whose span lies inside its subtree's range has no offer from outside it
    and is not scanned).  ``people``: people per node (1 when
    nodes stand in for people, else 0); ``reached``: kinds each node reaches.
    Places (settlements): legs per place (``leg_*``), places per node and
    per edge, direct trips along one edge per kind (``dir_*``, rows of
    ``dir_ptr``), baseline costs ``p_cost0`` (K, P) and ``p_people``.

    Returns ``cut`` (L, K) people losing kind k, ``added`` (L, K) people x
    added cost, ``nodes_cut`` (L,) nodes losing every hub, ``work``.
    """
    L = len(links)
    K = d0.shape[0]
    P = len(p_people)
    cut = np.zeros((L, K))
    added = np.zeros((L, K))
    nodes_cut = np.zeros(L, np.int64)
    dist = d0.copy()
    lab = l0.copy()
    par = np.full(n, -1, np.int64)
    via = np.full(n, -1, np.int64)
    stamp = np.zeros(n, np.int32)
    cur = 0
    closed = np.zeros(m, np.bool_)
    z = np.zeros(n + 1, np.int64)
    ei = np.zeros(0, np.int64)
    ef = np.zeros(0)
    cap = n + len(push_head) + 1
    hd = np.empty(cap)
    hl = np.empty(cap, np.int64)
    hv = np.empty(cap, np.int64)
    A = np.empty(n, np.int64)
    need = np.empty(n, np.bool_)
    lost_at = np.full(n, -1, np.int32)
    lost_n = np.zeros(n, np.int32)
    p_at = np.full(P, -1, np.int32)
    plist = np.empty(P, np.int64)
    work = 0
    for li in range(L):
        e = links[li]
        closed[e] = True
        for k in range(K):
            cur += 1
            nA = 0
            for j in range(via_ptr[k, e], via_ptr[k, e + 1]):
                r = via_nodes[k, j]
                t0 = tin[k, r]
                t1 = t0 + size[k, r]
                for i in range(t0, t1):
                    a = order[k, i]
                    if stamp[a] != cur:
                        stamp[a] = cur
                        A[nA] = a
                        need[nA] = (lo[k, a] < t0 or hi[k, a] >= t1
                                    or seed_ptr[k, a + 1] > seed_ptr[k, a])
                        nA += 1
            has_places = P > 0 and edge_p_ptr[e + 1] > edge_p_ptr[e]
            if nA == 0 and not has_places:
                continue
            dk = dist[k]
            lk = lab[k]
            if nA > 0:
                hs, s1 = seed_boundary(A, nA, need, stamp, cur, False, dk, lk, par, via, n,
                                       pull_ptr, pull_tail, pull_cost, pull_edge, z, ei, ef, ei,
                                       seed_ptr[k], seed_hub, seed_cost, seed_edge, closed, closed, hd, hl, hv, 0)
                pops, s2 = run(stamp, cur, True, dk, lk, par, via, n, push_ptr, push_head, push_cost, push_edge,
                               z, ei, ef, ei, closed, closed, hd, hl, hv, hs)
                work += s1 + pops + s2
                for i in range(nA):
                    a = A[i]
                    if dk[a] == np.inf:
                        cut[li, k] += people[a]
                        if lost_at[a] != li:
                            lost_at[a] = li
                            lost_n[a] = 0
                        lost_n[a] += 1
                        if lost_n[a] == reached[a]:
                            nodes_cut[li] += 1
                    else:
                        added[li, k] += people[a] * (dk[a] - d0[k, a])
            if P > 0:
                np_ = 0
                for i in range(nA):
                    a = A[i]
                    for j in range(node_p_ptr[a], node_p_ptr[a + 1]):
                        s = node_p[j]
                        if p_at[s] != cur:
                            p_at[s] = cur
                            plist[np_] = s
                            np_ += 1
                for j in range(edge_p_ptr[e], edge_p_ptr[e + 1]):
                    s = edge_p[j]
                    if p_at[s] != cur:
                        p_at[s] = cur
                        plist[np_] = s
                        np_ += 1
                for i in range(np_):
                    s = plist[i]
                    c0 = p_cost0[k, s]
                    if c0 == np.inf:
                        continue
                    c1 = place_cost(s, dk, closed, leg_ptr, leg_node, leg_cost, leg_edge,
                                    dir_ptr[k], dir_cost, dir_edge)
                    work += leg_ptr[s + 1] - leg_ptr[s]
                    if c1 == np.inf:
                        cut[li, k] += p_people[s]
                    else:
                        added[li, k] += p_people[s] * (c1 - c0)
            for i in range(nA):
                a = A[i]
                dk[a] = d0[k, a]
                lk[a] = l0[k, a]
        closed[e] = False
    return cut, added, nodes_cut, work


@numba.njit(cache=True)
def update(n1, dist, lab, par, via, n0,
           push_ptr, push_head, push_cost, push_edge,
           pull_ptr, pull_tail, pull_cost, pull_edge,
           apush_ptr, apush_head, apush_cost, apush_edge,
           apull_ptr, apull_tail, apull_cost, apull_edge,
           seed_ptr, seed_hub, seed_cost, seed_edge,
           closed_base, closed_new, roots, cptr, kids, offer_nodes):
    """Repair the forest in place after a change (see :mod:`..incremental`).

    ``dist``/``lab``/``par``/``via`` (length ``n1``) hold the baseline values
    (new nodes: none).  ``roots``: nodes whose tree arc or hub leg is gone or
    dearer; everything below them is recomputed from its boundary.
    ``offer_nodes``: heads of added arcs and nodes with hub seeds, offered
    their new values so decreases spread.  Returns (work, nodes repaired).
    """
    stamp = np.zeros(n1, np.int64)
    A = np.empty(n1, np.int64)
    n_base = len(cptr) - 1
    rr = np.empty(len(roots), np.int64)
    k = 0
    for r in roots:
        if r < n_base:
            rr[k] = r
            k += 1
    nA = collect_subtrees(rr[:k], cptr, kids, stamp, 1, A)
    cap = n1 + len(push_head) + len(apush_head) + len(seed_hub) + len(offer_nodes) + 1
    hd = np.empty(cap)
    hl = np.empty(cap, np.int64)
    hv = np.empty(cap, np.int64)
    size, s1 = seed_boundary(A, nA, np.ones(nA, np.bool_), stamp, 1, False, dist, lab, par, via, n0,
                             pull_ptr, pull_tail, pull_cost, pull_edge,
                             apull_ptr, apull_tail, apull_cost, apull_edge,
                             seed_ptr, seed_hub, seed_cost, seed_edge, closed_base, closed_new, hd, hl, hv, 0)
    work = s1
    for v in offer_nodes:
        if stamp[v] == 1:
            continue   # already given its best offer
        for j in range(seed_ptr[v], seed_ptr[v + 1]):
            work += 1
            e = seed_edge[j]
            if e >= 0 and closed_new[e]:
                continue
            size = offer(v, seed_cost[j], seed_hub[j], -1, e, dist, lab, par, via, hd, hl, hv, size)
        for j in range(apull_ptr[v], apull_ptr[v + 1]):
            work += 1
            p = apull_tail[j]
            e = apull_edge[j]
            if closed_new[e] or dist[p] == np.inf:
                continue
            size = offer(v, dist[p] + apull_cost[j], lab[p], p, e, dist, lab, par, via, hd, hl, hv, size)
    pops, s2 = run(stamp, 0, False, dist, lab, par, via, n0, push_ptr, push_head, push_cost, push_edge,
                   apush_ptr, apush_head, apush_cost, apush_edge, closed_base, closed_new, hd, hl, hv, size)
    return work + pops + s2, nA

/*
 * The routing loop of the warm engine (planner.core.engines): successive
 * shortest paths from a pseudoflow and a potential that satisfy the
 * reduced-cost optimality conditions, until every node is balanced.
 *
 * Called through ctypes; the module itself only carries a docstring, so that
 * it imports like any other module of the package.
 *
 * The network has n nodes and m arcs (tail, head, cost, lower, upper). Every
 * node lists its incidences in CSR form (first_out, inc): an incidence
 * 2a is arc a left forwards from its tail, 2a + 1 arc a left backwards from its
 * head. On entry flow lies within its bounds and every residual arc has a
 * non-negative reduced cost c + pi(tail) - pi(head) (forwards) or its negative
 * (backwards); excess[v] is what node v still has to send (negative: to
 * receive). The loop takes the nodes of sources in turn and, while one has
 * excess, runs a Dijkstra search from it on reduced costs that stops at the
 * first node with a deficit it settles, at distance D; every settled node v
 * then takes pi(v) += dist(v) - D, which keeps every reduced cost
 * non-negative and makes the path found tight, and the path carries as much
 * as its residual capacity, the excess and the deficit allow. A search that
 * runs out of nodes without meeting a deficit proves the week infeasible: the
 * nodes it reached are written to reached[] (a cut the caller checks).
 *
 * Exact int64 arithmetic: every sum that could overflow is checked.
 * stats[0] counts searches, stats[1] the nodes they settled; the loop gives
 * up once they settled more than budget nodes (budget -1: no limit).
 * Returns 0 (balanced), 1 (infeasible), -1 (out of memory), -2 (a figure
 * would overflow int64), -3 (a residual arc with a negative reduced cost: the
 * input broke the precondition), -5 (over budget).
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>
#include <stdlib.h>

enum { ROUTE_BALANCED = 0, ROUTE_INFEASIBLE = 1, ROUTE_NO_MEMORY = -1, ROUTE_OVERFLOW = -2, ROUTE_BROKEN = -3, ROUTE_NO_DEFICIT = -4, ROUTE_BUDGET = -5 };

#include "_heap.h"

typedef struct {
    int64_t n;
    const int64_t *tail, *head, *cost, *lower, *upper, *first_out, *inc;
    int64_t *flow, *pi, *excess;
} network;

typedef struct {
    int64_t *dist, *pred, *touched, *settled;
    char *done;
    int64_t n_touched, n_settled;
    heap h;
} workspace;

/* Residual capacity, other end and reduced cost of incidence code; 0 or ROUTE_OVERFLOW. */
static int step(const network *g, int64_t code, int64_t *cap, int64_t *other, int64_t *reduced) {
    int64_t a = code >> 1, sum;
    if (code & 1) {
        *cap = g->flow[a] - g->lower[a];
        *other = g->tail[a];
    } else {
        *cap = g->upper[a] - g->flow[a];
        *other = g->head[a];
    }
    if (*cap <= 0) return 0;
    if (__builtin_add_overflow(g->cost[a], g->pi[g->tail[a]], &sum)) return ROUTE_OVERFLOW;
    if (__builtin_sub_overflow(sum, g->pi[g->head[a]], reduced)) return ROUTE_OVERFLOW;
    if (code & 1) *reduced = -*reduced;
    return 0;
}

/* Dijkstra from s on reduced costs; the first settled node with a deficit, or ROUTE_NO_DEFICIT, or an error. */
static int64_t search(const network *g, workspace *w, int64_t s) {
    w->h.size = 0;
    w->n_touched = w->n_settled = 0;
    w->dist[s] = 0;
    w->pred[s] = -1;
    w->touched[w->n_touched++] = s;
    if (heap_push(&w->h, 0, s)) return ROUTE_NO_MEMORY;
    while (w->h.size > 0) {
        entry e = heap_pop(&w->h);
        int64_t u = e.node;
        if (w->done[u] || e.dist != w->dist[u]) continue;
        w->done[u] = 1;
        w->settled[w->n_settled++] = u;
        if (g->excess[u] < 0) return u;
        for (int64_t k = g->first_out[u]; k < g->first_out[u + 1]; k++) {
            int64_t code = g->inc[k], cap, v, r, d;
            if (step(g, code, &cap, &v, &r)) return ROUTE_OVERFLOW;
            if (cap <= 0 || w->done[v]) continue;
            if (r < 0) return ROUTE_BROKEN;
            if (__builtin_add_overflow(e.dist, r, &d)) return ROUTE_OVERFLOW;
            if (w->dist[v] < 0 || d < w->dist[v]) {
                if (w->dist[v] < 0) w->touched[w->n_touched++] = v;
                w->dist[v] = d;
                w->pred[v] = code;
                if (heap_push(&w->h, d, v)) return ROUTE_NO_MEMORY;
            }
        }
    }
    return ROUTE_NO_DEFICIT;
}

/* The node before v on the search tree's path (pred[v] is the incidence that reached v). */
static int64_t previous(const network *g, int64_t code) {
    return (code & 1) ? g->head[code >> 1] : g->tail[code >> 1];
}

/* Push as much as the path s -> t (pred[v]: the incidence that reached v), the excess and the deficit allow. */
static void push_path(const network *g, const int64_t *pred, int64_t s, int64_t t) {
    int64_t delta = g->excess[s] < -g->excess[t] ? g->excess[s] : -g->excess[t];
    for (int64_t v = t; v != s; v = previous(g, pred[v])) {
        int64_t code = pred[v], a = code >> 1;
        int64_t cap = (code & 1) ? g->flow[a] - g->lower[a] : g->upper[a] - g->flow[a];
        if (cap < delta) delta = cap;
    }
    for (int64_t v = t; v != s; v = previous(g, pred[v])) {
        int64_t code = pred[v], a = code >> 1;
        g->flow[a] += (code & 1) ? -delta : delta;
    }
    g->excess[s] -= delta;
    g->excess[t] += delta;
}

/* Lower the potentials of the settled nodes, then push along the path s -> t. */
static int augment(const network *g, workspace *w, int64_t s, int64_t t) {
    int64_t far = w->dist[t];
    for (int64_t i = 0; i < w->n_settled; i++) {
        int64_t v = w->settled[i];
        if (__builtin_add_overflow(g->pi[v], w->dist[v] - far, &g->pi[v])) return ROUTE_OVERFLOW;
    }
    push_path(g, w->pred, s, t);
    return 0;
}

static void forget(workspace *w) {
    for (int64_t i = 0; i < w->n_touched; i++) {
        int64_t v = w->touched[i];
        w->dist[v] = -1;
        w->done[v] = 0;
    }
}

/* The search arrays for n nodes, every distance unset; -1 when memory runs out (close_workspace frees). */
static int open_workspace(workspace *w, int64_t n) {
    w->dist = malloc((size_t)n * sizeof(int64_t));
    w->pred = malloc((size_t)n * sizeof(int64_t));
    w->touched = malloc((size_t)n * sizeof(int64_t));
    w->settled = malloc((size_t)n * sizeof(int64_t));
    w->done = calloc((size_t)n, 1);
    if (!w->dist || !w->pred || !w->touched || !w->settled || !w->done) return ROUTE_NO_MEMORY;
    for (int64_t v = 0; v < n; v++) w->dist[v] = -1;
    return 0;
}

static void close_workspace(workspace *w) {
    free(w->dist); free(w->pred); free(w->touched); free(w->settled); free(w->done); free(w->h.items);
}

int planner_warm_route(
    int64_t n, const int64_t *tail, const int64_t *head, const int64_t *cost, const int64_t *lower,
    const int64_t *upper, const int64_t *first_out, const int64_t *inc,
    int64_t *flow, int64_t *pi, int64_t *excess,
    int64_t n_sources, const int64_t *sources, int64_t budget, int64_t *stats, int8_t *reached)
{
    network g = {n, tail, head, cost, lower, upper, first_out, inc, flow, pi, excess};
    workspace w = {0};
    int status = ROUTE_BALANCED;
    if (open_workspace(&w, n)) { status = ROUTE_NO_MEMORY; goto done; }
    for (int64_t i = 0; i < n_sources && status == ROUTE_BALANCED; i++) {
        int64_t s = sources[i];
        while (excess[s] > 0) {
            int64_t t = search(&g, &w, s);
            stats[0] += 1;
            stats[1] += w.n_settled;
            if (t == ROUTE_NO_DEFICIT) {
                for (int64_t k = 0; k < w.n_settled; k++) reached[w.settled[k]] = 1;
                status = ROUTE_INFEASIBLE;
            } else if (t < 0) {
                status = (int)t;
            } else {
                status = augment(&g, &w, s, t);
            }
            forget(&w);
            if (status == ROUTE_BALANCED && budget >= 0 && stats[1] > budget) status = ROUTE_BUDGET;
            if (status != ROUTE_BALANCED) break;
        }
    }
done:
    close_workspace(&w);
    return status;
}

/*
 * Dual repair before routing: new potentials that keep the tight arcs of the
 * earlier optimum tight under the new costs. kind[a] is 2 for an arc strictly
 * inside its bounds with reduced cost 0 under the earlier costs and
 * potentials, 1 for another arc with reduced cost 0, 0 otherwise. A spanning
 * forest of the tight arcs, grown breadth-first from order[0], order[1], ...
 * and taking kind-2 arcs before kind-1 arcs (a node reachable through kind-2
 * arcs hangs from the forest through them), fixes each node's potential from
 * its parent's: pi(head) = pi(tail) + cost on a tree arc. Each tree keeps its
 * root's earlier potential. parent[v] is the incidence code of the tree arc
 * that reached v (-1 at roots), visit[] the nodes in the order reached, each
 * after its parent. Returns 0, -1 (out of memory) or -2 (overflow).
 */
static int settle_child(const network *g, int64_t code, int64_t *pi) {
    int64_t a = code >> 1;
    if (code & 1) return __builtin_sub_overflow(pi[g->head[a]], g->cost[a], &pi[g->tail[a]]) ? ROUTE_OVERFLOW : 0;
    return __builtin_add_overflow(pi[g->tail[a]], g->cost[a], &pi[g->head[a]]) ? ROUTE_OVERFLOW : 0;
}

static int64_t grow(const network *g, const int8_t *kind, char *seen, int64_t *pi, int64_t *parent,
                    int64_t *level, int64_t n_level, int64_t *next_node, int64_t *next_code, int64_t *n_next) {
    /* Spread from the nodes of level through kind-2 arcs; queue kind-1 arcs for the next level. */
    for (int64_t i = 0; i < n_level; i++) {
        int64_t u = level[i];
        for (int64_t k = g->first_out[u]; k < g->first_out[u + 1]; k++) {
            int64_t code = g->inc[k], a = code >> 1;
            int64_t v = (code & 1) ? g->tail[a] : g->head[a];
            if (seen[v] || kind[a] == 0) continue;
            if (kind[a] == 1) {
                next_node[*n_next] = v;
                next_code[(*n_next)++] = code;
                continue;
            }
            seen[v] = 1;
            parent[v] = code;
            if (settle_child(g, code, pi)) return ROUTE_OVERFLOW;
            level[n_level++] = v;
        }
    }
    return n_level;
}

int planner_warm_tree_potential(
    int64_t n, const int64_t *tail, const int64_t *head, const int64_t *cost,
    const int64_t *first_out, const int64_t *inc, const int8_t *kind, const int64_t *order, int64_t *pi,
    int64_t *parent, int64_t *visit)
{
    int64_t n_visited = 0;
    network g = {n, tail, head, cost, NULL, NULL, first_out, inc, NULL, pi, NULL};
    int64_t n_arcs = first_out[n] / 2, status = 0;
    char *seen = calloc((size_t)n + 1, 1);
    int64_t *level = malloc(((size_t)n + 1) * sizeof(int64_t));
    int64_t *next_node = malloc(((size_t)2 * n_arcs + 1) * sizeof(int64_t));
    int64_t *next_code = malloc(((size_t)2 * n_arcs + 1) * sizeof(int64_t));
    if (!seen || !level || !next_node || !next_code) { status = ROUTE_NO_MEMORY; goto done; }
    for (int64_t r = 0; r < n; r++) {
        int64_t root = order[r], n_level = 1;
        if (seen[root]) continue;
        seen[root] = 1;
        parent[root] = -1;
        level[0] = root;
        for (;;) {
            int64_t n_next = 0;
            n_level = grow(&g, kind, seen, pi, parent, level, n_level, next_node, next_code, &n_next);
            if (n_level < 0) { status = n_level; goto done; }
            for (int64_t i = 0; i < n_level; i++) visit[n_visited++] = level[i];
            n_level = 0;
            for (int64_t i = 0; i < n_next; i++) {
                if (seen[next_node[i]]) continue;
                seen[next_node[i]] = 1;
                parent[next_node[i]] = next_code[i];
                if (settle_child(&g, next_code[i], pi)) { status = ROUTE_OVERFLOW; goto done; }
                level[n_level++] = next_node[i];
            }
            if (n_level == 0) break;
        }
    }
done:
    free(seen); free(level); free(next_node); free(next_code);
    return (int)status;
}

/*
 * Primal repair along the forest: deepest nodes first, each node passes its
 * excess (or deficit) to its parent over its tree arc, as far as the arc's
 * bounds allow; what does not fit stays at the node. Tree arcs are tight, so
 * the flow keeps the reduced-cost optimality conditions. An edit's excess and
 * deficit meet where their tree paths join, and most of them cancel there.
 */
void planner_warm_tree_push(
    int64_t n, const int64_t *tail, const int64_t *head, const int64_t *lower, const int64_t *upper,
    const int64_t *parent, const int64_t *visit, int64_t *flow, int64_t *excess)
{
    for (int64_t i = n - 1; i >= 0; i--) {
        int64_t v = visit[i], code = parent[v], e = excess[v];
        if (code < 0 || e == 0) continue;
        int64_t a = code >> 1, up = (code & 1) ? head[a] : tail[a];
        /* Raising the flow of a tree arc v -> up (code & 1) sends from v; lowering one up -> v does too. */
        int64_t room = (e > 0) == ((code & 1) != 0) ? upper[a] - flow[a] : flow[a] - lower[a];
        int64_t moved = e > 0 ? (e < room ? e : room) : (-e < room ? -e : room);
        if (moved <= 0) continue;
        int64_t sign = e > 0 ? 1 : -1;
        flow[a] += ((code & 1) ? sign : -sign) * moved;
        excess[v] -= sign * moved;
        excess[up] += sign * moved;
    }
}

/*
 * A path s -> t of tight residual arcs (reduced cost 0), found depth first
 * after a search has made its shortest path tight: every such path costs what
 * that one did, so it may take more of the lane's units without another
 * search. seen[v] == phase marks nodes on the current path and dead ends of
 * this phase (a dead end may hide a path that a later search then finds: the
 * answer stays exact, only slower). On success pred[] holds the path's
 * incidences; returns 1, 0 (no tight path) or ROUTE_OVERFLOW.
 */
typedef struct {
    int64_t *seen, *cur, *stack, *pred;
    int64_t phase;
} depth_first;

static int tight_path(const network *g, depth_first *d, int64_t s, int64_t t) {
    int64_t top = 0;
    d->seen[s] = d->phase;
    d->cur[s] = g->first_out[s];
    d->stack[top++] = s;
    while (top > 0) {
        int64_t u = d->stack[top - 1];
        if (u == t) {
            for (int64_t i = 0; i < top; i++) d->seen[d->stack[i]] = 0;  /* path nodes may carry the next path */
            return 1;
        }
        int64_t next = -1;
        for (; d->cur[u] < g->first_out[u + 1]; d->cur[u]++) {
            int64_t code = g->inc[d->cur[u]], cap, v, r;
            if (step(g, code, &cap, &v, &r)) return ROUTE_OVERFLOW;
            if (cap <= 0 || r != 0 || d->seen[v] == d->phase) continue;
            d->seen[v] = d->phase;
            d->cur[v] = g->first_out[v];
            d->pred[v] = code;
            next = v;
            break;
        }
        if (next >= 0) {
            d->stack[top++] = next;
        } else {
            top--;  /* u is a dead end for this phase */
            if (top > 0) d->cur[d->stack[top - 1]]++;
        }
    }
    return 0;
}

/*
 * The pieces of a rate sweep (planner.core.sweep): how lane arc `lane` (t -> h)
 * gives up its flow as its rate rises (reverse = 0), or takes more as its rate
 * falls (reverse = 1). The caller pins the arc (lower = upper = flow) so that no
 * search uses it, and passes an optimal flow with a potential whose reduced
 * costs are non-negative on every other residual arc. Rising, giving up
 * `units` units of the lane leaves t with that excess and h with that deficit;
 * falling, taking them on leaves h with the excess and t with the deficit. Each
 * search from the node with the excess (s) settles the other (z) at reduced
 * distance D, the real cost of the cheapest other route s -> z is D - pi(s) +
 * pi(z) (before the potential update), and the route takes as much as its
 * residual capacity and the units still to move allow. Routes come out in
 * order of cost (successive shortest paths keep the conditions), so the optimal
 * cost, as a function of the rate, bends at each route's cost (rising) or at
 * minus it (falling) by the units it takes. After each search, further tight
 * paths of the same cost take units without a search (tight_path). Each step
 * writes out_rate[k] (the route's cost) and out_units[k]; the loop ends when no
 * units are left, no route exists, a route costs more than rate_limit, or
 * max_steps steps are written. *n_out is the number of steps. Returns 0, or an
 * error code of planner_warm_route (ROUTE_BUDGET: max_steps reached first).
 */
int planner_warm_rate_sweep(
    int64_t n, const int64_t *tail, const int64_t *head, const int64_t *cost, const int64_t *lower,
    const int64_t *upper, const int64_t *first_out, const int64_t *inc,
    int64_t *flow, int64_t *pi, int64_t *excess, int64_t lane, int64_t reverse, int64_t units, int64_t rate_limit,
    int64_t max_steps, int64_t *out_rate, int64_t *out_units, int64_t *n_out, int64_t *stats)
{
    network g = {n, tail, head, cost, lower, upper, first_out, inc, flow, pi, excess};
    workspace w = {0};
    depth_first d = {0};
    int status = ROUTE_BALANCED;
    int64_t t = reverse ? head[lane] : tail[lane], h = reverse ? tail[lane] : head[lane];  /* s and z above */
    *n_out = 0;
    d.seen = calloc((size_t)n, sizeof(int64_t));
    d.cur = malloc((size_t)n * sizeof(int64_t));
    d.stack = malloc((size_t)n * sizeof(int64_t));
    d.pred = malloc((size_t)n * sizeof(int64_t));
    if (open_workspace(&w, n) || !d.seen || !d.cur || !d.stack || !d.pred) { status = ROUTE_NO_MEMORY; goto done; }
    excess[t] += units;
    excess[h] -= units;
    while (excess[t] > 0 && status == ROUTE_BALANCED) {
        if (*n_out >= max_steps) { status = ROUTE_BUDGET; break; }
        int64_t found = search(&g, &w, t);
        stats[0] += 1;
        stats[1] += w.n_settled;
        if (found == ROUTE_NO_DEFICIT) { forget(&w); break; }
        if (found < 0) { status = (int)found; forget(&w); break; }
        if (found != h) { status = ROUTE_BROKEN; forget(&w); break; }  /* only h may have a deficit */
        int64_t rate, sum;
        if (__builtin_sub_overflow(w.dist[h], pi[t], &sum) || __builtin_add_overflow(sum, pi[h], &rate)) {
            status = ROUTE_OVERFLOW; forget(&w); break;
        }
        if (rate > rate_limit) { forget(&w); break; }
        int64_t before = excess[t];
        status = augment(&g, &w, t, h);
        forget(&w);
        out_rate[*n_out] = rate;
        out_units[(*n_out)++] = before - excess[t];
        /* Tight paths now cost the same: -pi(t) + pi(h) after the update; one
         * phase of them (its dead ends stay marked until the next search). */
        d.phase += 1;
        while (status == ROUTE_BALANCED && excess[t] > 0) {
            int found_path = tight_path(&g, &d, t, h);
            if (found_path < 0) { status = found_path; break; }
            if (!found_path) break;
            if (*n_out >= max_steps) { status = ROUTE_BUDGET; break; }
            before = excess[t];
            push_path(&g, d.pred, t, h);
            out_rate[*n_out] = rate;
            out_units[(*n_out)++] = before - excess[t];
        }
    }
    excess[h] += excess[t];  /* units not given up stay on the lane */
    excess[t] = 0;
done:
    close_workspace(&w);
    free(d.seen); free(d.cur); free(d.stack); free(d.pred);
    return status;
}

static struct PyModuleDef warm_module = {
    PyModuleDef_HEAD_INIT, "_warm",
    "Compiled routing loop of planner.core.engines: successive shortest paths, called through ctypes.",
    -1, NULL,
};

PyMODINIT_FUNC PyInit__warm(void) { return PyModule_Create(&warm_module); }

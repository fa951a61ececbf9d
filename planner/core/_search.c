/*
 * Many Dijkstra searches on one graph, each stopping as soon as its targets are
 * settled or its radius is passed, touching only the nodes it visits.
 *
 * Called through ctypes by planner.core.search; the module itself only carries
 * a docstring, so that it imports like any other module of the package.
 * The graph is in CSR form with non-negative int64 lengths; an arc of length -1
 * is left out (a caller's way to take arcs out without rebuilding the graph). Search i starts at
 * source[i] and serves the queries qptr[i] .. qptr[i + 1] - 1; query q asks for
 * the distance to target[q]. A search stops when every one of its targets is
 * settled or when the next node to settle lies beyond radius[i] (-1: no radius).
 *
 * A query's own radius (qradius[q], -1: none) lets the search stop once every
 * target still unsettled lies beyond its radius; queries come sorted by radius,
 * largest first, within their search.
 *
 * For every query it writes the distance (-1: not reached within the radius)
 * and the least capacity on the shortest path found, lifted through zero-length
 * components: each arc of the graph may stand for a residual arc x -> y between
 * two components, and the walk inside a component from y to the next x is
 * bounded by min(in_bn[y], out_bn[next x]) (UNLIMITED when they coincide).
 * The walk back ends at the node where the path leaves the source component,
 * written to exit_node[q]; the caller adds the first segment.
 *
 * Returns 0, or -1 when memory runs out.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>
#include <stdlib.h>

#define UNLIMITED INT64_MAX

#include "_heap.h"

static int64_t segment(int64_t start, int64_t end, const int64_t *in_bn, const int64_t *out_bn) {
    if (start == end) return UNLIMITED;
    return in_bn[start] < out_bn[end] ? in_bn[start] : out_bn[end];
}

static int64_t min3(int64_t a, int64_t b, int64_t c) {
    int64_t m = a < b ? a : b;
    return m < c ? m : c;
}

int planner_many_searches(
    int64_t n, const int64_t *indptr, const int64_t *head, const int64_t *weight, const int64_t *cap,
    const int64_t *link_tail, const int64_t *link_head, const int64_t *in_bn, const int64_t *out_bn,
    int64_t n_searches, const int64_t *source, const int64_t *radius, const int64_t *qptr,
    const int64_t *target, const int64_t *target_node, const int64_t *qradius,
    int64_t *dist_out, int64_t *units_out, int64_t *exit_node)
{
    int64_t *dist = malloc((size_t)n * sizeof(int64_t));
    int64_t *pred_arc = malloc((size_t)n * sizeof(int64_t));
    int64_t *pred = malloc((size_t)n * sizeof(int64_t));
    char *settled = calloc((size_t)n, 1);
    int64_t *wanted = calloc((size_t)n, sizeof(int64_t));  /* search stamp + 1 when a target */
    int64_t *touched = malloc((size_t)n * sizeof(int64_t));
    heap h = {0, 0, 0};
    int status = 0;
    if (!dist || !pred_arc || !pred || !settled || !wanted || !touched) { status = -1; goto done; }
    for (int64_t v = 0; v < n; v++) dist[v] = -1;

    for (int64_t s = 0; s < n_searches; s++) {
        int64_t n_touched = 0, remaining = 0, src = source[s], limit = radius[s], widest = qptr[s];
        for (int64_t q = qptr[s]; q < qptr[s + 1]; q++) {
            if (wanted[target[q]] != s + 1) { wanted[target[q]] = s + 1; remaining++; }
        }
        h.size = 0;
        dist[src] = 0; pred[src] = -1; pred_arc[src] = -1; touched[n_touched++] = src;
        if (heap_push(&h, 0, src)) { status = -1; goto done; }
        while (h.size > 0 && remaining > 0) {
            entry e = heap_pop(&h);
            int64_t u = e.node;
            if (settled[u] || e.dist != dist[u]) continue;
            if (limit >= 0 && e.dist > limit) {
                /* The widest radius may belong to a target settled meanwhile. */
                while (widest < qptr[s + 1] && settled[target[widest]]) widest++;
                if (widest == qptr[s + 1] || e.dist > qradius[widest]) break;
                limit = qradius[widest];
            }
            settled[u] = 1;
            if (wanted[u] == s + 1) { remaining--; wanted[u] = 0; }
            for (int64_t k = indptr[u]; k < indptr[u + 1]; k++) {
                if (weight[k] < 0) continue;
                int64_t v = head[k], d = e.dist + weight[k];
                if (settled[v] || (limit >= 0 && d > limit)) continue;
                if (dist[v] < 0 || d < dist[v]) {
                    if (dist[v] < 0) touched[n_touched++] = v;
                    dist[v] = d; pred[v] = u; pred_arc[v] = k;
                    if (heap_push(&h, d, v)) { status = -1; goto done; }
                }
            }
        }
        for (int64_t q = qptr[s]; q < qptr[s + 1]; q++) {
            int64_t g = target[q];
            if (!settled[g] || (qradius[q] >= 0 && dist[g] > qradius[q])) {
                dist_out[q] = -1; units_out[q] = 0; exit_node[q] = -1;
                continue;
            }
            int64_t units = UNLIMITED, end = target_node[q], v = g;
            while (v != src) {
                int64_t k = pred_arc[v];
                units = min3(units, cap[k], segment(link_head[k], end, in_bn, out_bn));
                end = link_tail[k];
                v = pred[v];
            }
            dist_out[q] = dist[g]; units_out[q] = units; exit_node[q] = end;
        }
        for (int64_t i = 0; i < n_touched; i++) {
            int64_t v = touched[i];
            dist[v] = -1; settled[v] = 0; wanted[v] = 0;
        }
        for (int64_t q = qptr[s]; q < qptr[s + 1]; q++) wanted[target[q]] = 0;
    }
done:
    free(dist); free(pred_arc); free(pred); free(settled); free(wanted); free(touched); free(h.items);
    return status;
}

static struct PyModuleDef search_module = {
    PyModuleDef_HEAD_INIT, "_search",
    "Compiled kernel of planner.core.search: many bounded Dijkstra searches, called through ctypes.",
    -1, NULL,
};

PyMODINIT_FUNC PyInit__search(void) { return PyModule_Create(&search_module); }

/* The binary min-heap of (distance, node) entries that both compiled kernels
 * (_search.c and _warm.c) search with. Included, not linked: each extension
 * module gets its own static copy.
 */
#ifndef PLANNER_CORE_HEAP_H
#define PLANNER_CORE_HEAP_H

#include <stdint.h>
#include <stdlib.h>

typedef struct {
    int64_t dist;
    int64_t node;
} entry;

typedef struct {
    entry *items;
    int64_t size;
    int64_t capacity;
} heap;

static int heap_push(heap *h, int64_t dist, int64_t node) {
    if (h->size == h->capacity) {
        int64_t grown = h->capacity ? 2 * h->capacity : 1024;
        entry *items = realloc(h->items, (size_t)grown * sizeof(entry));
        if (!items) return -1;
        h->items = items;
        h->capacity = grown;
    }
    int64_t i = h->size++;
    while (i > 0) {
        int64_t parent = (i - 1) / 2;
        if (h->items[parent].dist <= dist) break;
        h->items[i] = h->items[parent];
        i = parent;
    }
    h->items[i].dist = dist;
    h->items[i].node = node;
    return 0;
}

static entry heap_pop(heap *h) {
    entry top = h->items[0];
    entry last = h->items[--h->size];
    int64_t i = 0;
    for (;;) {
        int64_t child = 2 * i + 1;
        if (child >= h->size) break;
        if (child + 1 < h->size && h->items[child + 1].dist < h->items[child].dist) child++;
        if (h->items[child].dist >= last.dist) break;
        h->items[i] = h->items[child];
        i = child;
    }
    if (h->size > 0) h->items[i] = last;
    return top;
}

#endif

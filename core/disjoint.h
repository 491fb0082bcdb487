/* Union-find over item indices, shared by the units (units.c) and the audit's near-duplicate
 * clusters (audit.c). The smaller index always becomes the root, so a component's root is its
 * smallest member and the structure does not depend on the order of the unions. */
#ifndef KILN_DISJOINT_H
#define KILN_DISJOINT_H

#include <stdbool.h>
#include <stdint.h>

struct kiln_uf {
    uint32_t *parent; /* parent[i] == i for roots; the caller allocates and initialises it */
};

static inline uint32_t kiln_uf_find(struct kiln_uf *u, uint32_t x)
{
    while (u->parent[x] != x) {
        u->parent[x] = u->parent[u->parent[x]]; /* path halving */
        x = u->parent[x];
    }
    return x;
}

/* Joins the sets of a and b; false when they were already one set. */
static inline bool kiln_uf_union(struct kiln_uf *u, uint32_t a, uint32_t b)
{
    a = kiln_uf_find(u, a);
    b = kiln_uf_find(u, b);
    if (a == b)
        return false;
    if (a < b)
        u->parent[b] = a;
    else
        u->parent[a] = b;
    return true;
}

#endif

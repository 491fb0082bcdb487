/* Chunked bump allocator for catalogue strings. */
#include "arena.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#define ARENA_CHUNK (64u * 1024u)

struct kiln_arena_chunk {
    struct kiln_arena_chunk *next;
    size_t cap, used;
    char data[];
};

void kiln_arena_init(struct kiln_arena *a)
{
    a->head = NULL;
    a->used_bytes = 0;
}

void kiln_arena_free(struct kiln_arena *a)
{
    struct kiln_arena_chunk *c = a->head;
    while (c) {
        struct kiln_arena_chunk *next = c->next;
        free(c);
        c = next;
    }
    a->head = NULL;
    a->used_bytes = 0;
}

/* need bytes from the head chunk starting at a multiple of align (a power of two up to 8,
 * the alignment of a chunk's data), or from a new chunk. */
static char *take(struct kiln_arena *a, size_t need, size_t align)
{
    if (need >= SIZE_MAX - sizeof(struct kiln_arena_chunk) - ARENA_CHUNK)
        return NULL;
    struct kiln_arena_chunk *c = a->head;
    size_t at = c ? (c->used + align - 1) & ~(align - 1) : 0;
    if (!c || at > c->cap || c->cap - at < need) {
        size_t cap = need > ARENA_CHUNK ? need : ARENA_CHUNK;
        c = malloc(sizeof *c + cap);
        if (!c)
            return NULL;
        c->cap = cap;
        c->used = 0;
        c->next = a->head;
        a->head = c;
        at = 0;
    }
    char *p = c->data + at;
    a->used_bytes += need + (at - c->used);
    c->used = at + need;
    return p;
}

char *kiln_arena_strndup(struct kiln_arena *a, const char *s, size_t n)
{
    char *p = n < SIZE_MAX ? take(a, n + 1, 1) : NULL;
    if (p) {
        memcpy(p, s, n);
        p[n] = '\0';
    }
    return p;
}

void *kiln_arena_alloc(struct kiln_arena *a, size_t n)
{
    char *p = take(a, n ? n : 1, 8);
    if (p)
        memset(p, 0, n ? n : 1);
    return p;
}

char *kiln_arena_strdup(struct kiln_arena *a, const char *s)
{
    return kiln_arena_strndup(a, s, strlen(s));
}

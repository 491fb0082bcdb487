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

char *kiln_arena_strndup(struct kiln_arena *a, const char *s, size_t n)
{
    if (n >= SIZE_MAX - sizeof(struct kiln_arena_chunk) - ARENA_CHUNK)
        return NULL;
    size_t need = n + 1;
    struct kiln_arena_chunk *c = a->head;
    if (!c || c->cap - c->used < need) {
        size_t cap = need > ARENA_CHUNK ? need : ARENA_CHUNK;
        c = malloc(sizeof *c + cap);
        if (!c)
            return NULL;
        c->cap = cap;
        c->used = 0;
        c->next = a->head;
        a->head = c;
    }
    char *p = c->data + c->used;
    memcpy(p, s, n);
    p[n] = '\0';
    c->used += need;
    a->used_bytes += need;
    return p;
}

char *kiln_arena_strdup(struct kiln_arena *a, const char *s)
{
    return kiln_arena_strndup(a, s, strlen(s));
}

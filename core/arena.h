/* A chunked string arena: catalogue strings live here so that an item costs a few hundred bytes
 * and the whole catalogue is freed in one call. */
#ifndef KILN_ARENA_H
#define KILN_ARENA_H

#include <stddef.h>

struct kiln_arena_chunk;

struct kiln_arena {
    struct kiln_arena_chunk *head;
    size_t used_bytes; /* bytes handed out, for memory reports */
};

void kiln_arena_init(struct kiln_arena *a);
void kiln_arena_free(struct kiln_arena *a);

/* Copies n bytes and appends a NUL; returns NULL on allocation failure. The copy lives until
 * kiln_arena_free. */
char *kiln_arena_strndup(struct kiln_arena *a, const char *s, size_t n);
char *kiln_arena_strdup(struct kiln_arena *a, const char *s);
/* n bytes aligned for any pointer or 64-bit field, zeroed; NULL on allocation failure. */
void *kiln_arena_alloc(struct kiln_arena *a, size_t n);

#endif

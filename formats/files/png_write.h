/* PNG output through libpng: 8-bit grey or RGB pictures that kiln shows people (the contact
 * sheet of `inspect --preview`, the thumbnails embedded in `kiln report`). Deterministic bytes:
 * no time or text chunks. */
#ifndef KILN_PNG_WRITE_H
#define KILN_PNG_WRITE_H

#include <stddef.h>
#include <stdint.h>

#include "../../core/err.h"

/* Encodes w x h pixels of channels (1 or 3) 8-bit samples, rows packed, into a malloc'ed
 * buffer (*out, *len). */
int kiln_png_encode(const uint8_t *px, uint32_t w, uint32_t h, uint32_t channels, uint8_t **out,
                    size_t *len, struct kiln_err *err);
/* The same written to path atomically (formats/outfile.h). */
int kiln_png_save(const char *path, const uint8_t *px, uint32_t w, uint32_t h, uint32_t channels,
                  struct kiln_err *err);

#endif

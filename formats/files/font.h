/* Text on kiln's pictures through FreeType, with the font found by fontconfig (DejaVu Sans,
 * Debian's fonts-dejavu-core, else whatever sans-serif fontconfig offers). When no font can be
 * loaded, callers leave text out and say so; glyphs are never drawn by hand. */
#ifndef KILN_FONT_H
#define KILN_FONT_H

#include <stdint.h>

#include "../../core/err.h"

struct kiln_font {
    void *library, *face; /* FT_Library, FT_Face */
    char file[1024];      /* the font file in use, for messages */
    unsigned px;          /* pixel height asked for */
};

/* Finds and loads a sans-serif font at px pixels. Returns KILN_OK or KILN_EUNSUPPORTED with err
 * saying why (no fontconfig match, FreeType refused the file). */
int kiln_font_open(struct kiln_font *f, unsigned px, struct kiln_err *err);
void kiln_font_close(struct kiln_font *f);

/* Draws UTF-8 text in colour rgb onto an 8-bit RGB canvas (w x h, rows packed) with its
 * baseline at y, starting at x, blending by the glyph coverage and clipping at the canvas and
 * at max_x (text that does not fit is cut). Returns the x where the text ended. Bytes that are
 * not UTF-8 are drawn as U+FFFD. */
int kiln_font_draw(struct kiln_font *f, uint8_t *canvas, uint32_t w, uint32_t h, int x, int y,
                   int max_x, const char *text, const uint8_t rgb[3]);

#endif

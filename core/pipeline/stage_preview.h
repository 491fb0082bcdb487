/* The contact sheet of `kiln inspect FILE.kten --preview out.png`: a few packed records per
 * class, in class order, as the network sees them, with the class names drawn through
 * FreeType when a font is found (docs/cli.md, "inspect"). */
#ifndef KILN_STAGE_PREVIEW_H
#define KILN_STAGE_PREVIEW_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../err.h"

#define KILN_PREVIEW_MARGIN 8   /* pixels around the sheet */
#define KILN_PREVIEW_GAP 4      /* between tiles and rows */
#define KILN_PREVIEW_FONT_PX 14 /* label text height */
#define KILN_PREVIEW_BAND 20    /* label band above each row when names are drawn */
#define KILN_PREVIEW_SAMPLE 8      /* records per class by default */
#define KILN_PREVIEW_MAX_SAMPLE 64
#define KILN_PREVIEW_MAX_TILE 256 /* larger records are shrunk by a whole factor (box filter) */

struct kiln_preview_report {
    size_t rows;          /* classes shown (and one for unlabelled records) */
    size_t tiles;
    uint32_t width, height, tile_w, tile_h, shrink;
    bool labelled;        /* names drawn */
    char font[1024];      /* font file used, or why none */
};

/* Writes the sheet of up to per_class records of each class of kten to png (atomically).
 * The sample is kiln_kten_view_sample's (evenly spread over record order). */
int kiln_stage_preview(const char *kten, const char *png, size_t per_class,
                       struct kiln_preview_report *rep, struct kiln_err *err);

#endif

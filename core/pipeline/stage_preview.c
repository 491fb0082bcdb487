/* Contact sheet: rows of sampled records per class, each row under a band with the class name
 * and its record count; tiles are the records at their packed size (whole-factor box shrink
 * above KILN_PREVIEW_MAX_TILE), so a tile is the record itself. */
#include "stage_preview.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/font.h"
#include "../../formats/files/kten_view.h"
#include "../../formats/files/png_write.h"
#include "../checked.h"

/* Copies record px (w x h x c, 8-bit) into the RGB canvas at (x0, y0), shrunk by f (box mean
 * of f x f blocks, rounded half up); grey is replicated and alpha is not shown. */
static void place(uint8_t *canvas, uint32_t cw, const uint8_t *px, uint32_t w, uint32_t h,
                  uint32_t c, uint32_t f, uint32_t x0, uint32_t y0)
{
    const uint32_t tw = w / f, th = h / f;
    for (uint32_t y = 0; y < th; y++)
        for (uint32_t x = 0; x < tw; x++) {
            uint32_t sum[3] = {0, 0, 0};
            for (uint32_t dy = 0; dy < f; dy++)
                for (uint32_t dx = 0; dx < f; dx++) {
                    const uint8_t *s = px + ((size_t)(y * f + dy) * w + (x * f + dx)) * c;
                    for (int k = 0; k < 3; k++)
                        sum[k] += s[c >= 3 ? k : 0];
                }
            uint8_t *d = canvas + ((size_t)(y0 + y) * cw + (x0 + x)) * 3;
            for (int k = 0; k < 3; k++)
                d[k] = (uint8_t)((sum[k] + f * f / 2) / (f * f));
        }
}

/* One row per class with records (counts[c]; counts[nclasses]: unlabelled), each under its
 * name band when font is given, holding up to per_class sampled records. */
static int draw_rows(struct kiln_kten_view *v, const size_t *counts, size_t per_class,
                     uint64_t *pick, uint8_t *rec, uint32_t f, struct kiln_font *font,
                     uint8_t *canvas, struct kiln_preview_report *rep, struct kiln_err *err)
{
    static const uint8_t ink[3] = {235, 235, 235};
    const uint32_t W = rep->width, H = rep->height, band = font ? KILN_PREVIEW_BAND : 0;
    uint32_t y = KILN_PREVIEW_MARGIN;
    int rc = KILN_OK;
    for (size_t c = 0; c <= v->nclasses && !rc; c++) {
        if (!counts[c])
            continue;
        if (font) {
            char text[512];
            snprintf(text, sizeof text, "%s (%zu %s)", c < v->nclasses ? v->classes[c] : "no label",
                     counts[c], counts[c] == 1 ? "record" : "records");
            kiln_font_draw(font, canvas, W, H, KILN_PREVIEW_MARGIN, (int)y + KILN_PREVIEW_FONT_PX,
                           (int)W - KILN_PREVIEW_MARGIN, text, ink);
        }
        y += band;
        size_t k = 0;
        if (c < v->nclasses) {
            k = kiln_kten_view_sample(v, (int32_t)c, per_class, pick);
        } else { /* unlabelled or out-of-range labels, in record order */
            for (uint64_t i = 0; i < v->n && k < per_class; i++)
                if (v->labels[i] < 0 || (size_t)v->labels[i] >= v->nclasses)
                    pick[k++] = i;
        }
        for (size_t j = 0; j < k && !rc; j++) {
            rc = kiln_kten_view_record(v, pick[j], rec, err);
            if (!rc)
                place(canvas, W, rec, v->w, v->h, v->c, f,
                      KILN_PREVIEW_MARGIN + (uint32_t)j * (rep->tile_w + KILN_PREVIEW_GAP), y);
            rep->tiles++;
        }
        y += rep->tile_h + KILN_PREVIEW_GAP;
        rep->rows++;
    }
    return rc;
}

int kiln_stage_preview(const char *kten, const char *png, size_t per_class,
                       struct kiln_preview_report *rep, struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    struct kiln_kten_view v;
    int rc = kiln_kten_view_open(&v, kten, err);
    if (rc)
        return rc;
    if (v.n == 0) {
        kiln_kten_view_close(&v);
        return kiln_err_set(err, KILN_EINVAL, "%s holds no records: there is nothing to preview",
                            kten);
    }
    if (per_class < 1)
        per_class = 1;
    const uint32_t big = v.w > v.h ? v.w : v.h;
    const uint32_t f = big > KILN_PREVIEW_MAX_TILE ? (big + KILN_PREVIEW_MAX_TILE - 1) / KILN_PREVIEW_MAX_TILE : 1;
    rep->shrink = f;
    rep->tile_w = v.w / f ? v.w / f : 1;
    rep->tile_h = v.h / f ? v.h / f : 1;
    /* Rows: every class with records, then unlabelled records. */
    size_t *counts = kiln_alloc_array(v.nclasses + 1, sizeof *counts);
    uint64_t *pick = kiln_alloc_array(per_class, sizeof *pick);
    uint8_t *rec = NULL, *canvas = NULL;
    size_t rec_bytes;
    if (!counts || !pick || !kiln_mul3_size(v.w, v.h, v.c, &rec_bytes) ||
        !(rec = malloc(rec_bytes ? rec_bytes : 1))) {
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory for the contact sheet");
        goto done;
    }
    memset(counts, 0, (v.nclasses + 1) * sizeof *counts);
    for (uint64_t i = 0; i < v.n; i++)
        counts[v.labels[i] >= 0 && (size_t)v.labels[i] < v.nclasses ? (size_t)v.labels[i]
                                                                   : v.nclasses]++;
    size_t rows = 0, widest = 0;
    for (size_t c = 0; c <= v.nclasses; c++)
        if (counts[c]) {
            rows++;
            const size_t k = counts[c] < per_class ? counts[c] : per_class;
            widest = k > widest ? k : widest;
        }
    struct kiln_font font;
    struct kiln_err ferr;
    rep->labelled = kiln_font_open(&font, KILN_PREVIEW_FONT_PX, &ferr) == 0;
    snprintf(rep->font, sizeof rep->font, "%s", rep->labelled ? font.file : ferr.msg);
    const uint32_t band = rep->labelled ? KILN_PREVIEW_BAND : 0;
    /* Wide enough for the name band too, so short rows still show their names. */
    uint64_t W = 2 * KILN_PREVIEW_MARGIN + widest * (rep->tile_w + KILN_PREVIEW_GAP) - KILN_PREVIEW_GAP;
    if (rep->labelled && W < 240)
        W = 240;
    const uint64_t H = 2 * KILN_PREVIEW_MARGIN + rows * (band + rep->tile_h + KILN_PREVIEW_GAP) - KILN_PREVIEW_GAP;
    size_t cbytes;
    if (W > 65535 || H > 65535 || !kiln_mul3_size((size_t)W, (size_t)H, 3, &cbytes) ||
        !(canvas = malloc(cbytes))) {
        rc = kiln_err_set(err, KILN_ENOMEM, "the contact sheet would be %llux%llu pixels: use a "
                          "smaller --sample", (unsigned long long)W, (unsigned long long)H);
        if (rep->labelled)
            kiln_font_close(&font);
        goto done;
    }
    memset(canvas, 32, cbytes); /* dark grey: records with black borders stay visible */
    rep->width = (uint32_t)W;
    rep->height = (uint32_t)H;
    rc = draw_rows(&v, counts, per_class, pick, rec, f, rep->labelled ? &font : NULL, canvas,
                   rep, err);
    if (rep->labelled)
        kiln_font_close(&font);
    if (!rc)
        rc = kiln_png_save(png, canvas, (uint32_t)W, (uint32_t)H, 3, err);
done:
    free(canvas);
    free(rec);
    free(pick);
    free(counts);
    kiln_kten_view_close(&v);
    return rc;
}

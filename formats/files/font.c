/* FreeType text for the contact sheet: the font is found through fontconfig, glyphs are
 * rendered anti-aliased and blended onto an RGB canvas. */
#include "font.h"

#include <fontconfig/fontconfig.h>
#include <ft2build.h>
#include FT_FREETYPE_H
#include <stddef.h>
#include <stdio.h>
#include <string.h>

/* Finds a font file through fontconfig: DejaVu Sans first (fonts-dejavu-core), so sheets look
 * the same on every Debian machine, then any sans-serif. */
static int find_font(char *out, size_t len)
{
    FcConfig *cfg = FcInitLoadConfigAndFonts();
    if (!cfg)
        return -1;
    int found = -1;
    static const char *const wanted[] = {"DejaVu Sans:style=Book", "sans-serif"};
    for (size_t i = 0; i < 2 && found < 0; i++) {
        FcPattern *pat = FcNameParse((const FcChar8 *)wanted[i]);
        if (!pat)
            continue;
        FcConfigSubstitute(cfg, pat, FcMatchPattern);
        FcDefaultSubstitute(pat);
        FcResult res;
        FcPattern *match = FcFontMatch(cfg, pat, &res);
        FcChar8 *file = NULL;
        if (match && FcPatternGetString(match, FC_FILE, 0, &file) == FcResultMatch && file &&
            strlen((const char *)file) < len) {
            snprintf(out, len, "%s", (const char *)file);
            found = 0;
        }
        if (match)
            FcPatternDestroy(match);
        FcPatternDestroy(pat);
    }
    FcConfigDestroy(cfg);
    return found;
}

int kiln_font_open(struct kiln_font *f, unsigned px, struct kiln_err *err)
{
    memset(f, 0, sizeof *f);
    f->px = px;
    if (find_font(f->file, sizeof f->file))
        return kiln_err_set(err, KILN_EUNSUPPORTED,
                            "no font found through fontconfig (Debian: fonts-dejavu-core)");
    FT_Library lib;
    if (FT_Init_FreeType(&lib))
        return kiln_err_set(err, KILN_EUNSUPPORTED, "FreeType cannot start");
    FT_Face face;
    if (FT_New_Face(lib, f->file, 0, &face)) {
        FT_Done_FreeType(lib);
        return kiln_err_set(err, KILN_EUNSUPPORTED, "FreeType cannot load the font %s", f->file);
    }
    if (FT_Set_Pixel_Sizes(face, 0, px)) {
        FT_Done_Face(face);
        FT_Done_FreeType(lib);
        return kiln_err_set(err, KILN_EUNSUPPORTED, "the font %s has no %u-pixel size", f->file, px);
    }
    f->library = lib;
    f->face = face;
    return KILN_OK;
}

void kiln_font_close(struct kiln_font *f)
{
    if (f->face)
        FT_Done_Face((FT_Face)f->face);
    if (f->library)
        FT_Done_FreeType((FT_Library)f->library);
    f->face = f->library = NULL;
}

/* Next code point of UTF-8 text (RFC 3629); malformed bytes give U+FFFD and advance one. */
static uint32_t next_cp(const unsigned char **p)
{
    const unsigned char *s = *p;
    uint32_t cp;
    int n;
    if (s[0] < 0x80) {
        *p = s + 1;
        return s[0];
    } else if (s[0] >= 0xC2 && s[0] <= 0xDF) {
        cp = s[0] & 0x1F;
        n = 1;
    } else if (s[0] >= 0xE0 && s[0] <= 0xEF) {
        cp = s[0] & 0x0F;
        n = 2;
    } else if (s[0] >= 0xF0 && s[0] <= 0xF4) {
        cp = s[0] & 0x07;
        n = 3;
    } else {
        *p = s + 1;
        return 0xFFFD;
    }
    for (int i = 1; i <= n; i++) {
        if ((s[i] & 0xC0) != 0x80) {
            *p = s + 1;
            return 0xFFFD;
        }
        cp = cp << 6 | (s[i] & 0x3F);
    }
    if ((n == 2 && cp < 0x800) || (n == 3 && (cp < 0x10000 || cp > 0x10FFFF)) ||
        (cp >= 0xD800 && cp <= 0xDFFF)) {
        *p = s + 1;
        return 0xFFFD;
    }
    *p = s + n + 1;
    return cp;
}

int kiln_font_draw(struct kiln_font *f, uint8_t *canvas, uint32_t w, uint32_t h, int x, int y,
                   int max_x, const char *text, const uint8_t rgb[3])
{
    FT_Face face = f->face;
    if (!face)
        return x;
    if (max_x > (int)w)
        max_x = (int)w;
    const unsigned char *p = (const unsigned char *)text;
    while (*p) {
        const uint32_t cp = next_cp(&p);
        if (FT_Load_Char(face, cp, FT_LOAD_RENDER))
            continue;
        const FT_GlyphSlot g = face->glyph;
        const int adv = (int)(g->advance.x >> 6);
        if (x + adv > max_x)
            break;
        const FT_Bitmap *bm = &g->bitmap;
        for (unsigned r = 0; r < bm->rows; r++) {
            const int yy = y - g->bitmap_top + (int)r;
            if (yy < 0 || yy >= (int)h)
                continue;
            for (unsigned c = 0; c < bm->width; c++) {
                const int xx = x + g->bitmap_left + (int)c;
                if (xx < 0 || xx >= max_x)
                    continue;
                const unsigned a = bm->buffer[(ptrdiff_t)r * bm->pitch + (ptrdiff_t)c];
                uint8_t *d = canvas + ((size_t)yy * w + (size_t)xx) * 3;
                for (int k = 0; k < 3; k++)
                    d[k] = (uint8_t)((d[k] * (255 - a) + rgb[k] * a + 127) / 255);
            }
        }
        x += adv;
    }
    return x;
}

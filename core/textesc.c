/* UTF-8 validation and %XX escaping of names. */
#include "textesc.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "checked.h"

/* Length of the valid UTF-8 sequence at s (RFC 3629: no overlongs, no surrogates, at most
 * U+10FFFF), or 0 if the bytes there are not one. */
static size_t utf8_len(const unsigned char *s)
{
    unsigned c = s[0];
    if (c < 0x80)
        return 1;
    if (c >= 0xC2 && c <= 0xDF)
        return (s[1] & 0xC0) == 0x80 ? 2 : 0;
    if (c >= 0xE0 && c <= 0xEF) {
        unsigned lo = c == 0xE0 ? 0xA0 : 0x80, hi = c == 0xED ? 0x9F : 0xBF;
        return s[1] >= lo && s[1] <= hi && (s[2] & 0xC0) == 0x80 ? 3 : 0;
    }
    if (c >= 0xF0 && c <= 0xF4) {
        unsigned lo = c == 0xF0 ? 0x90 : 0x80, hi = c == 0xF4 ? 0x8F : 0xBF;
        return s[1] >= lo && s[1] <= hi && (s[2] & 0xC0) == 0x80 && (s[3] & 0xC0) == 0x80 ? 4
                                                                                         : 0;
    }
    return 0;
}

static int needs_escape(const unsigned char *s, size_t *seq)
{
    if (*s == '%' || *s < 0x20 || *s == 0x7F) {
        *seq = 1;
        return 1;
    }
    *seq = utf8_len(s);
    if (*seq == 0) {
        *seq = 1;
        return 1;
    }
    return 0;
}

int kiln_text_is_plain(const char *raw)
{
    const unsigned char *s = (const unsigned char *)raw;
    while (*s) {
        size_t seq;
        if (needs_escape(s, &seq))
            return 0;
        s += seq;
    }
    return 1;
}

char *kiln_text_escape(const char *raw)
{
    size_t n = strlen(raw), cap;
    if (!kiln_mul_size(n, 3, &cap) || !kiln_add_size(cap, 1, &cap))
        return NULL;
    char *out = malloc(cap);
    if (!out)
        return NULL;
    static const char hex[] = "0123456789ABCDEF";
    const unsigned char *s = (const unsigned char *)raw;
    size_t k = 0;
    while (*s) {
        size_t seq;
        if (needs_escape(s, &seq)) {
            out[k++] = '%';
            out[k++] = hex[*s >> 4];
            out[k++] = hex[*s & 15];
            s++;
        } else {
            memcpy(out + k, s, seq);
            k += seq;
            s += seq;
        }
    }
    out[k] = '\0';
    return out;
}

static int hexv(char c)
{
    if (c >= '0' && c <= '9')
        return c - '0';
    if (c >= 'A' && c <= 'F')
        return c - 'A' + 10;
    if (c >= 'a' && c <= 'f')
        return c - 'a' + 10;
    return -1;
}

int kiln_text_unescape(const char *text, char **out, size_t *len)
{
    size_t n = strlen(text);
    char *o = malloc(n + 1);
    if (!o)
        return -1;
    size_t k = 0;
    for (size_t i = 0; i < n; i++) {
        if (text[i] != '%') {
            o[k++] = text[i];
            continue;
        }
        int a = i + 2 < n ? hexv(text[i + 1]) : -1, b = i + 2 < n ? hexv(text[i + 2]) : -1;
        if (a < 0 || b < 0 || (a == 0 && b == 0)) {
            free(o);
            return -1;
        }
        o[k++] = (char)(a << 4 | b);
        i += 2;
    }
    o[k] = '\0';
    *out = o;
    if (len)
        *len = k;
    return 0;
}

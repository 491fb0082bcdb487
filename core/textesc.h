/* Reversible escaping of file-system names for CSV and JSON, which need valid UTF-8 text:
 * '%', control bytes and bytes that are not part of valid UTF-8 become "%XX" (upper-case hex);
 * everything else is kept as is. docs/formats.md, "Names that are not UTF-8". */
#ifndef KILN_TEXTESC_H
#define KILN_TEXTESC_H

#include <stddef.h>

/* Returns a malloc'ed escaped copy, or NULL on allocation failure. */
char *kiln_text_escape(const char *raw);
/* Returns a malloc'ed unescaped copy (into *out, length in *len; the copy is NUL-terminated),
 * or -1 if the text holds a '%' not followed by two hex digits or decodes to a NUL byte. */
int kiln_text_unescape(const char *text, char **out, size_t *len);
/* True when escaping would change nothing (the common case; lets writers skip a copy). */
int kiln_text_is_plain(const char *raw);

#endif

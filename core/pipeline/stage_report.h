/* The report stage of `kiln report`: reads an output folder (manifest.json, catalog.csv,
 * items.csv, the tensor files), verifies its checksums, counts attributes, samples thumbnails
 * and writes one self-contained HTML file (formats/files/report_html.h; docs/report.md). */
#ifndef KILN_STAGE_REPORT_H
#define KILN_STAGE_REPORT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../err.h"

#define KILN_REPORT_SAMPLE 4       /* thumbnails per class and split by default */
#define KILN_REPORT_MAX_SAMPLE 32
#define KILN_REPORT_MAX_THUMBS 1200 /* in the samples in all: beyond, fewer per class */
#define KILN_REPORT_THUMB 96        /* thumbnails shrunk by a whole factor to at most this */
#define KILN_REPORT_LISTED 200      /* files listed per status not packed; the rest counted */
#define KILN_REPORT_PROBLEMS 50     /* verify's problems listed */

/* What to report on. With sources, the recorded source files are also looked for by content
 * (kiln_stage_verify_sources; path_key as for verify --path-key). */
struct kiln_report_opts {
    const char *outdir;
    const char *html;
    size_t per_class;
    const char *const *sources;
    size_t nsources;
    const uint8_t *path_key;
    size_t path_key_len;
};

struct kiln_report_summary {
    size_t thumbs, per_class; /* thumbnails embedded; per class and split after the bound */
    size_t findings, not_packed;
    bool verified;            /* verify ran */
    size_t problems;          /* what it found */
    bool sources_checked;     /* sources given and checked */
    size_t sources_missing, sources_changed;
    size_t shortcuts;         /* attributes the shortcut check flags */
    unsigned long long bytes; /* of the HTML file */
};

/* Writes the report of the output folder o->outdir to o->html (atomically), with up to
 * o->per_class thumbnails per class and split. Returns KILN_OK even when verify finds problems
 * (the report shows them; sum counts them); errors are the folder's files that cannot be read
 * (naming them) or the report that cannot be written. */
int kiln_stage_report(const struct kiln_report_opts *o, struct kiln_report_summary *sum,
                      struct kiln_err *err);

#endif

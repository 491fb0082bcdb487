/* The report of `kiln report`: one self-contained HTML file (inline CSS and SVG, thumbnails as
 * data: URIs, no script, nothing fetched) describing an output folder. The stage
 * (core/pipeline/stage_report.c) fills struct kiln_report; this module only writes it. */
#ifndef KILN_REPORT_HTML_H
#define KILN_REPORT_HTML_H

#include <jansson.h>
#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../../core/catalog.h"
#include "../../core/err.h"
#include "../../core/shortcut.h"

/* One embedded picture: a packed record as PNG (kiln_png_encode), and the item it shows. */
struct kiln_report_thumb {
    uint8_t *png; /* NULL: the record could not be found or read (why in note) */
    size_t len;
    uint32_t w, h;
    const char *name; /* source/relname as recorded (escaped, perhaps hashed) */
    int split;        /* KILN_SPLIT_NONE: not packed */
    const char *note; /* "" or why there is no picture */
};

/* The sampled records of one class in one split. */
struct kiln_report_cell {
    struct kiln_report_thumb *t;
    size_t n;
    uint64_t records; /* of that class in the split's tensor file */
};

/* One audit finding as manifest.json lists it, with the pictures of its items. */
struct kiln_report_finding {
    const char *kind; /* the manifest's name: "group", "identical-file", "near-duplicate"... */
    struct kiln_report_thumb *items;
    size_t nitems;
    const json_t *link; /* near-duplicate evidence (manifest's "link" object) or NULL */
};

/* Catalogue rows that were not packed, grouped by status. */
struct kiln_report_skipped {
    const char *status;
    size_t count;
    const char **name, **reason; /* the first nlisted of them */
    size_t nlisted;
};

/* What verify said of the folder's files. */
struct kiln_report_verify {
    bool ran;         /* false: it could not run (error says why) */
    char error[512];
    size_t files, arrays, problems;
    char **message;   /* the first nmessages problems (and, with sources, moves) */
    size_t nmessages;
    /* With sources (report --source): */
    bool sources_given, sources_ran; /* sources_ran false: sources_error says why */
    char sources_error[512];
    size_t sources_checked, sources_missing, sources_changed, sources_moved, sources_extra;
    bool places_unknown;
};

struct kiln_report {
    const char *outdir;       /* as the user named it */
    const json_t *manifest;   /* the folder's manifest.json */
    const char **classes;     /* the manifest's class names (recorded form), nclasses */
    size_t nclasses;
    /* Over the folder's catalog.csv; NULL when it could not be computed. */
    const struct kiln_shortcuts *shortcuts;
    struct kiln_report_verify verify;
    uint32_t rec_w, rec_h, rec_c; /* record shape */
    struct kiln_report_cell *cells; /* [split * nclasses + class] */
    size_t per_class;               /* thumbnails asked per class and split */
    struct kiln_report_finding *findings;
    size_t nfindings, findings_not_listed;
    /* Near-duplicate links the unit rule refused (the split record's "refused"): kind is the
     * verdict ("refused: different labels"), link the evidence. */
    struct kiln_report_finding *refused;
    size_t nrefused, refused_not_listed;
    struct kiln_report_skipped *skipped;
    size_t nskipped;
};

/* Most values of one attribute shown in the distribution tables; the rest are summed in one
 * "other values" row. */
#define KILN_REPORT_VALUES 12

/* Writes the report to path atomically (formats/outfile.h). Deterministic bytes: no time, no
 * host; the same folder gives the same file. */
int kiln_report_html_save(const char *path, const struct kiln_report *r, struct kiln_err *err);

/* Writes s HTML-escaped (& < > " ' as entities) into f, for text and attribute values. */
void kiln_html_text(FILE *f, const char *s);

#endif

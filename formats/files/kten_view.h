/* Reading packed records back for people to look at (contact sheet, report thumbnails): a
 * .kten file's labels and item rows, and any record as 8-bit interleaved pixels, the way the
 * network sees them (f32 records de-normalised with the training statistics the file carries,
 * u16 brought to 8 bits by round(v * 255 / 65535)). */
#ifndef KILN_KTEN_VIEW_H
#define KILN_KTEN_VIEW_H

#include <stdbool.h>
#include <stdint.h>

#include "kten.h"

struct kiln_kten_view {
    struct kiln_kten_info info;
    int fd;
    uint64_t n;               /* records */
    uint32_t h, w, c;         /* record shape */
    int dtype;                /* of images */
    bool nchw;
    uint64_t record_bytes;
    uint64_t images_offset;
    char split[8];            /* "train", "val", "test" or "" */
    char **classes;           /* from the metadata block (malloc'ed) */
    size_t nclasses;
    double mean_unit[4], std_unit[4]; /* f32 only: the normalisation recorded in the file */
    int32_t *labels;          /* [n] */
    uint32_t *item;           /* [n] rows of items.csv */
};

/* Opens path, checks the header (kiln_kten_open), and reads the labels and item arrays and
 * the class map. Messages name the file. */
int kiln_kten_view_open(struct kiln_kten_view *v, const char *path, struct kiln_err *err);
void kiln_kten_view_close(struct kiln_kten_view *v);

/* Record i as h x w x c 8-bit samples, interleaved (whatever the file's layout), into out. */
int kiln_kten_view_record(const struct kiln_kten_view *v, uint64_t i, uint8_t *out,
                          struct kiln_err *err);

/* Picks up to k records of class cls (-1: unlabelled) evenly spread over the file's record
 * order: of the m records of the class, those at positions floor((2j + 1) m / (2k)),
 * j = 0..k-1. Writes the record indices to out (k entries) and returns how many. */
size_t kiln_kten_view_sample(const struct kiln_kten_view *v, int32_t cls, size_t k, uint64_t *out);

#endif

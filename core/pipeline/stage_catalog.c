/* Catalogue files of the staged route and the audit command's reading of them. */
#include "stage_catalog.h"

#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../../formats/files/catalog_csv.h"
#include "pipeline.h"

char *kiln_stage_catalog_record_path(const char *csv)
{
    size_t n = strlen(csv);
    char *s = malloc(n + sizeof ".json");
    if (!s)
        return NULL;
    memcpy(s, csv, n + 1);
    if (n >= 4 && strcmp(s + n - 4, ".csv") == 0)
        s[n - 4] = '\0';
    strcat(s, ".json");
    return s;
}

int kiln_stage_catalog_load(const char *csv, bool need_split, const char *what,
                            struct kiln_catalog *cat, bool *has_split, struct kiln_err *err)
{
    int rc = kiln_catalog_csv_load(csv, cat, has_split, err);
    if (!rc)
        rc = kiln_catalog_index_classes(cat, err);
    if (!rc && need_split && !*has_split)
        rc = kiln_err_set(err, KILN_EINVAL, "%s has no split %s; run kiln split", csv, what);
    return rc;
}

int kiln_stage_catalog_load_record(const char *csv, struct kiln_scan_record **scan,
                                   struct kiln_split_record **split, struct kiln_err *err)
{
    *scan = NULL;
    *split = NULL;
    char *path = kiln_stage_catalog_record_path(csv);
    json_t *doc = NULL;
    int rc = path ? kiln_json_load(path, &doc, err) : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (!rc && (rc = kiln_manifest_read_records(doc, scan, split, err)) != 0)
        kiln_err_prefix(err, "%s", path);
    json_decref(doc);
    free(path);
    return rc;
}

int kiln_stage_catalog_save(const char *csv, const struct kiln_catalog *cat,
                            struct kiln_catalog_record *rec, struct kiln_err *err)
{
    char *path = kiln_stage_catalog_record_path(csv);
    int rc = kiln_catalog_csv_save(csv, cat, err);
    rec->catalog = csv;
    if (!rc)
        rc = path ? kiln_manifest_save_catalog_record(path, rec, err)
                  : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    free(path);
    return rc;
}

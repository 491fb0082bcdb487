/* kiln inspect: print a .kten file's header, arrays, class map and statistics. */
#include <inttypes.h>
#include <jansson.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/pipeline/stage_preview.h"
#include "../formats/files/kten.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

struct inspect_opts {
    bool as_json;
    const char *preview; /* --preview OUT.png, or NULL */
    size_t sample;       /* records per class on the sheet */
};

static int set_json(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    ((struct inspect_opts *)a->own)->as_json = true;
    return 0;
}

static int set_preview(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o;
    ((struct inspect_opts *)a->own)->preview = v;
    return 0;
}

static int set_sample(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    const long n = strtol(v, &end, 10);
    if (!*v || *end || n < 1 || n > KILN_PREVIEW_MAX_SAMPLE)
        return cli_bad_value(o, v, "use 1 to 64 records per class");
    ((struct inspect_opts *)a->own)->sample = (size_t)n;
    return 0;
}

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"json", 0, CLI_SWITCH, NULL, "print the metadata block as JSON instead", set_json},
    {"preview", 0, CLI_VALUE, "OUT.png",
     "write a contact sheet: records of each class, in class\n"
     "order, as the network sees them (f32 de-normalised)",
     set_preview},
    {"sample", 0, CLI_VALUE, "N",
     "records per class on the sheet (default 8, 1 to 64),\n"
     "spread evenly over the file's record order",
     set_sample},
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_inspect(int argc, char **argv);

const struct cli_command cli_inspect = {
    .name = "inspect",
    .summary = "show the header, arrays and statistics of a .kten file",
    .usage = "inspect FILE.kten [options]",
    .about = "Prints the header, the array table (name, type, shape, offset, length, SHA-256),\n"
             "the class map and the statistics stored in the metadata block. With --preview,\n"
             "also writes a contact sheet (PNG): a row per class, in class order, with the\n"
             "class name drawn above it, then a row of unlabelled records.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name exactly one .kten file",
    .main = cmd_inspect,
};

/* Prints a string from the metadata for a terminal: control characters (C0, DEL and the C1
 * range, which terminals read as commands) as \xNN or \u00NN and a backslash as \\, so no file
 * can move the cursor or retitle the window. A value that is missing or not a string says so. */
static void put_text(const json_t *v)
{
    if (!json_is_string(v)) {
        char *text = v ? json_dumps(v, JSON_ENCODE_ANY | JSON_COMPACT) : NULL;
        printf("(%s%.40s)", v ? "not a string: " : "missing", text ? text : "");
        free(text);
        return;
    }
    const unsigned char *p = (const unsigned char *)json_string_value(v);
    const size_t n = json_string_length(v);
    for (size_t i = 0; i < n; i++) {
        if (p[i] < 0x20 || p[i] == 0x7f)
            printf("\\x%02x", p[i]);
        else if (p[i] == '\\')
            fputs("\\\\", stdout);
        else if (p[i] == 0xc2 && i + 1 < n && p[i + 1] >= 0x80 && p[i + 1] <= 0x9f)
            printf("\\u%04x", p[++i]);
        else
            putchar(p[i]);
    }
}

static void print_stats(const json_t *st, const char *title)
{
    const json_t *ch = json_object_get(st, "channels");
    if (!json_is_array(ch))
        return;
    printf("%s (", title);
    put_text(json_object_get(st, "scale"));
    printf(", %s):\n", json_is_true(json_object_get(st, "used_for_normalisation"))
                           ? "used for normalisation"
                           : "not used");
    size_t i;
    const json_t *c;
    json_array_foreach(ch, i, c)
    {
        if (!json_is_number(json_object_get(c, "mean"))) { /* null: no records in the split */
            printf("  channel %zu: no values (%lld samples)\n", i,
                   (long long)json_integer_value(json_object_get(c, "count")));
            continue;
        }
        printf("  channel %zu: mean %.6f std %.6f (unit scale: mean %.6f std %.6f) min %lld max "
               "%lld\n",
               i, json_real_value(json_object_get(c, "mean")),
               json_real_value(json_object_get(c, "std")),
               json_real_value(json_object_get(c, "mean_unit")),
               json_real_value(json_object_get(c, "std_unit")),
               (long long)json_integer_value(json_object_get(c, "min")),
               (long long)json_integer_value(json_object_get(c, "max")));
    }
}

static int write_preview(const char *kten, const char *png, size_t per_class, bool quiet)
{
    struct kiln_preview_report rep;
    struct kiln_err err;
    int rc = kiln_stage_preview(kten, png, per_class, &rep, &err);
    if (rc) {
        cli_error("%s", err.msg);
        return rc == KILN_EIO || rc == KILN_ENOMEM ? KILN_EXIT_FAILURE : cli_exit_for_input(rc);
    }
    if (!rep.labelled)
        cli_warn("class names are not drawn on %s: %s; the rows are in class order", png, rep.font);
    if (!quiet)
        printf("contact sheet: %s, %ux%u pixels, %zu %s of %zu %s (tiles %ux%u%s)%s%s\n", png,
               rep.width, rep.height, rep.tiles, rep.tiles == 1 ? "record" : "records", rep.rows,
               rep.rows == 1 ? "row" : "rows", rep.tile_w, rep.tile_h,
               rep.shrink > 1 ? ", records shrunk" : "", rep.labelled ? ", names drawn with " : "",
               rep.labelled ? rep.font : "");
    return KILN_EXIT_OK;
}

/* Everything after option parsing; returns the exit status. */
static int inspect(const char *path, const struct inspect_opts *o, bool quiet)
{
    const bool as_json = o->as_json;
    /* An output that cannot be written is refused before any work (docs/cli.md). */
    if (o->preview) {
        const int code = cli_check_output_file(o->preview);
        if (code)
            return code;
    }
    struct kiln_kten_info info;
    struct kiln_err err;
    int rc = kiln_kten_open(path, &info, &err);
    if (rc) {
        struct stat st;
        if (stat(path, &st) == 0 && S_ISDIR(st.st_mode))
            cli_error("%s (name one of its files, e.g. %s/train.kten)", err.msg, path);
        else
            cli_error("%s", err.msg);
        return cli_exit_for_input(rc);
    }
    json_error_t je;
    json_t *meta = json_loads(info.metadata, 0, &je);
    if (!meta)
        cli_warn("%s: the metadata block is not valid JSON: %s", path, je.text);
    if (quiet) {
        /* nothing to print: the file opened and its header is sound */
    } else if (as_json) {
        fputs(info.metadata, stdout);
        fputc('\n', stdout);
    } else {
        char hex[KILN_SHA256_HEX];
        printf("%s: kiln tensor file version %u, %" PRIu64 " bytes\n", path, info.version,
               info.file_size);
        printf("arrays:\n");
        for (size_t i = 0; i < info.narrays; i++) {
            const struct kiln_kten_array *a = &info.arrays[i];
            char shape[128] = "";
            size_t used = 0;
            for (unsigned d = 0; d < a->rank; d++)
                used += (size_t)snprintf(shape + used, sizeof shape - used, "%s%" PRIu64,
                                         d ? ", " : "", a->dims[d]);
            kiln_sha256_hex(a->sha256, hex);
            printf("  %-8s %-4s [%s] at %" PRIu64 ", %" PRIu64 " bytes, sha256 %s\n", a->name,
                   kiln_dtype_name(a->dtype), shape, a->offset, a->length, hex);
        }
        kiln_sha256_hex(info.meta_sha256, hex);
        printf("metadata: %" PRIu64 " bytes at %" PRIu64 ", sha256 %s\n", info.meta_length,
               info.meta_offset, hex);
        if (meta) {
            static const char *const keys[] = {"split", "layout", "dtype", "recipe"};
            for (size_t k = 0; k < 4; k++) {
                printf("%s%s ", k ? ", " : "", keys[k]);
                put_text(json_object_get(meta, k == 3 ? "recipe_sha256" : keys[k]));
            }
            const json_t *classes = json_object_get(meta, "classes");
            size_t i;
            const json_t *v;
            printf("\nclasses:");
            json_array_foreach(classes, i, v)
            {
                printf(" %zu=", i);
                put_text(v);
            }
            printf("\n");
            print_stats(json_object_get(meta, "statistics"), "statistics of this split");
            if (json_object_get(meta, "training_statistics"))
                print_stats(json_object_get(meta, "training_statistics"), "training statistics");
        }
    }
    json_decref(meta);
    kiln_kten_info_free(&info);
    return o->preview ? write_preview(path, o->preview, o->sample, quiet) : KILN_EXIT_OK;
}

static int cmd_inspect(int argc, char **argv)
{
    struct inspect_opts o = {.sample = KILN_PREVIEW_SAMPLE};
    struct cli_args a = {.own = &o};
    int code = cli_parse(&cli_inspect, argc, argv, &a);
    if (code == CLI_GO)
        code = inspect(a.argv[0], &o, a.quiet);
    cli_args_free(&a);
    return code;
}

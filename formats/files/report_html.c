/* Writes kiln report's HTML: sections in the order a reader checks a data set (balance,
 * samples, audit, attributes and shortcuts, statistics, files not packed, then the run's
 * settings and checksums).
 * Every string from the outside (names, reasons, JSON values) goes through kiln_html_text. */
#include "report_html.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "manifest.h"
#include "outfile.h"

/* Split colours in the chart and the sample headings (readable on white, and for the common
 * red-green colour blindness). */
static const char *const split_colour[KILN_NSPLITS] = {"#3b6fb6", "#e69f00", "#7a4f9a"};

void kiln_html_text(FILE *f, const char *s)
{
    for (; s && *s; s++) {
        switch (*s) {
        case '&': fputs("&amp;", f); break;
        case '<': fputs("&lt;", f); break;
        case '>': fputs("&gt;", f); break;
        case '"': fputs("&quot;", f); break;
        case '\'': fputs("&#39;", f); break;
        default: fputc(*s, f);
        }
    }
}

/* RFC 4648 base64, for data: URIs. */
static void base64(FILE *f, const uint8_t *p, size_t n)
{
    static const char abc[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    size_t i = 0;
    for (; i + 3 <= n; i += 3) {
        const uint32_t v = (uint32_t)p[i] << 16 | (uint32_t)p[i + 1] << 8 | p[i + 2];
        fputc(abc[v >> 18], f), fputc(abc[(v >> 12) & 63], f);
        fputc(abc[(v >> 6) & 63], f), fputc(abc[v & 63], f);
    }
    if (n - i == 1) {
        const uint32_t v = (uint32_t)p[i] << 16;
        fputc(abc[v >> 18], f), fputc(abc[(v >> 12) & 63], f), fputs("==", f);
    } else if (n - i == 2) {
        const uint32_t v = (uint32_t)p[i] << 16 | (uint32_t)p[i + 1] << 8;
        fputc(abc[v >> 18], f), fputc(abc[(v >> 12) & 63], f), fputc(abc[(v >> 6) & 63], f);
        fputc('=', f);
    }
}

/* A JSON value as text: strings as they are, numbers, booleans, null as "none", arrays and
 * objects compactly. */
static void json_value(FILE *f, const json_t *v)
{
    if (json_is_string(v)) {
        kiln_html_text(f, json_string_value(v));
    } else if (!v || json_is_null(v)) {
        fputs("<i>none</i>", f);
    } else {
        char *t = json_dumps(v, JSON_ENCODE_ANY | JSON_COMPACT | JSON_REAL_PRECISION(6));
        kiln_html_text(f, t ? t : "?");
        free(t);
    }
}

static const json_t *get(const json_t *o, const char *key)
{
    return json_is_object(o) ? json_object_get(o, key) : NULL;
}

/* A table of an object's members; skip lists keys shown elsewhere (NULL-terminated). */
static void key_values(FILE *f, const json_t *o, const char *const *skip)
{
    const char *key;
    const json_t *v;
    fputs("<table class=\"kv\">\n", f);
    json_object_foreach((json_t *)o, key, v)
    {
        bool skipped = false;
        for (size_t k = 0; skip && skip[k]; k++)
            skipped |= strcmp(skip[k], key) == 0;
        if (skipped)
            continue;
        fputs("<tr><th>", f);
        kiln_html_text(f, key);
        fputs("</th><td>", f);
        json_value(f, v);
        fputs("</td></tr>\n", f);
    }
    fputs("</table>\n", f);
}

static void head(FILE *f, const struct kiln_report *r)
{
    fputs("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
          "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
          "<title>kiln report: ", f);
    kiln_html_text(f, r->outdir);
    fputs("</title>\n<style>\n"
          "body{font:14px/1.45 system-ui,sans-serif;margin:24px auto;max-width:1100px;"
          "padding:0 16px;color:#1d1d1d}\n"
          "h1{font-size:22px}h2{font-size:18px;border-bottom:1px solid #ccc;margin-top:32px}\n"
          "table{border-collapse:collapse;margin:8px 0}td,th{border:1px solid #ccc;"
          "padding:3px 8px;text-align:left;vertical-align:top}\n"
          "td.n,th.n{text-align:right;font-variant-numeric:tabular-nums}\n"
          "table.kv th{background:#f4f4f4;font-weight:normal;white-space:nowrap}\n"
          ".ok{color:#1a7f37}.bad{color:#b42318;font-weight:bold}.warn{color:#9a6700}\n"
          ".thumbs{display:flex;flex-wrap:wrap;gap:6px}"
          "figure{margin:0;max-width:110px;font-size:11px;word-break:break-all}\n"
          "figure img{display:block;image-rendering:pixelated;border:1px solid #ddd}\n"
          ".finding{border:1px solid #ddd;padding:8px;margin:8px 0}\n"
          "code{font-size:12px;word-break:break-all}\n"
          ".cols{display:flex;flex-wrap:wrap;gap:24px;align-items:flex-start}\n"
          "</style>\n</head>\n<body>\n", f);
}

static uint64_t count_of(const json_t *counts, int s, const char *cls)
{
    return (uint64_t)json_integer_value(get(get(get(counts, kiln_split_name(s)), "per_class"),
                                            cls));
}

static bool split_present(const json_t *counts, int s)
{
    return get(counts, kiln_split_name(s)) != NULL;
}

static void summary(FILE *f, const struct kiln_report *r)
{
    const json_t *m = r->manifest, *counts = get(m, "counts"), *audit = get(m, "audit");
    fputs("<h1>kiln report: <code>", f);
    kiln_html_text(f, r->outdir);
    fputs("</code></h1>\n<ul id=\"summary\">\n<li>", f);
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (split_present(counts, s))
            fprintf(f, "%s%s %" PRIu64, s ? ", " : "", kiln_split_name(s),
                    (uint64_t)json_integer_value(get(get(counts, kiln_split_name(s)), "records")));
    fprintf(f, " records; %zu classes; %ux%u, %u channel%s</li>\n", r->nclasses, r->rec_w,
            r->rec_h, r->rec_c, r->rec_c == 1 ? "" : "s");
    if (!r->verify.ran)
        fputs("<li class=\"bad\">checksums not checked: ", f), kiln_html_text(f, r->verify.error),
            fputs("</li>\n", f);
    else if (r->verify.problems)
        fprintf(f, "<li class=\"bad\">checksums: %zu problem%s (see Run)</li>\n",
                r->verify.problems, r->verify.problems == 1 ? "" : "s");
    else
        fprintf(f, "<li class=\"ok\">checksums: all %zu files and %zu arrays match</li>\n",
                r->verify.files, r->verify.arrays);
    const struct kiln_report_verify *v = &r->verify;
    if (v->sources_given && !v->sources_ran)
        fputs("<li class=\"bad\">sources not checked: ", f), kiln_html_text(f, v->sources_error),
            fputs("</li>\n", f);
    else if (v->sources_given && (v->sources_missing || v->sources_changed))
        fprintf(f, "<li class=\"bad\">sources: %zu of %zu recorded files missing, %zu changed "
                "(see Run)</li>\n", v->sources_missing, v->sources_checked, v->sources_changed);
    else if (v->sources_given)
        fprintf(f, "<li class=\"ok\">sources: all %zu recorded files found (%zu moved)</li>\n",
                v->sources_checked, v->sources_moved);
    else
        fputs("<li>sources: not checked (<code>kiln report OUTDIR --source DIR</code> looks for "
              "every recorded file by content)</li>\n", f);
    if (json_is_true(get(audit, "clean")))
        fputs("<li class=\"ok\">audit: nothing spans two splits</li>\n", f);
    else
        fprintf(f, "<li class=\"bad\">audit: %zu finding%s (see Audit)</li>\n",
                r->nfindings + r->findings_not_listed,
                r->nfindings + r->findings_not_listed == 1 ? "" : "s");
    const size_t missing = json_array_size(get(audit, "classes_missing"));
    if (missing)
        fprintf(f, "<li class=\"bad\">%zu class%s missing from a split (see Audit)</li>\n",
                missing, missing == 1 ? "" : "es");
    if (r->nrefused)
        fprintf(f, "<li class=\"warn\">%zu possible cop%s kept apart by the unit rule, e.g. "
                "filed under two labels (see Audit)</li>\n", r->nrefused + r->refused_not_listed,
                r->nrefused + r->refused_not_listed == 1 ? "y" : "ies");
    if (r->shortcuts && r->shortcuts->fired)
        fprintf(f, "<li class=\"bad\">shortcut check: %zu attribute%s predict%s the label "
                "(see Attributes)</li>\n", r->shortcuts->fired, r->shortcuts->fired == 1 ? "" : "s",
                r->shortcuts->fired == 1 ? "s" : "");
    else if (r->shortcuts)
        fputs("<li class=\"ok\">shortcut check: no attribute besides the picture predicts the "
              "label</li>\n", f);
    else
        fputs("<li class=\"warn\">shortcut check: not run (see Attributes)</li>\n", f);
    size_t skipped = 0;
    for (size_t k = 0; k < r->nskipped; k++)
        skipped += r->skipped[k].count;
    fprintf(f, "<li>%zu catalogue row%s not packed (see Not packed)</li>\n</ul>\n", skipped,
            skipped == 1 ? "" : "s");
    fputs("<p class=\"nav\"><a href=\"#balance\">Balance</a> &middot; <a href=\"#samples\">"
          "Samples</a> &middot; <a href=\"#audit\">Audit</a> &middot; <a href=\"#attributes\">"
          "Attributes</a> &middot; <a href=\"#statistics\">Statistics</a> &middot; "
          "<a href=\"#skipped\">Not packed</a> &middot; <a href=\"#run\">Run</a></p>\n", f);
}

static void run_section(FILE *f, const struct kiln_report *r)
{
    const json_t *m = r->manifest;
    fputs("<h2 id=\"run\">Run</h2>\n<p>kiln ", f);
    json_value(f, get(m, "kiln_version"));
    fputs("; libraries:", f);
    const char *lib;
    const json_t *ver;
    json_object_foreach((json_t *)get(m, "libraries"), lib, ver)
    {
        fputc(' ', f);
        kiln_html_text(f, lib);
        fputc(' ', f);
        json_value(f, ver);
    }
    fputs(". The same bytes are rebuilt from the sources, wherever their files now are, by "
          "<code>kiln reproduce ", f);
    kiln_html_text(f, r->outdir);
    fputs("/manifest.json --source DIR -o NEWDIR</code> (docs/cli.md). Recipe SHA-256 <code>", f);
    json_value(f, get(m, "recipe_sha256"));
    fputs("</code>.</p>\n<div class=\"cols\">\n<div><h3>Scan</h3>\n", f);
    static const char *const scan_skip[] = {"status_counts", NULL};
    key_values(f, get(m, "scan"), scan_skip);
    fputs("</div>\n<div><h3>Split</h3>\n", f);
    static const char *const split_skip[] = {"near_duplicates", NULL};
    key_values(f, get(m, "split"), split_skip);
    fputs("</div>\n<div><h3>Recipe</h3>\n", f);
    key_values(f, get(m, "recipe"), NULL);
    fputs("</div>\n</div>\n<h3>Outputs and checksums</h3>\n<table>\n<tr><th>file</th>"
          "<th class=\"n\">bytes</th><th>SHA-256</th></tr>\n", f);
    size_t i;
    const json_t *o;
    json_array_foreach(get(m, "outputs"), i, o)
    {
        fputs("<tr><td>", f);
        json_value(f, get(o, "name"));
        fputs("</td><td class=\"n\">", f);
        json_value(f, get(o, "bytes"));
        fputs("</td><td><code>", f);
        json_value(f, get(o, "sha256"));
        fputs("</code></td></tr>\n", f);
    }
    fputs("</table>\n", f);
    if (!r->verify.ran) {
        fputs("<p class=\"bad\">verify could not run: ", f);
        kiln_html_text(f, r->verify.error);
        fputs("</p>\n", f);
        return;
    }
    fprintf(f, "<p class=\"%s\">verify: %zu files and %zu arrays checked, %zu problem%s</p>\n",
            r->verify.problems ? "bad" : "ok", r->verify.files, r->verify.arrays,
            r->verify.problems, r->verify.problems == 1 ? "" : "s");
    const struct kiln_report_verify *v = &r->verify;
    if (v->sources_given && v->sources_ran)
        fprintf(f, "<p class=\"%s\">sources: %zu recorded files looked for by content: %zu "
                "missing, %zu changed, %zu moved; %zu files in the sources not recorded</p>\n",
                v->sources_missing || v->sources_changed ? "bad" : "ok", v->sources_checked,
                v->sources_missing, v->sources_changed, v->sources_moved, v->sources_extra);
    if (v->places_unknown)
        fputs("<p class=\"warn\">The names are hashed with a key that was not given "
              "(--path-key): files found by content cannot be told to be in place or moved.</p>\n",
              f);
    if (r->verify.nmessages) {
        fputs("<ul>\n", f);
        for (size_t k = 0; k < r->verify.nmessages; k++)
            fputs("<li>", f), kiln_html_text(f, r->verify.message[k]), fputs("</li>\n", f);
        fputs("</ul>\n", f);
    }
}

/* Horizontal stacked bars, one per class, a colour per split. */
static void balance_chart(FILE *f, const struct kiln_report *r, const json_t *counts)
{
    uint64_t most = 1;
    for (size_t c = 0; c < r->nclasses; c++) {
        uint64_t t = 0;
        for (int s = 0; s < KILN_NSPLITS; s++)
            t += count_of(counts, s, r->classes[c]);
        most = t > most ? t : most;
    }
    const unsigned bar = 18, label = 180, width = 760, plot = width - label - 60;
    const unsigned height = (unsigned)r->nclasses * (bar + 6) + 30;
    fprintf(f, "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%u\" height=\"%u\" "
            "role=\"img\" aria-label=\"records per class and split\">\n", width, height);
    for (size_t c = 0; c < r->nclasses; c++) {
        const unsigned y = (unsigned)c * (bar + 6);
        double x = label;
        uint64_t total = 0;
        fprintf(f, "<text x=\"%u\" y=\"%u\" text-anchor=\"end\" font-size=\"12\">", label - 6,
                y + 13);
        kiln_html_text(f, r->classes[c]);
        fputs("</text>\n", f);
        for (int s = 0; s < KILN_NSPLITS; s++) {
            const uint64_t n = count_of(counts, s, r->classes[c]);
            const double w = (double)plot * (double)n / (double)most;
            if (n)
                fprintf(f, "<rect x=\"%.1f\" y=\"%u\" width=\"%.1f\" height=\"%u\" fill=\"%s\">"
                        "<title>%s: %" PRIu64 "</title></rect>\n", x, y, w, bar,
                        split_colour[s], kiln_split_name(s), n);
            x += w;
            total += n;
        }
        fprintf(f, "<text x=\"%.1f\" y=\"%u\" font-size=\"12\">%" PRIu64 "</text>\n", x + 4,
                y + 13, total);
    }
    unsigned lx = label;
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (split_present(counts, s)) {
            fprintf(f, "<rect x=\"%u\" y=\"%u\" width=\"12\" height=\"12\" fill=\"%s\"/>"
                    "<text x=\"%u\" y=\"%u\" font-size=\"12\">%s</text>\n", lx, height - 16,
                    split_colour[s], lx + 16, height - 6, kiln_split_name(s));
            lx += 80;
        }
    fputs("</svg>\n", f);
}

static void balance_section(FILE *f, const struct kiln_report *r)
{
    const json_t *counts = get(r->manifest, "counts");
    uint64_t col[KILN_NSPLITS] = {0, 0, 0}, all = 0;
    fputs("<h2 id=\"balance\">Balance</h2>\n<table id=\"balance-table\">\n<tr><th>class</th>", f);
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (split_present(counts, s))
            fprintf(f, "<th class=\"n\">%s</th>", kiln_split_name(s));
    fputs("<th class=\"n\">total</th></tr>\n", f);
    for (size_t c = 0; c < r->nclasses; c++) {
        uint64_t row = 0;
        fputs("<tr><td>", f);
        kiln_html_text(f, r->classes[c]);
        fputs("</td>", f);
        for (int s = 0; s < KILN_NSPLITS; s++)
            if (split_present(counts, s)) {
                const uint64_t n = count_of(counts, s, r->classes[c]);
                fprintf(f, "<td class=\"n\" data-split=\"%s\">%" PRIu64 "</td>",
                        kiln_split_name(s), n);
                row += n;
                col[s] += n;
            }
        fprintf(f, "<td class=\"n\">%" PRIu64 "</td></tr>\n", row);
        all += row;
    }
    fputs("<tr><th>all</th>", f);
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (split_present(counts, s))
            fprintf(f, "<th class=\"n\">%" PRIu64 "</th>", col[s]);
    fprintf(f, "<th class=\"n\">%" PRIu64 "</th></tr>\n<tr><th>share</th>", all);
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (split_present(counts, s))
            fprintf(f, "<td class=\"n\">%.1f%%</td>", all ? 100.0 * (double)col[s] / (double)all
                                                          : 0.0);
    fputs("<td>asked ", f);
    json_value(f, get(get(r->manifest, "split"), "ratios"));
    fputs("</td></tr>\n</table>\n", f);
    balance_chart(f, r, counts);
}

static void stats_section(FILE *f, const struct kiln_report *r)
{
    const json_t *st = get(r->manifest, "statistics");
    fputs("<h2 id=\"statistics\">Statistics</h2>\n<p>Per channel, in the record scale and in "
          "[0,1] (population standard deviation). Training statistics are the ones to "
          "normalise with (docs/format.md).</p>\n<table>\n<tr><th>split</th><th>channel</th>"
          "<th class=\"n\">mean</th><th class=\"n\">std</th><th class=\"n\">min</th>"
          "<th class=\"n\">max</th><th class=\"n\">mean [0,1]</th><th class=\"n\">std [0,1]"
          "</th></tr>\n", f);
    for (int s = 0; s < KILN_NSPLITS; s++) {
        size_t i;
        const json_t *ch;
        json_array_foreach(get(get(st, kiln_split_name(s)), "channels"), i, ch)
        {
            fprintf(f, "<tr><td>%s%s</td><td class=\"n\">%zu</td>", kiln_split_name(s),
                    json_is_true(get(get(st, kiln_split_name(s)), "used_for_normalisation"))
                        ? " (training statistics)" : "", i);
            static const char *const keys[] = {"mean", "std", "min", "max", "mean_unit",
                                               "std_unit"};
            for (size_t k = 0; k < sizeof keys / sizeof keys[0]; k++) {
                const json_t *v = get(ch, keys[k]);
                if (json_is_real(v))
                    fprintf(f, "<td class=\"n\">%.6g</td>", json_real_value(v));
                else
                    fputs("<td class=\"n\">", f), json_value(f, v), fputs("</td>", f);
            }
            fputs("</tr>\n", f);
        }
    }
    fputs("</table>\n", f);
}

/* Totals of one value of an attribute, per class, over every split. */
static uint64_t value_total(const struct kiln_shortcut *a, size_t nclasses, size_t v,
                            size_t c)
{
    uint64_t n = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        n += a->counts[((size_t)s * a->nvalues + v) * nclasses + c];
    return n;
}

static int cmp_u64_desc(const void *x, const void *y)
{
    const uint64_t *p = x, *q = y; /* {total, value index} */
    if (p[0] != q[0])
        return p[0] > q[0] ? -1 : 1;
    return (p[1] > q[1]) - (p[1] < q[1]);
}

/* Value x class counts of one attribute: the KILN_REPORT_VALUES most common values, then the
 * rest summed. */
static void attribute_table(FILE *f, const struct kiln_report *r, const struct kiln_shortcut *a)
{
    const size_t nc = r->nclasses;
    uint64_t(*order)[2] = a->nvalues ? calloc(a->nvalues, sizeof *order) : NULL;
    if (!order && a->nvalues) {
        fputs("<p class=\"bad\">out of memory for this table</p>\n", f);
        return;
    }
    for (size_t v = 0; v < a->nvalues; v++) {
        order[v][1] = v;
        for (size_t c = 0; c < nc; c++)
            order[v][0] += value_total(a, nc, v, c);
    }
    if (a->nvalues > 1)
        qsort(order, a->nvalues, sizeof *order, cmp_u64_desc);
    fputs("<table>\n<tr><th>value</th>", f);
    for (size_t c = 0; c < nc; c++)
        fputs("<th class=\"n\">", f), kiln_html_text(f, r->classes[c]), fputs("</th>", f);
    fputs("</tr>\n", f);
    for (size_t k = 0; k < a->nvalues && k < KILN_REPORT_VALUES; k++) {
        fputs("<tr><td>", f);
        kiln_html_text(f, a->values[order[k][1]]);
        fputs("</td>", f);
        for (size_t c = 0; c < nc; c++)
            fprintf(f, "<td class=\"n\">%" PRIu64 "</td>", value_total(a, nc, order[k][1], c));
        fputs("</tr>\n", f);
    }
    if (a->nvalues > KILN_REPORT_VALUES) {
        fprintf(f, "<tr><td>%zu other values</td>", a->nvalues - KILN_REPORT_VALUES);
        for (size_t c = 0; c < nc; c++) {
            uint64_t n = 0;
            for (size_t k = KILN_REPORT_VALUES; k < a->nvalues; k++)
                n += value_total(a, nc, order[k][1], c);
            fprintf(f, "<td class=\"n\">%" PRIu64 "</td>", n);
        }
        fputs("</tr>\n", f);
    }
    fputs("</table>\n", f);
    free(order);
}

static void attributes_section(FILE *f, const struct kiln_report *r)
{
    fputs("<h2 id=\"attributes\">Attributes and shortcuts</h2>\n", f);
    if (!r->shortcuts) {
        fputs("<p class=\"warn\">The attributes could not be counted (see the messages of "
              "kiln report).</p>\n", f);
        return;
    }
    fputs("<p>Packed items per class by attributes that are not the picture's content. The "
          "shortcut check (docs/shortcuts.md) flags an attribute that predicts the label on its "
          "own: bias-corrected Cram&eacute;r's V on train, and the majority rule learnt on "
          "train checked on held-out items (lambda).</p>\n", f);
    for (int k = 0; k < KILN_ATTR_COUNT; k++) {
        const struct kiln_shortcut *a = &r->shortcuts->attrs[k];
        fprintf(f, "<h3>%s</h3>\n<p class=\"%s\">%s: V %.2f on train", kiln_shortcut_attr_name(k),
                a->fires ? "bad" : "ok", a->fires ? "shortcut: predicts the label" : "no shortcut",
                a->train.v_corrected);
        if (a->held_n)
            fprintf(f, ", lambda %.2f on %s (%" PRIu64 " items)", a->held_lambda,
                    a->held_split >= 0 ? kiln_split_name(a->held_split) : "train", a->held_n);
        fputs("</p>\n", f);
        attribute_table(f, r, a);
    }
}

static void thumb(FILE *f, const struct kiln_report_thumb *t)
{
    fputs("<figure>", f);
    if (t->png) {
        const uint32_t scale = t->w <= 48 && t->h <= 48 ? 2 : 1;
        fprintf(f, "<img width=\"%u\" height=\"%u\" alt=\"", t->w * scale, t->h * scale);
        kiln_html_text(f, t->name);
        fputs("\" src=\"data:image/png;base64,", f);
        base64(f, t->png, t->len);
        fputs("\">", f);
    }
    fputs("<figcaption>", f);
    kiln_html_text(f, t->name);
    if (t->split != KILN_SPLIT_NONE)
        fprintf(f, " <b style=\"color:%s\">%s</b>", split_colour[t->split],
                kiln_split_name(t->split));
    if (t->note && *t->note)
        fputs(" <i>", f), kiln_html_text(f, t->note), fputs("</i>", f);
    fputs("</figcaption></figure>\n", f);
}

static void samples_section(FILE *f, const struct kiln_report *r)
{
    fprintf(f, "<h2 id=\"samples\">Samples</h2>\n<p>Up to %zu packed records per class and "
            "split, as the network sees them (after orientation, fit and resize; f32 shown "
            "de-normalised), spread evenly over the record order.</p>\n", r->per_class);
    for (size_t c = 0; c < r->nclasses; c++) {
        fputs("<h3>", f);
        kiln_html_text(f, r->classes[c]);
        fputs("</h3>\n", f);
        fputs("<div class=\"cols\">\n", f);
        for (int s = 0; s < KILN_NSPLITS; s++) {
            const struct kiln_report_cell *cell = &r->cells[(size_t)s * r->nclasses + c];
            if (!cell->n)
                continue;
            fprintf(f, "<div><p><b style=\"color:%s\">%s</b>: %" PRIu64 " record%s</p>\n"
                    "<div class=\"thumbs\">\n", split_colour[s], kiln_split_name(s),
                    cell->records, cell->records == 1 ? "" : "s");
            for (size_t k = 0; k < cell->n; k++)
                thumb(f, &cell->t[k]);
            fputs("</div></div>\n", f);
        }
        fputs("</div>\n", f);
    }
}

/* One finding or refused link: its kind, its items' pictures side by side, its evidence. */
static void finding(FILE *f, const struct kiln_report_finding *fd)
{
    fputs("<div class=\"finding\"><p><b>", f);
    kiln_html_text(f, fd->kind);
    fprintf(f, "</b>: %zu items</p>\n<div class=\"thumbs\">\n", fd->nitems);
    for (size_t j = 0; j < fd->nitems; j++)
        thumb(f, &fd->items[j]);
    fputs("</div>\n", f);
    static const char *const shown[] = {"items", NULL}; /* as pictures, above */
    if (fd->link)
        key_values(f, fd->link, shown);
    fputs("</div>\n", f);
}

static void audit_section(FILE *f, const struct kiln_report *r)
{
    const json_t *audit = get(r->manifest, "audit");
    fputs("<h2 id=\"audit\">Audit</h2>\n<p>What must share a split but does not (docs/split.md): "
          "groups, identical files, pixels or records, and possible near duplicates, which are "
          "a judgement with their evidence, not a fact. ", f);
    fputs(json_is_true(get(audit, "near_duplicates_checked"))
              ? "Near duplicates were checked."
              : "Near duplicates were not checked.", f);
    fputs("</p>\n", f);
    size_t i;
    const json_t *miss;
    json_array_foreach(get(audit, "classes_missing"), i, miss)
    {
        fputs("<p class=\"bad\">class ", f);
        json_value(f, get(miss, "class"));
        fputs(" has no items in ", f);
        json_value(f, get(miss, "split"));
        fputs("</p>\n", f);
    }
    if (!r->nfindings)
        fputs("<p class=\"ok\" id=\"audit-clean\">No finding: nothing spans two splits.</p>\n",
              f);
    for (size_t k = 0; k < r->nfindings; k++)
        finding(f, &r->findings[k]);
    if (r->findings_not_listed)
        fprintf(f, "<p>%zu more findings are counted, not listed, in manifest.json; "
                "<code>kiln audit</code> lists them all.</p>\n", r->findings_not_listed);
    if (!r->nrefused)
        return;
    fputs("<h3 id=\"kept-apart\">Possible copies kept apart</h3>\n<p>Near-duplicate links that "
          "passed the pixel check but that the unit rule refused, because they would have "
          "joined different labels or too many pictures (docs/near-duplicates.md). The units "
          "stay apart, so such a pair may sit in two splits; a picture filed under two classes "
          "is a labelling question worth a look.</p>\n", f);
    for (size_t k = 0; k < r->nrefused; k++)
        finding(f, &r->refused[k]);
    if (r->refused_not_listed)
        fprintf(f, "<p>%zu more refused links are counted, not listed, in manifest.json.</p>\n",
                r->refused_not_listed);
}

static void skipped_section(FILE *f, const struct kiln_report *r)
{
    fputs("<h2 id=\"skipped\">Not packed</h2>\n", f);
    if (!r->nskipped) {
        fputs("<p class=\"ok\">Every catalogue row was packed.</p>\n", f);
        return;
    }
    fputs("<p>Catalogue rows that are not in any tensor file, by status (docs/statuses.md); "
          "items.csv lists them all.</p>\n", f);
    for (size_t k = 0; k < r->nskipped; k++) {
        const struct kiln_report_skipped *g = &r->skipped[k];
        fputs("<h3>", f);
        kiln_html_text(f, g->status);
        fprintf(f, ": %zu</h3>\n<table>\n<tr><th>file</th><th>reason</th></tr>\n", g->count);
        for (size_t j = 0; j < g->nlisted; j++) {
            fputs("<tr><td><code>", f);
            kiln_html_text(f, g->name[j]);
            fputs("</code></td><td>", f);
            kiln_html_text(f, g->reason[j]);
            fputs("</td></tr>\n", f);
        }
        if (g->count > g->nlisted)
            fprintf(f, "<tr><td colspan=\"2\">and %zu more (items.csv)</td></tr>\n",
                    g->count - g->nlisted);
        fputs("</table>\n", f);
    }
}

int kiln_report_html_save(const char *path, const struct kiln_report *r, struct kiln_err *err)
{
    struct kiln_outfile of;
    FILE *f = kiln_outfile_open_stream(&of, path, err);
    if (!f)
        return err->code;
    head(f, r);
    summary(f, r);
    balance_section(f, r);
    samples_section(f, r);
    audit_section(f, r);
    attributes_section(f, r);
    stats_section(f, r);
    skipped_section(f, r);
    run_section(f, r);
    fputs("</body>\n</html>\n", f);
    if (ferror(f)) {
        kiln_outfile_abort(&of);
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s", path);
    }
    return kiln_outfile_commit(&of, err);
}

#!/usr/bin/python3
"""Checks a kiln report (docs/report.md) against the output folder it describes, with Python's
own HTML parser (html.parser), base64 and PIL as the outside references:

  report_check.py REPORT.html OUTDIR [HOSTILE_NAME...]

- well-formed: every element that is opened is closed, in order (void elements excepted);
- self-contained: no src, href, srcset, xlink:href, CSS url() or @import that leaves the
  file (only data: URIs and #fragments), no <script>, <iframe>, <link>, <object> or <embed>;
- every <img> is a data:image/png;base64 URI that PIL decodes, at the size its width and
  height attributes give (or twice that for small records);
- the balance table equals manifest.json's counts, class by class and split by split;
- the summary's records per split equal the manifest's;
- the statistics table equals the manifest's statistics, split by split and channel by channel
  (to the 6 significant digits shown), the training statistics marked as such;
- the run section names kiln's and each library's version, the recipe hash and every output
  with its size and SHA-256 as the manifest records them;
- each HOSTILE_NAME (a file or class name holding markup) appears as text, never as markup.
Exit status 0, or 1 with the reasons printed.
"""
import base64
import html
import html.parser
import io
import json
import os
import re
import sys

from PIL import Image

VOID = {"meta", "img", "br", "hr", "input", "link", "col", "source", "wbr", "rect", "path"}


class Report(html.parser.HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.errors, self.images, self.text = [], [], [], []
        self.table, self.in_table, self.row, self.cell = [], False, None, None
        self.summary, self.in_summary = [], False
        self.tags = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag in ("script", "iframe", "link", "object", "embed", "base"):
            self.errors.append(f"<{tag}> element")
        for k, v in attrs:
            if k.startswith("on"):
                self.errors.append(f"event attribute {k} on <{tag}>")
            if k in ("src", "href", "srcset", "xlink:href", "action", "poster") and v is not None:
                if not (v.startswith("data:") or v.startswith("#")):
                    self.errors.append(f"<{tag} {k}={v!r}> leaves the file")
            if k == "style" and v and ("url(" in v or "@import" in v):
                self.errors.append(f"<{tag} style> loads {v!r}")
        if tag == "img":
            self.images.append(a)
        if tag == "table" and a.get("id") == "balance-table":
            self.in_table = True
        if self.in_table and tag == "tr":
            self.row = []
        if self.in_table and tag in ("td", "th"):
            self.cell = ""
        if tag == "ul" and a.get("id") == "summary":
            self.in_summary = True
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if tag not in VOID and self.stack and self.stack[-1] == tag:
            self.stack.pop()

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}"
                               f" (line {self.getpos()[0]})")
            return
        self.stack.pop()
        if self.in_table and tag in ("td", "th") and self.row is not None:
            self.row.append(self.cell.strip())
            self.cell = None
        if self.in_table and tag == "tr":
            self.table.append(self.row)
            self.row = None
        if tag == "table" and self.in_table:
            self.in_table = False
        if tag == "ul" and self.in_summary:
            self.in_summary = False

    def handle_data(self, data):
        self.text.append(data)
        if self.cell is not None:
            self.cell += data
        if self.in_summary:
            self.summary.append(data)


def section(src, ident):
    """The HTML of section ident: from its <h2 id=...> to the next <h2."""
    start = src.find(f'<h2 id="{ident}">')
    if start < 0:
        return None
    end = src.find("<h2", start + 4)
    return src[start:end if end >= 0 else len(src)]


def plain(fragment):
    return html.unescape(re.sub(r"<[^>]*>", " ", fragment))


def check_statistics(src, m, errors):
    """The statistics table against manifest.json: every split and channel, every value
    (printed with 6 significant digits)."""
    sec = section(src, "statistics")
    if sec is None:
        errors.append("no statistics section")
        return
    rows = {}
    for tr in re.findall(r"<tr>(.*?)</tr>", sec, re.S):
        cells = [plain(c).strip() for c in re.findall(r"<td[^>]*>(.*?)</td>", tr, re.S)]
        if cells:
            rows[(cells[0].split()[0], int(cells[1]))] = (cells[0], cells[2:])
    st = m["statistics"]
    want_rows = 0
    for split, body in st.items():
        if not isinstance(body, dict) or "channels" not in body:
            continue
        for i, ch in enumerate(body["channels"]):
            want_rows += 1
            got = rows.get((split, i))
            if got is None:
                errors.append(f"statistics: no row for {split} channel {i}")
                continue
            label, vals = got
            if body.get("used_for_normalisation") and "training statistics" not in label:
                errors.append(f"statistics: {split} not marked as the training statistics")
            for k, v in zip(("mean", "std", "min", "max", "mean_unit", "std_unit"), vals):
                w = ch[k]
                if abs(float(v) - float(w)) > 1e-5 * max(1.0, abs(float(w))):
                    errors.append(f"statistics: {split} channel {i} {k} {v} != manifest {w}")
    if want_rows == 0 or len(rows) != want_rows:
        errors.append(f"statistics: {len(rows)} rows, manifest has {want_rows}")


def check_run(src, m, errors):
    """The run section names kiln's and every library's version, the recipe hash and every
    output with its size and SHA-256, as manifest.json records them."""
    sec = section(src, "run")
    if sec is None:
        errors.append("no run section")
        return
    text = " ".join(plain(sec).split())
    want = [f"kiln {m['kiln_version']}", m["recipe_sha256"]]
    want += [f"{lib} {ver}" for lib, ver in m["libraries"].items()]
    for o in m["outputs"]:
        want += [o["name"], str(o["bytes"]), o["sha256"]]
    for w in want:
        if str(w) not in text:
            errors.append(f"run section lacks {w!r}")


def main():
    path, outdir, hostile = sys.argv[1], sys.argv[2], sys.argv[3:]
    src = open(path, encoding="utf-8").read()
    p = Report()
    p.feed(src)
    p.close()
    errors = list(p.errors)
    if p.stack:
        errors.append(f"elements never closed: {p.stack}")
    if not src.startswith("<!DOCTYPE html>"):
        errors.append("no <!DOCTYPE html>")
    for m in re.finditer(r"<style>(.*?)</style>", src, re.S):
        if "url(" in m.group(1) or "@import" in m.group(1):
            errors.append("the style sheet loads something")

    for a in p.images:
        uri = a.get("src", "")
        prefix = "data:image/png;base64,"
        if not uri.startswith(prefix):
            errors.append(f"image {a.get('alt')!r} is not an embedded PNG")
            continue
        try:
            im = Image.open(io.BytesIO(base64.b64decode(uri[len(prefix):], validate=True)))
            im.load()
        except Exception as e:  # noqa: BLE001 - any failure to decode is the finding
            errors.append(f"image {a.get('alt')!r} does not decode: {e}")
            continue
        w, h = int(a["width"]), int(a["height"])
        if (w, h) != im.size and (w, h) != (2 * im.size[0], 2 * im.size[1]):
            errors.append(f"image {a.get('alt')!r}: {im.size} shown as {w}x{h}")

    m = json.load(open(os.path.join(outdir, "manifest.json"), encoding="utf-8"))
    splits = [s for s in ("train", "val", "test") if s in m["counts"]]
    want_head = ["class"] + splits + ["total"]
    if not p.table or p.table[0] != want_head:
        errors.append(f"balance table header {p.table[:1]} != {want_head}")
    else:
        rows = {r[0]: r[1:] for r in p.table[1:]}
        for c in m["classes"]:
            got = rows.get(c)
            want = [str(m["counts"][s]["per_class"].get(c, 0)) for s in splits]
            want.append(str(sum(int(x) for x in want)))
            if got != want:
                errors.append(f"class {c!r}: table {got} != manifest {want}")
        total = [str(m["counts"][s]["records"]) for s in splits]
        total.append(str(sum(int(x) for x in total)))
        if rows.get("all") != total:
            errors.append(f"totals {rows.get('all')} != manifest {total}")
    summary = "".join(p.summary)
    for s in splits:
        if f"{s} {m['counts'][s]['records']}" not in summary:
            errors.append(f"summary lacks '{s} {m['counts'][s]['records']}': {summary!r}")

    check_statistics(src, m, errors)
    check_run(src, m, errors)

    text = "".join(p.text)
    for name in hostile:
        if name not in text:
            errors.append(f"hostile name {name!r} not shown as text")
    for tag, a in p.tags:
        if tag not in ("html", "head", "meta", "title", "style", "body", "h1", "h2", "h3", "p",
                       "ul", "li", "table", "tr", "th", "td", "code", "i", "b", "svg", "rect",
                       "text", "div", "figure", "figcaption", "img", "a", "tbody"):
            errors.append(f"unexpected element <{tag}> (markup from a name?)")
    for e in errors:
        print(f"{path}: {e}")
    print(f"{path}: {len(p.images)} images, {len(p.table)} balance rows, "
          f"{len(errors)} problems")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())

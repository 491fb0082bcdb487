/* Replays files through one harness without libFuzzer: the regression test of the normal suite
 * (and under AddressSanitizer and UndefinedBehaviorSanitizer in `tests/run.sh --sanitize`).
 *
 *   kiln-fuzz-replay-NAME [DIR | FILE | --valid DIR | --optional DIR]...
 *
 * Every file of a DIR (sorted by name, so runs repeat) goes through LLVMFuzzerTestOneInput; a
 * crash, a sanitizer report or a broken invariant ends the run. Files of a --valid DIR must
 * also be accepted by the harness (decoded, loaded) one by one. An --optional DIR that does
 * not exist (published test data not installed) is skipped with a note. Fails when no file at
 * all was replayed. */
#include <dirent.h>
#include <errno.h>
#include <string.h>
#include <sys/stat.h>

#include "fuzz.h"

static uint8_t *read_all(const char *path, size_t *size)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    size_t cap = 65536, n = 0;
    uint8_t *buf = malloc(cap);
    while (buf) {
        n += fread(buf + n, 1, cap - n, f);
        if (n < cap)
            break;
        uint8_t *p = realloc(buf, cap * 2);
        if (!p) {
            free(buf);
            buf = NULL;
            break;
        }
        buf = p;
        cap *= 2;
    }
    int bad = ferror(f);
    fclose(f);
    if (bad) {
        free(buf);
        return NULL;
    }
    *size = n;
    return buf;
}

/* Runs one file; returns 0, or 1 when a --valid input was not accepted. */
static int replay_file(const char *path, int valid)
{
    size_t size = 0;
    uint8_t *data = read_all(path, &size);
    if (!data) {
        fprintf(stderr, "cannot read %s: %s\n", path, strerror(errno));
        exit(2);
    }
    /* An exact-size copy, as libFuzzer passes inputs, so a read past the end is caught. */
    uint8_t *exact = malloc(size ? size : 1);
    if (!exact)
        abort();
    memcpy(exact, data, size);
    free(data);
    (void)fuzz_accepted();
    LLVMFuzzerTestOneInput(exact, size);
    free(exact);
    if (valid && !fuzz_accepted()) {
        fprintf(stderr, "%s: a valid input that the harness did not accept\n", path);
        return 1;
    }
    return 0;
}

static int by_name(const struct dirent **a, const struct dirent **b)
{
    return strcmp((*a)->d_name, (*b)->d_name);
}

int main(int argc, char **argv)
{
    size_t files = 0, valid = 0;
    int failed = 0;
    for (int i = 1; i < argc; i++) {
        int want_valid = 0, optional = 0;
        if (strcmp(argv[i], "--valid") == 0 || strcmp(argv[i], "--optional") == 0) {
            want_valid = argv[i][2] == 'v';
            optional = !want_valid;
            if (++i == argc) {
                fprintf(stderr, "%s needs a folder\n", argv[i - 1]);
                return 2;
            }
        }
        const char *arg = argv[i];
        struct stat st;
        if (stat(arg, &st) != 0) {
            if (optional && errno == ENOENT) {
                printf("not replayed (absent): %s\n", arg);
                continue;
            }
            fprintf(stderr, "cannot open %s: %s\n", arg, strerror(errno));
            return 2;
        }
        if (!S_ISDIR(st.st_mode)) {
            failed |= replay_file(arg, want_valid);
            files++;
            valid += (size_t)want_valid;
            continue;
        }
        struct dirent **names;
        int n = scandir(arg, &names, NULL, by_name);
        if (n < 0) {
            fprintf(stderr, "cannot list %s: %s\n", arg, strerror(errno));
            return 2;
        }
        size_t here = 0;
        for (int k = 0; k < n; k++) {
            char path[4096];
            snprintf(path, sizeof path, "%s/%s", arg, names[k]->d_name);
            if (names[k]->d_name[0] != '.' && stat(path, &st) == 0 && S_ISREG(st.st_mode)) {
                failed |= replay_file(path, want_valid);
                here++;
            }
            free(names[k]);
        }
        free(names);
        if (here == 0 && !optional) {
            fprintf(stderr, "%s holds no inputs\n", arg);
            return 2;
        }
        printf("%zu inputs from %s%s\n", here, arg, want_valid ? " (each accepted)" : "");
        files += here;
        valid += want_valid ? here : 0;
    }
    if (files == 0) {
        fprintf(stderr, "no inputs replayed\n");
        return 2;
    }
    printf("%zu inputs replayed without a crash, %zu of them valid ones accepted%s\n", files,
           valid, failed ? "; SOME VALID INPUTS WERE REFUSED" : "");
    return failed;
}

/* Unit tests for formats/outfile: whole-file SHA-256 against the FIPS 180-4 example, every
 * failure path freeing what it took (fault injection, unit/faults.h), and messages that name
 * the file the user asked for, never an internal temporary name. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <fcntl.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "../../core/sha256.h"
#include "../../formats/files/outfile.h"
#include "faults.h"

static char tmpdir[64];

static int setup(void **state)
{
    (void)state;
    strcpy(tmpdir, "/tmp/kiln-test-outfile-XXXXXX");
    return mkdtemp(tmpdir) ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    fault_reset();
    return fault_remove_tree(tmpdir);
}

static void write_file(const char *path, const char *text)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(text, 1, strlen(text), f), strlen(text));
    assert_int_equal(fclose(f), 0);
}

static void test_file_sha256(void **state)
{
    (void)state;
    char p[128], hex[KILN_SHA256_HEX];
    snprintf(p, sizeof p, "%s/abc", tmpdir);
    write_file(p, "abc");
    uint8_t d[KILN_SHA256_LEN];
    uint64_t size = 99;
    struct kiln_err err = {0};
    assert_int_equal(kiln_file_sha256(p, d, &size, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
    /* FIPS 180-4 "abc" example (testdata CHECKS.md section 5). */
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    assert_int_equal(size, 3);
    assert_int_equal(fault_evp_live, 0);
}

/* Every way kiln_file_sha256 can fail returns the libcrypto context it took and names the
 * file: no read buffer, a folder instead of a file, a missing file, a refused digest. */
static void test_file_sha256_failures(void **state)
{
    (void)state;
    char p[128];
    snprintf(p, sizeof p, "%s/abc", tmpdir);
    write_file(p, "abc");
    uint8_t d[KILN_SHA256_LEN];
    uint64_t size;
    struct kiln_err err = {0};

    fault_malloc_size = 1u << 20; /* the read buffer */
    assert_int_equal(kiln_file_sha256(p, d, &size, &err), KILN_ENOMEM);
    fault_reset();
    assert_non_null(strstr(err.msg, p));
    assert_int_equal(fault_evp_live, 0);

    assert_int_equal(kiln_file_sha256(tmpdir, d, &size, &err), KILN_EIO);
    assert_non_null(strstr(err.msg, tmpdir));
    assert_int_equal(fault_evp_live, 0);

    char missing[160];
    snprintf(missing, sizeof missing, "%s/missing", tmpdir);
    assert_int_equal(kiln_file_sha256(missing, d, &size, &err), KILN_EIO);
    assert_non_null(strstr(err.msg, missing));

    fault_final_count = 1;
    assert_int_equal(kiln_file_sha256(p, d, &size, &err), KILN_EINTERNAL);
    fault_reset();
    assert_int_equal(fault_evp_live, 0);
}

/* The names kiln_outfile_open makes are recognised as kiln's, with the writer's pid; anything
 * else -- another base name, a missing or non-numeric part, extra characters -- is not. */
static void test_temp_names(void **state)
{
    (void)state;
    char p[128];
    snprintf(p, sizeof p, "%s/train.kten", tmpdir);
    struct kiln_outfile of;
    struct kiln_err err = {0};
    assert_int_equal(kiln_outfile_open(&of, p, &err), KILN_OK);
    const char *base = strrchr(of.tmp_path, '/') + 1;
    long pid = 0;
    assert_true(kiln_outfile_is_temp_name(base, "train.kten", &pid));
    assert_int_equal(pid, (long)getpid());
    assert_false(kiln_outfile_is_temp_name(base, "val.kten", &pid));
    assert_false(kiln_outfile_is_temp_name(base, "train", &pid));
    kiln_outfile_abort(&of);
    assert_int_equal(access(p, F_OK), -1);

    assert_true(kiln_outfile_is_temp_name(".items.csv.tmp-77-0", "items.csv", &pid));
    assert_int_equal(pid, 77);
    static const char *const not_ours[] = {
        "items.csv.tmp-77-0",   ".items.csv.tmp-77-",    ".items.csv.tmp--77-0",
        ".items.csv.tmp-+7-0",  ".items.csv.tmp-77-0x",  ".items.csv.tmp-x-0",
        ".items.csv.tmp-77",    ".items.csv.tmp-0-0",    ".items.csv.tmp- 77-0",
        ".items.csv.tmp-1234567890-1", ".items.csvX.tmp-77-0", ".items.csv.tmp-77-0/x",
    };
    for (size_t i = 0; i < sizeof not_ours / sizeof not_ours[0]; i++)
        assert_false(kiln_outfile_is_temp_name(not_ours[i], "items.csv", &pid));
}

/* A file that cannot be created is named as the user named it, never by its temporary name. */
static void test_open_failure_names_the_file(void **state)
{
    (void)state;
    char p[160];
    snprintf(p, sizeof p, "%s/no-such-folder/catalog.csv", tmpdir);
    struct kiln_outfile of;
    struct kiln_err err = {0};
    assert_int_equal(kiln_outfile_open(&of, p, &err), KILN_EWRITE);
    assert_non_null(strstr(err.msg, p));
    assert_null(strstr(err.msg, ".tmp-"));
    assert_non_null(strstr(err.msg, "No such file or directory"));
}

/* A write that fails names the file the user asked for (here: to a descriptor that is not
 * open for writing, which fails as a full disk would, EBADF instead of ENOSPC). */
static void test_write_failure_names_the_file(void **state)
{
    (void)state;
    char p[128];
    snprintf(p, sizeof p, "%s/manifest.json", tmpdir);
    struct kiln_outfile of;
    struct kiln_err err = {0};
    assert_int_equal(kiln_outfile_open(&of, p, &err), KILN_OK);
    assert_int_equal(kiln_outfile_write_at(&of, "{}", 2, 0, &err), KILN_OK);
    const int fd = of.fd;
    of.fd = open("/dev/null", O_RDONLY);
    assert_int_equal(kiln_outfile_write_at(&of, "{}", 2, 2, &err), KILN_EWRITE);
    assert_non_null(strstr(err.msg, p));
    assert_null(strstr(err.msg, ".tmp-"));
    close(of.fd);
    of.fd = fd;
    assert_int_equal(kiln_outfile_commit(&of, &err), KILN_OK);
    struct stat st;
    assert_int_equal(stat(p, &st), 0);
    assert_int_equal(st.st_size, 2);
}

/* Counts the entries of a folder other than . and .. */
static int entries(const char *dir)
{
    char cmd[256];
    snprintf(cmd, sizeof cmd, "ls -A '%s' | wc -l", dir);
    FILE *f = popen(cmd, "r");
    int n = -1;
    if (f) {
        if (fscanf(f, "%d", &n) != 1)
            n = -1;
        pclose(f);
    }
    return n;
}

/* kiln_outfile_remove_all (the interrupted run) removes exactly the temporary files that exist,
 * counts them and their sizes, leaves committed outputs alone and refuses any new file or
 * rename after it. It ends the process's use of output files, so it runs in a child. */
static void test_remove_all(void **state)
{
    (void)state;
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        char a[128], b[128], c[128], d[128];
        snprintf(a, sizeof a, "%s/train.kten", tmpdir);
        snprintf(b, sizeof b, "%s/items.csv", tmpdir);
        snprintf(c, sizeof c, "%s/catalog.csv", tmpdir);
        snprintf(d, sizeof d, "%s/SHA256SUMS", tmpdir);
        struct kiln_outfile oa, ob, oc, od;
        struct kiln_err err = {0};
        int bad = kiln_outfile_open(&oa, a, &err) || kiln_outfile_open(&ob, b, &err) ||
                  kiln_outfile_open(&oc, c, &err) || kiln_outfile_open(&od, d, &err);
        bad |= kiln_outfile_write_at(&oa, "0123456789", 10, 4096, &err) != KILN_OK;
        bad |= kiln_outfile_write_at(&ob, "abc", 3, 0, &err) != KILN_OK;
        bad |= kiln_outfile_commit(&oc, &err) != KILN_OK; /* a finished output stays */
        kiln_outfile_abort(&od);                           /* an abandoned one is gone */
        size_t files;
        uint64_t bytes;
        kiln_outfile_remove_all(&files, &bytes);
        bad |= files != 2 || bytes != 4109 || entries(tmpdir) != 1 || access(c, F_OK) != 0;
        struct kiln_outfile oe;
        bad |= kiln_outfile_open(&oe, d, &err) != KILN_EWRITE || !strstr(err.msg, d);
        bad |= kiln_outfile_commit(&oa, &err) != KILN_EWRITE || access(a, F_OK) == 0;
        _exit(bad ? 1 : 0);
    }
    int status;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFEXITED(status));
    assert_int_equal(WEXITSTATUS(status), 0);
}

/* ---- replacing a folder's files together ---- */

static char *path_in(const char *name)
{
    static char buf[4][256];
    static int k;
    k = (k + 1) % 4;
    snprintf(buf[k], sizeof buf[k], "%s/%s", tmpdir, name);
    return buf[k];
}

/* The folder's entries and their contents, one "name=content;" each in name order: what
 * "exactly as it was" is compared on. */
static char *listing(void)
{
    char cmd[512];
    snprintf(cmd, sizeof cmd,
             "cd '%s' && for f in $(ls -A | LC_ALL=C sort); do printf '%%s=%%s;' \"$f\" \"$(cat \"$f\")\"; done",
             tmpdir);
    FILE *f = popen(cmd, "r");
    assert_non_null(f);
    static char out[4096];
    size_t n = fread(out, 1, sizeof out - 1, f);
    out[n] = '\0';
    pclose(f);
    return strdup(out);
}

static void write_out(const char *name, const char *text)
{
    struct kiln_outfile of;
    struct kiln_err err = {0};
    assert_int_equal(kiln_outfile_open(&of, path_in(name), &err), KILN_OK);
    assert_int_equal(kiln_outfile_write_at(&of, text, strlen(text), 0, &err), KILN_OK);
    assert_int_equal(kiln_outfile_commit(&of, &err), KILN_OK);
}

static void old_output(void)
{
    write_file(path_in("train.kten"), "old train");
    write_file(path_in("val.kten"), "old val");
    write_file(path_in("manifest.json"), "old manifest");
    write_file(path_in("notes.txt"), "the user's");
}

static bool is_output(const char *name)
{
    static const char *const names[] = {"train.kten", "val.kten", "test.kten", "manifest.json"};
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++)
        if (strcmp(name, names[i]) == 0)
            return true;
    return false;
}

/* Until the replace, staged files change nothing in the folder; the replace puts them in place,
 * takes away the old files named for removal that were not rewritten, and leaves no journal,
 * backup or temporary file; the user's file is untouched. Discarding leaves the folder as it
 * was. */
static void test_replace_and_discard(void **state)
{
    (void)state;
    old_output();
    char *before = listing();
    struct kiln_err err = {0};
    assert_int_equal(kiln_outfile_stage(tmpdir, &err), KILN_OK);
    write_out("train.kten", "new train");
    write_out("test.kten", "new test");
    write_out("manifest.json", "new manifest");
    write_out("manifest.json", "newer manifest"); /* written twice: the second counts */
    struct kiln_outfile other;                    /* outside the staged folder: as usual */
    char elsewhere[160];
    snprintf(elsewhere, sizeof elsewhere, "%s-x.csv", tmpdir);
    assert_int_equal(kiln_outfile_open(&other, elsewhere, &err), KILN_OK);
    assert_int_equal(kiln_outfile_commit(&other, &err), KILN_OK);
    assert_int_equal(access(elsewhere, F_OK), 0);
    unlink(elsewhere);
    char *tmp = kiln_outfile_staged_path(path_in("train.kten"));
    assert_non_null(tmp);
    assert_non_null(strstr(tmp, "/.train.kten.tmp-"));
    free(tmp);
    /* The folder holds the old files and three temporary ones. */
    char *during = listing();
    assert_int_equal(entries(tmpdir), 7);
    assert_non_null(strstr(during, "train.kten=old train;"));
    assert_null(strstr(during, "test.kten="));
    free(during);
    const char *const remove[] = {"val.kten", "manifest.json", "absent.kten"};
    assert_int_equal(kiln_outfile_replace(remove, 3, &err), KILN_OK);
    char *after = listing();
    assert_string_equal(after, "manifest.json=newer manifest;notes.txt=the user's;"
                               "test.kten=new test;train.kten=new train;");
    free(after);

    /* discard */
    char *before2 = listing();
    assert_int_equal(kiln_outfile_stage(tmpdir, &err), KILN_OK);
    write_out("train.kten", "discarded");
    kiln_outfile_discard();
    char *after2 = listing();
    assert_string_equal(after2, before2);
    free(before2);
    free(after2);
    free(before);
}

/* A kill at any step of the replace (simulated: the journal kiln writes, then the first k of
 * its renames) is undone by kiln_outfile_recover: the folder is exactly as before, with no
 * journal, backup or temporary file. After the journal is gone the new files stand. */
static void test_recover_every_step(void **state)
{
    (void)state;
    const char *entries_[][3] = {
        {"train.kten", ".train.kten.tmp-99999991-0", ".train.kten.old-99999991-3"},
        {"test.kten", ".test.kten.tmp-99999991-1", "-"},
        {"val.kten", "-", ".val.kten.old-99999991-4"},
        {"manifest.json", ".manifest.json.tmp-99999991-2", ".manifest.json.old-99999991-5"},
    };
    const size_t n = 4;
    for (size_t k = 0; k <= 2 * n; k++) {
        fault_remove_tree(tmpdir);
        mkdir(tmpdir, 0700);
        old_output();
        char *before = listing();
        write_file(path_in(".train.kten.tmp-99999991-0"), "new train");
        write_file(path_in(".test.kten.tmp-99999991-1"), "new test");
        write_file(path_in(".manifest.json.tmp-99999991-2"), "new manifest");
        FILE *j = fopen(path_in(KILN_OUTFILE_JOURNAL), "w");
        assert_non_null(j);
        fprintf(j, "kiln replace journal 1\npid 99999991\n");
        for (size_t i = 0; i < n; i++)
            fprintf(j, "%s\t%s\t%s\n", entries_[i][0], entries_[i][1], entries_[i][2]);
        fprintf(j, "end\n");
        fclose(j);
        for (size_t step = 0; step < k; step++) {
            const char *const *e = entries_[step / 2];
            if (step % 2 == 0 && strcmp(e[2], "-") != 0)
                assert_int_equal(rename(path_in(e[0]), path_in(e[2])), 0);
            if (step % 2 == 1 && strcmp(e[1], "-") != 0)
                assert_int_equal(rename(path_in(e[1]), path_in(e[0])), 0);
        }
        struct kiln_recovery r;
        struct kiln_err err = {0};
        assert_int_equal(kiln_outfile_recover(tmpdir, is_output, &r, &err), KILN_OK);
        assert_true(r.journal && r.restored && !r.busy);
        assert_int_equal(r.pid, 99999991);
        char *after = listing();
        assert_string_equal(after, before);
        free(after);
        free(before);
    }
}

/* Journals that recovery must not act on: one of a running process (busy, untouched), one
 * naming a file kiln does not write, and one cut short before its renames (only its temporary
 * files go). */
static void test_recover_refusals(void **state)
{
    (void)state;
    old_output();
    char *before = listing();
    struct kiln_recovery r;
    struct kiln_err err = {0};
    FILE *j = fopen(path_in(KILN_OUTFILE_JOURNAL), "w");
    fprintf(j, "kiln replace journal 1\npid %ld\ntrain.kten\t-\t.train.kten.old-%ld-0\nend\n",
            (long)getppid(), (long)getppid());
    fclose(j);
    assert_int_equal(kiln_outfile_recover(tmpdir, is_output, &r, &err), KILN_OK);
    assert_true(r.journal && r.busy && !r.restored);
    assert_int_equal(access(path_in(KILN_OUTFILE_JOURNAL), F_OK), 0);

    j = fopen(path_in(KILN_OUTFILE_JOURNAL), "w");
    fprintf(j, "kiln replace journal 1\npid 99999991\nnotes.txt\t-\t.notes.txt.old-99999991-0\n"
               "end\n");
    fclose(j);
    assert_int_equal(kiln_outfile_recover(tmpdir, is_output, &r, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "is not a journal kiln wrote"));
    assert_int_equal(access(path_in("notes.txt"), F_OK), 0);

    j = fopen(path_in(KILN_OUTFILE_JOURNAL), "w");
    fprintf(j, "kiln replace journal 1\npid 99999991\ntrain.kten\t.train.kten.tmp-99999991-0\t"
               ".train.kten.old-99999991-1\n");
    fclose(j);
    write_file(path_in(".train.kten.tmp-99999991-0"), "new train");
    assert_int_equal(kiln_outfile_recover(tmpdir, is_output, &r, &err), KILN_OK);
    assert_true(r.journal && !r.restored && !r.busy);
    char *after = listing();
    assert_string_equal(after, before);
    free(after);
    free(before);
}

/* An interruption (kiln_outfile_remove_all) before the replace makes it fail and leaves the
 * old files; it runs in a child, as it ends the process's use of output files. */
static void test_replace_interrupted(void **state)
{
    (void)state;
    old_output();
    char *before = listing();
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        struct kiln_err err = {0};
        int bad = kiln_outfile_stage(tmpdir, &err) != KILN_OK;
        write_out("train.kten", "new train");
        size_t files;
        uint64_t bytes;
        kiln_outfile_remove_all(&files, &bytes);
        bad |= files != 1;
        const char *const remove[] = {"val.kten"};
        bad |= kiln_outfile_replace(remove, 1, &err) != KILN_EWRITE;
        bad |= !strstr(err.msg, "interrupted");
        _exit(bad);
    }
    int status;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFEXITED(status) && WEXITSTATUS(status) == 0);
    char *after = listing();
    assert_string_equal(after, before);
    free(after);
    free(before);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_file_sha256, setup, teardown),
        cmocka_unit_test_setup_teardown(test_file_sha256_failures, setup, teardown),
        cmocka_unit_test_setup_teardown(test_temp_names, setup, teardown),
        cmocka_unit_test_setup_teardown(test_open_failure_names_the_file, setup, teardown),
        cmocka_unit_test_setup_teardown(test_write_failure_names_the_file, setup, teardown),
        cmocka_unit_test_setup_teardown(test_remove_all, setup, teardown),
        cmocka_unit_test_setup_teardown(test_replace_and_discard, setup, teardown),
        cmocka_unit_test_setup_teardown(test_recover_every_step, setup, teardown),
        cmocka_unit_test_setup_teardown(test_recover_refusals, setup, teardown),
        cmocka_unit_test_setup_teardown(test_replace_interrupted, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}

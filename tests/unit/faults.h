/* Fault injection for unit tests through the linker's --wrap option (tests/CMakeLists.txt,
 * kiln_unit_test_faults): calls from kiln's static libraries to malloc, the libcrypto digest
 * functions and pthread_mutex_init/destroy reach the wrappers in faults.c, which count live
 * resources and fail exactly the call a test arms. Unarmed, every call passes straight on. */
#ifndef KILN_TEST_FAULTS_H
#define KILN_TEST_FAULTS_H

#include <stdatomic.h>
#include <stddef.h>

/* malloc(n) with n == this size returns NULL (0: never). */
extern atomic_size_t fault_malloc_size;
/* How many mallocs were refused so far, so that a test can tell its fault was reached. */
extern atomic_size_t fault_malloc_refused;
/* EVP_DigestUpdate fails when its data begins with this prefix (NULL: never). */
extern const char *_Atomic fault_update_prefix;
/* The next this-many EVP_DigestFinal_ex calls fail. */
extern atomic_int fault_final_count;

/* Live libcrypto digest contexts (EVP_MD_CTX_new minus EVP_MD_CTX_free of non-NULL). */
extern atomic_long fault_evp_live;
/* Live fetched digest methods (EVP_MD_fetch minus EVP_MD_free of non-NULL). */
extern atomic_long fault_md_live;
/* Live mutexes (successful pthread_mutex_init minus pthread_mutex_destroy). */
extern atomic_long fault_mutex_live;

/* Disarms every fault (counters are kept). */
void fault_reset(void);

/* Removes a scratch folder and everything in it (links are removed, not followed); a test's
 * teardown. Returns 0 or -1. */
int fault_remove_tree(const char *dir);

#endif

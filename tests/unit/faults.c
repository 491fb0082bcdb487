/* The --wrap targets behind faults.h. Each __wrap_X does its bookkeeping and calls __real_X,
 * the original function, unless a test armed a failure for this call. */
#include "faults.h"

#include <ftw.h>
#include <openssl/evp.h>
#include <stdio.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

atomic_size_t fault_malloc_size;
atomic_size_t fault_malloc_refused;
const char *_Atomic fault_update_prefix;
atomic_int fault_final_count;
atomic_long fault_evp_live;
atomic_long fault_mutex_live;
atomic_long fault_md_live;

void fault_reset(void)
{
    atomic_store(&fault_malloc_size, 0);
    atomic_store(&fault_update_prefix, NULL);
    atomic_store(&fault_final_count, 0);
}

static int remove_one(const char *p, const struct stat *st, int flag, struct FTW *f)
{
    (void)st, (void)flag, (void)f;
    return remove(p);
}

int fault_remove_tree(const char *dir)
{
    return nftw(dir, remove_one, 8, FTW_DEPTH | FTW_PHYS);
}

void *__real_malloc(size_t n);
void *__wrap_malloc(size_t n);
void *__wrap_malloc(size_t n)
{
    size_t armed = atomic_load(&fault_malloc_size);
    if (armed && n == armed) {
        atomic_fetch_add(&fault_malloc_refused, 1);
        return NULL;
    }
    return __real_malloc(n);
}

EVP_MD_CTX *__real_EVP_MD_CTX_new(void);
EVP_MD_CTX *__wrap_EVP_MD_CTX_new(void);
EVP_MD_CTX *__wrap_EVP_MD_CTX_new(void)
{
    EVP_MD_CTX *c = __real_EVP_MD_CTX_new();
    if (c)
        atomic_fetch_add(&fault_evp_live, 1);
    return c;
}

void __real_EVP_MD_CTX_free(EVP_MD_CTX *c);
void __wrap_EVP_MD_CTX_free(EVP_MD_CTX *c);
void __wrap_EVP_MD_CTX_free(EVP_MD_CTX *c)
{
    if (c)
        atomic_fetch_sub(&fault_evp_live, 1);
    __real_EVP_MD_CTX_free(c);
}

EVP_MD *__real_EVP_MD_fetch(OSSL_LIB_CTX *lib, const char *name, const char *props);
EVP_MD *__wrap_EVP_MD_fetch(OSSL_LIB_CTX *lib, const char *name, const char *props);
EVP_MD *__wrap_EVP_MD_fetch(OSSL_LIB_CTX *lib, const char *name, const char *props)
{
    EVP_MD *md = __real_EVP_MD_fetch(lib, name, props);
    if (md)
        atomic_fetch_add(&fault_md_live, 1);
    return md;
}

void __real_EVP_MD_free(EVP_MD *md);
void __wrap_EVP_MD_free(EVP_MD *md);
void __wrap_EVP_MD_free(EVP_MD *md)
{
    if (md)
        atomic_fetch_sub(&fault_md_live, 1);
    __real_EVP_MD_free(md);
}

int __real_EVP_DigestUpdate(EVP_MD_CTX *c, const void *d, size_t n);
int __wrap_EVP_DigestUpdate(EVP_MD_CTX *c, const void *d, size_t n);
int __wrap_EVP_DigestUpdate(EVP_MD_CTX *c, const void *d, size_t n)
{
    const char *p = atomic_load(&fault_update_prefix);
    if (p && n >= strlen(p) && memcmp(d, p, strlen(p)) == 0)
        return 0;
    return __real_EVP_DigestUpdate(c, d, n);
}

int __real_EVP_DigestFinal_ex(EVP_MD_CTX *c, unsigned char *out, unsigned int *n);
int __wrap_EVP_DigestFinal_ex(EVP_MD_CTX *c, unsigned char *out, unsigned int *n);
int __wrap_EVP_DigestFinal_ex(EVP_MD_CTX *c, unsigned char *out, unsigned int *n)
{
    int left = atomic_load(&fault_final_count);
    while (left > 0)
        if (atomic_compare_exchange_weak(&fault_final_count, &left, left - 1))
            return 0;
    return __real_EVP_DigestFinal_ex(c, out, n);
}

int __real_pthread_mutex_init(pthread_mutex_t *m, const pthread_mutexattr_t *a);
int __wrap_pthread_mutex_init(pthread_mutex_t *m, const pthread_mutexattr_t *a);
int __wrap_pthread_mutex_init(pthread_mutex_t *m, const pthread_mutexattr_t *a)
{
    int rc = __real_pthread_mutex_init(m, a);
    if (rc == 0)
        atomic_fetch_add(&fault_mutex_live, 1);
    return rc;
}

int __real_pthread_mutex_destroy(pthread_mutex_t *m);
int __wrap_pthread_mutex_destroy(pthread_mutex_t *m);
int __wrap_pthread_mutex_destroy(pthread_mutex_t *m)
{
    int rc = __real_pthread_mutex_destroy(m);
    if (rc == 0)
        atomic_fetch_sub(&fault_mutex_live, 1);
    return rc;
}

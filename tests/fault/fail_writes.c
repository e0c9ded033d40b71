/* A write-failure injector for the fault-injection tests (tests/cli/disk_full.sh), loaded into
 * a process with LD_PRELOAD. It makes writes to some files fail as on a full disk (ENOSPC):
 *
 *   SPAR_FAIL_WRITES_MATCHING  a substring; a write goes through the injector when the path
 *                              of its file descriptor (readlink of /proc/self/fd/N) contains
 *                              it. Unset or empty: the injector does nothing.
 *   SPAR_FAIL_WRITES_AFTER     bytes that may still be written to such files, in all, before
 *                              writes fail (default 0: the first write fails). A write that
 *                              crosses the limit is cut short there, as the kernel does when
 *                              the disk fills in the middle of a write; the next one fails.
 *   SPAR_FAIL_WRITES_REPORT    optional: a file to which one line is appended for every
 *                              refused write ("refused N bytes to PATH"), so a test can tell
 *                              that the injector did fire.
 *
 * Which calls need catching: a program's own write(), writev() and pwrite() calls (std::ofstream
 * ends in write() and writev() called from libstdc++, which go through the dynamic linker and
 * are caught here). glibc's stdio (fwrite, fputs, fputc, putc) writes its buffer with an
 * internal call that LD_PRELOAD cannot replace, so those functions are caught themselves: their
 * bytes are counted when handed to the stream, and a refused write sets the stream's error flag
 * and errno as a failed flush would. The printf family is not caught (spar writes files with
 * fwrite and std::ofstream only).
 *
 * Only for tests: built by tests/CMakeLists.txt, never installed. Linux and glibc only. */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <sys/uio.h>
#include <unistd.h>

/* glibc defines these as macros when optimising; the functions are what is replaced here. */
#undef fwrite_unlocked
#undef fputc
#undef putc

static long long written_so_far; /* bytes let through to matching files; __atomic builtins */

static const char* pattern(void) {
  const char* p = getenv("SPAR_FAIL_WRITES_MATCHING");
  return p && *p ? p : NULL;
}

static long long allowance(void) {
  const char* a = getenv("SPAR_FAIL_WRITES_AFTER");
  return a && *a ? strtoll(a, NULL, 10) : 0;
}

static void* next_symbol(const char* name) {
  void* f = dlsym(RTLD_NEXT, name);
  if (!f) abort(); /* cannot pass the call on: better a loud crash than a silent no-op */
  return f;
}

static ssize_t real_write(int fd, const void* buf, size_t n) {
  static ssize_t (*f)(int, const void*, size_t);
  if (!f) f = (ssize_t(*)(int, const void*, size_t))next_symbol("write");
  return f(fd, buf, n);
}

/* The path of `fd` into `path` (size PATH_MAX), or 0 when it has none. */
static int fd_path(int fd, char* path) {
  char link[64];
  snprintf(link, sizeof link, "/proc/self/fd/%d", fd);
  const ssize_t n = readlink(link, path, PATH_MAX - 1);
  if (n <= 0) return 0;
  path[n] = '\0';
  return 1;
}

static void report(const char* path, size_t bytes) {
  const char* to = getenv("SPAR_FAIL_WRITES_REPORT");
  if (!to || !*to) return;
  const int saved = errno;
  const int fd = open(to, O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
  if (fd >= 0) {
    char line[PATH_MAX + 64];
    const int len = snprintf(line, sizeof line, "refused %zu bytes to %s\n", bytes, path);
    if (len > 0) (void)real_write(fd, line, (size_t)len < sizeof line ? (size_t)len : sizeof line);
    close(fd);
  }
  errno = saved;
}

/* How many of `n` bytes for `fd` may be written: n for a file that does not match, otherwise
 * what is left of the allowance (counted as written). -1 with errno = ENOSPC when nothing is. */
static ssize_t admit(int fd, size_t n) {
  const char* p = pattern();
  if (!p || n == 0 || fd < 0) return (ssize_t)n;
  char path[PATH_MAX];
  if (!fd_path(fd, path) || !strstr(path, p)) return (ssize_t)n;
  const long long limit = allowance();
  long long before = __atomic_load_n(&written_so_far, __ATOMIC_RELAXED), take;
  do {
    const long long left = limit > before ? limit - before : 0;
    take = (long long)n < left ? (long long)n : left;
  } while (take > 0 && !__atomic_compare_exchange_n(&written_so_far, &before, before + take, 0,
                                                    __ATOMIC_RELAXED, __ATOMIC_RELAXED));
  if (take == 0) {
    report(path, n);
    errno = ENOSPC;
    return -1;
  }
  return (ssize_t)take;
}

ssize_t write(int fd, const void* buf, size_t n) {
  const ssize_t allowed = admit(fd, n);
  if (allowed < 0) return -1;
  return real_write(fd, buf, (size_t)allowed);
}

ssize_t pwrite(int fd, const void* buf, size_t n, off_t offset) {
  static ssize_t (*f)(int, const void*, size_t, off_t);
  if (!f) f = (ssize_t(*)(int, const void*, size_t, off_t))next_symbol("pwrite");
  const ssize_t allowed = admit(fd, n);
  if (allowed < 0) return -1;
  return f(fd, buf, (size_t)allowed, offset);
}

ssize_t pwrite64(int fd, const void* buf, size_t n, off_t offset) {
  static ssize_t (*f)(int, const void*, size_t, off_t);
  if (!f) f = (ssize_t(*)(int, const void*, size_t, off_t))next_symbol("pwrite64");
  const ssize_t allowed = admit(fd, n);
  if (allowed < 0) return -1;
  return f(fd, buf, (size_t)allowed, offset);
}

/* The first iovecs of `iov` holding `keep` bytes, into `out` (at most IOV_MAX entries). */
static int cut_iov(const struct iovec* iov, int count, size_t keep, struct iovec* out) {
  int k = 0;
  for (int i = 0; i < count && keep > 0 && k < IOV_MAX; ++i) {
    out[k] = iov[i];
    if (out[k].iov_len > keep) out[k].iov_len = keep;
    keep -= out[k].iov_len;
    ++k;
  }
  return k;
}

static size_t iov_bytes(const struct iovec* iov, int count) {
  size_t n = 0;
  for (int i = 0; i < count; ++i) n += iov[i].iov_len;
  return n;
}

ssize_t writev(int fd, const struct iovec* iov, int count) {
  static ssize_t (*f)(int, const struct iovec*, int);
  if (!f) f = (ssize_t(*)(int, const struct iovec*, int))next_symbol("writev");
  if (count < 0 || count > IOV_MAX) return f(fd, iov, count); /* let the kernel refuse it */
  const size_t n = iov_bytes(iov, count);
  const ssize_t allowed = admit(fd, n);
  if (allowed < 0) return -1;
  if ((size_t)allowed == n) return f(fd, iov, count);
  struct iovec cut[IOV_MAX];
  return f(fd, cut, cut_iov(iov, count, (size_t)allowed, cut));
}

ssize_t pwritev(int fd, const struct iovec* iov, int count, off_t offset) {
  static ssize_t (*f)(int, const struct iovec*, int, off_t);
  if (!f) f = (ssize_t(*)(int, const struct iovec*, int, off_t))next_symbol("pwritev");
  if (count < 0 || count > IOV_MAX) return f(fd, iov, count, offset);
  const size_t n = iov_bytes(iov, count);
  const ssize_t allowed = admit(fd, n);
  if (allowed < 0) return -1;
  if ((size_t)allowed == n) return f(fd, iov, count, offset);
  struct iovec cut[IOV_MAX];
  return f(fd, cut, cut_iov(iov, count, (size_t)allowed, cut), offset);
}

/* ---- stdio: the bytes are counted when handed to the stream ---- */

static void fail_stream(FILE* stream) {
  stream->_flags |= _IO_ERR_SEEN; /* what ferror() reads (glibc's struct _IO_FILE) */
  errno = ENOSPC;
}

static size_t stdio_fwrite(const char* name, const void* data, size_t size, size_t count,
                           FILE* stream) {
  typedef size_t (*Fwrite)(const void*, size_t, size_t, FILE*);
  Fwrite f = (Fwrite)next_symbol(name);
  if (size == 0 || count == 0) return f(data, size, count, stream);
  const size_t n = size * count;
  const ssize_t allowed = admit(fileno(stream), n);
  if (allowed < 0) {
    fail_stream(stream);
    return 0;
  }
  if ((size_t)allowed == n) return f(data, size, count, stream);
  const size_t whole = (size_t)allowed / size; /* items that fit; a partial one is dropped */
  const size_t done = whole ? f(data, size, whole, stream) : 0;
  fail_stream(stream);
  return done;
}

size_t fwrite(const void* data, size_t size, size_t count, FILE* stream) {
  return stdio_fwrite("fwrite", data, size, count, stream);
}

size_t fwrite_unlocked(const void* data, size_t size, size_t count, FILE* stream) {
  return stdio_fwrite("fwrite_unlocked", data, size, count, stream);
}

int fputs(const char* text, FILE* stream) {
  const size_t n = strlen(text);
  return stdio_fwrite("fwrite", text, 1, n, stream) == n ? 1 : EOF;
}

int fputc(int c, FILE* stream) {
  static int (*f)(int, FILE*);
  if (!f) f = (int (*)(int, FILE*))next_symbol("fputc");
  if (admit(fileno(stream), 1) < 1) {
    fail_stream(stream);
    return EOF;
  }
  return f(c, stream);
}

int putc(int c, FILE* stream) {
  static int (*f)(int, FILE*);
  if (!f) f = (int (*)(int, FILE*))next_symbol("putc");
  if (admit(fileno(stream), 1) < 1) {
    fail_stream(stream);
    return EOF;
  }
  return f(c, stream);
}

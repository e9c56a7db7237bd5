/* See link.h. */
#include "link.h"

#include <errno.h>
#include <fcntl.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

int link_open(link_t *l, int sock_fd, const char *page_path)
{
    int fd = open(page_path, O_RDWR);
    void *p;
    if (fd < 0)
        return -1;
    p = mmap(NULL, PAGE_WORDS * sizeof(uint64_t), PROT_READ | PROT_WRITE, MAP_SHARED, fd, 0);
    close(fd);
    if (p == MAP_FAILED)
        return -1;
    l->page = (volatile uint64_t *)p;
    l->fd = sock_fd;
    return 0;
}

void link_publish(link_t *l, uint64_t cycles)
{
    l->page[PAGE_CYCLES_A] = cycles;
    __atomic_thread_fence(__ATOMIC_SEQ_CST);
    l->page[PAGE_CYCLES_B] = cycles;
}

uint64_t link_generation(const link_t *l) { return l->page[PAGE_GENERATION]; }

int link_stop_requested(const link_t *l) { return l->page[PAGE_STOP] != 0; }

void link_set(link_t *l, int word, uint64_t value) { l->page[word] = value; }

static int write_all(int fd, const void *buf, size_t len)
{
    const uint8_t *p = buf;
    while (len) {
        ssize_t n = write(fd, p, len);
        if (n < 0 && errno == EINTR)
            continue;
        if (n <= 0)
            return -1;
        p += n;
        len -= (size_t)n;
    }
    return 0;
}

static int read_all(int fd, void *buf, size_t len)
{
    uint8_t *p = buf;
    while (len) {
        ssize_t n = read(fd, p, len);
        if (n < 0 && errno == EINTR)
            continue;
        if (n <= 0)
            return -1;
        p += n;
        len -= (size_t)n;
    }
    return 0;
}

static int send_msg(link_t *l, uint8_t type, uint8_t arg, uint32_t n, uint64_t t0, uint64_t step)
{
    uint8_t m[24];
    memset(m, 0, sizeof m);
    m[0] = type;
    m[1] = arg;
    memcpy(m + 4, &n, 4); /* x86-64 and arm64 are little-endian, as the Python side reads */
    memcpy(m + 8, &t0, 8);
    memcpy(m + 16, &step, 8);
    return write_all(l->fd, m, sizeof m);
}

int link_volts(link_t *l, uint8_t channel, uint64_t t0, uint64_t step, uint32_t n, uint16_t *mv)
{
    if (send_msg(l, MSG_VOLTS, channel, n, t0, step))
        return -1;
    return read_all(l->fd, mv, (size_t)n * sizeof(uint16_t));
}

int link_power(link_t *l, uint8_t level, uint64_t cycle)
{
    uint8_t ack;
    if (send_msg(l, MSG_POWER, level, 0, cycle, 0))
        return -1;
    return read_all(l->fd, &ack, 1);
}

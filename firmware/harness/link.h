/* The harness's two links to the Python side of the understudy bench (benchgate.sim.firmware):
 *
 *  - a stream socket (inherited descriptor): the harness asks for input voltages and reports
 *    the fixture-power pin; every message is answered before the AVR runs on (lockstep);
 *  - a shared 64-byte file (the clock page): the harness publishes the AVR's cycle count, the
 *    Python side bumps a generation number when the simulated world changes (power, unit).
 *
 * Messages (little-endian, 24 bytes): u8 type, u8 arg, u16 zero, u32 n, u64 t0, u64 step.
 *   MSG_VOLTS  arg = channel: n input voltages at cycles t0 + k*step; reply n x u16 millivolts.
 *   MSG_POWER  arg = pin level, t0 = cycle of the change; reply one byte.
 */
#ifndef LINK_H
#define LINK_H

#include <stdint.h>

enum { MSG_VOLTS = 1, MSG_POWER = 2 };

/* clock page offsets (u64 each) */
enum {
    PAGE_CYCLES_A = 0,  /* written first */
    PAGE_CYCLES_B = 1,  /* written second: a reader accepts the value when both agree */
    PAGE_GENERATION = 2,/* Python: bumped when earlier answers may be stale */
    PAGE_STATE = 3,     /* harness: 1 running, 2 exited */
    PAGE_DROPPED = 4,   /* harness: bytes the USB bridge dropped (host not reading) */
    PAGE_STOP = 5,      /* Python: 1 = exit now */
    PAGE_SENT = 6,      /* harness: bytes passed to the host */
    PAGE_TRIG_RESET = 7,/* Python: 1 = restart the A0 conversion-start statistics */
    PAGE_TRIG_COUNT = 8,/* harness: A0 conversion starts since the restart */
    PAGE_TRIG_MIN = 9,  /* harness: shortest and longest interval between them, in cycles */
    PAGE_TRIG_MAX = 10,
    PAGE_TRIG_FIRST = 11,/* harness: cycles of the first and the last of them */
    PAGE_TRIG_LAST = 12,
    PAGE_WORDS = 16
};

typedef struct {
    volatile uint64_t *page;
    int fd;
} link_t;

int link_open(link_t *l, int sock_fd, const char *page_path);
void link_publish(link_t *l, uint64_t cycles);
uint64_t link_generation(const link_t *l);
int link_stop_requested(const link_t *l);
void link_set(link_t *l, int word, uint64_t value);
/* 0 on success, -1 if the Python side has gone */
int link_volts(link_t *l, uint8_t channel, uint64_t t0, uint64_t step, uint32_t n, uint16_t *mv);
int link_power(link_t *l, uint8_t level, uint64_t cycle);

#endif

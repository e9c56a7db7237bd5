/* avr-harness: runs the reference firmware (.elf) on simavr's ATmega328P at 16 MHz, as the
 * serial ADC board of benchgate's understudy bench.
 *
 *   avr-harness --elf FILE --pty-fd N --link-fd N --page FILE [--speed X] [--crystal-hz F]
 *               [--lines] [--bridge-bytes N] [--max-seconds S]
 *
 * - USART0 is bridged to the pseudo-terminal master --pty-fd (the host opens the slave with
 *   pyserial). Bytes leave the AVR at its baud rate, in its cycle time; the bridge holds up
 *   to --bridge-bytes when the host does not read, and drops what does not fit, as a USB
 *   serial adapter does.
 * - Every ADC conversion start (simavr's ADC trigger) sets the converted pin to the circuit's
 *   voltage at that cycle, asked from the Python side over --link-fd (see link.h) in blocks
 *   along the pin's sampling grid, so the AVR and the circuit run in lockstep.
 * - Time: AVR cycles are published on the clock page; the bench clock is cycles / crystal-hz.
 *   The harness runs no faster than --speed times real time (0: as fast as it can) and, when
 *   it cannot keep up, the bench clock simply runs slower: it never sprints to catch up.
 * - D4 (fixture power) is reported to the Python side; D5 is held low with --lines.
 */
#define _GNU_SOURCE /* ppoll */
#include <errno.h>
#include <getopt.h>
#include <poll.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <time.h>
#include <unistd.h>

#include <avr_adc.h>
#include <avr_ioport.h>
#include <avr_uart.h>
#include <sim_avr.h>
#include <sim_elf.h>
#include <sim_irq.h>

#include "link.h"

#define F_AVR 16000000UL
#define NPINS 6
#define MAX_BLOCK 2048
#define GRID_TOL 8            /* cycles: a conversion start may trail its timer tick by the ISR latency */
#define CHUNK_CYCLES 4000     /* 250 us of AVR time between host I/O and pacing */
#define MAX_LAG_S 0.02        /* behind by more than this (wall), the pace restarts from now */

static double wall_s(void);

static avr_t *avr;
static link_t lnk;
static int pty_fd = -1;
static avr_irq_t *adc_irq;
static avr_irq_t *uart_in_irq;
static volatile sig_atomic_t stop_signal;

/* -- the USB bridge: bytes out of the AVR waiting for the host -------------------------- */
static uint8_t *out_buf;
static size_t out_len, out_cap;
static uint64_t out_dropped, out_sent;
static uint8_t in_buf[4096];
static size_t in_len, in_pos;
static int uart_xoff;

static void uart_out_cb(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq;
    (void)param;
    if (out_len < out_cap)
        out_buf[out_len++] = (uint8_t)value;
    else
        out_dropped++;
}

static void feed_uart(void)
{
    while (!uart_xoff && in_pos < in_len)
        avr_raise_irq(uart_in_irq, in_buf[in_pos++]);
    if (in_pos == in_len)
        in_pos = in_len = 0;
}

static void uart_xon_cb(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq;
    (void)value;
    (void)param;
    uart_xoff = 0;
    feed_uart();
}

static void uart_xoff_cb(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq;
    (void)value;
    (void)param;
    uart_xoff = 1;
}

static int pump_pty(void)
{
    if (out_len) {
        ssize_t n = write(pty_fd, out_buf, out_len);
        if (n > 0) {
            memmove(out_buf, out_buf + n, out_len - (size_t)n);
            out_len -= (size_t)n;
            out_sent += (uint64_t)n;
        } else if (n < 0 && errno != EAGAIN && errno != EINTR && errno != EIO) {
            return -1;
        }
    }
    if (in_len < sizeof in_buf) {
        ssize_t n = read(pty_fd, in_buf + in_len, sizeof in_buf - in_len);
        if (n > 0)
            in_len += (size_t)n;
        else if (n < 0 && errno != EAGAIN && errno != EINTR && errno != EIO)
            return -1;
    }
    feed_uart();
    return 0;
}

/* -- analog inputs: a cached block of voltages per pin, on that pin's sampling grid ------- */
typedef struct {
    uint64_t t0, step, gen;
    uint32_t n;
    uint16_t mv[MAX_BLOCK];
    uint64_t last, anchor; /* the previous start, and the first of the current run */
    uint32_t since;        /* starts since anchor */
    int valid;
} pin_cache_t;

static pin_cache_t pins[NPINS];
static int link_broken;
static uint64_t volt_requests, run_calls;
static double link_wait; /* wall seconds spent waiting for the Python side */

/* Follow the pin's starts: a run of evenly spaced starts (within 25 %) gives the grid step,
   averaged from the run's first start, so the ISR's entry jitter does not accumulate. */
static uint64_t track(pin_cache_t *p, uint64_t now)
{
    if (!p->last || now <= p->last) {
        p->anchor = now;
        p->since = 0;
    } else {
        uint64_t gap = now - p->last;
        if (p->since) {
            uint64_t est = (p->last - p->anchor + p->since / 2) / p->since;
            if (gap + gap / 4 > est && gap < est + est / 4) {
                p->since++;
            } else {
                p->anchor = p->last;
                p->since = 1;
            }
        } else {
            p->since = 1;
        }
    }
    p->last = now;
    return p->since ? (now - p->anchor + p->since / 2) / p->since : 0;
}

static uint16_t pin_voltage(int ch, uint64_t now)
{
    pin_cache_t *p = &pins[ch];
    uint64_t gen = link_generation(&lnk);
    uint64_t step = track(p, now);
    uint32_t n = 1;
    if (p->valid && p->gen == gen && now + GRID_TOL >= p->t0) {
        uint64_t off = now + GRID_TOL - p->t0;
        uint64_t k = off / p->step;
        if (k < p->n && off - k * p->step <= 2 * GRID_TOL)
            return p->mv[k];
    }
    /* A miss: a new block from this start on, along the grid seen so far; longer blocks as
       the run grows, never reaching further than 0.25 s ahead. */
    if (step > 0) {
        n = p->since < 8 ? 8 : p->since < 64 ? 128 : MAX_BLOCK;
        if ((uint64_t)n * step > F_AVR / 4)
            n = (uint32_t)(F_AVR / 4 / step) + 1;
        if (n > MAX_BLOCK)
            n = MAX_BLOCK;
    } else {
        step = 1;
    }
    link_publish(&lnk, now);
    double w0 = wall_s();
    if (!link_broken && link_volts(&lnk, (uint8_t)ch, now, step, n, p->mv)) {
        link_broken = 1;
        fprintf(stderr, "avr-harness: the Python side closed the link\n");
    }
    volt_requests++;
    link_wait += wall_s() - w0;
    p->valid = !link_broken;
    p->t0 = now;
    p->step = step;
    p->n = n;
    p->gen = gen;
    return link_broken ? 0 : p->mv[0];
}

/* How evenly A0's conversions start: the rate is exact when every interval is the same. */
static void trigger_stats(uint64_t now)
{
    static uint64_t last, count, lo, hi;
    if (lnk.page[PAGE_TRIG_RESET]) {
        lnk.page[PAGE_TRIG_RESET] = 0;
        count = lo = hi = 0;
        link_set(&lnk, PAGE_TRIG_FIRST, now);
    }
    link_set(&lnk, PAGE_TRIG_LAST, now);
    if (count) {
        uint64_t d = now - last;
        lo = count == 1 || d < lo ? d : lo;
        hi = d > hi ? d : hi;
        link_set(&lnk, PAGE_TRIG_MIN, lo);
        link_set(&lnk, PAGE_TRIG_MAX, hi);
    }
    last = now;
    link_set(&lnk, PAGE_TRIG_COUNT, ++count);
}

static void adc_trigger_cb(struct avr_irq_t *irq, uint32_t value, void *param)
{
    union {
        avr_adc_mux_t mux;
        uint32_t v;
    } u;
    (void)irq;
    (void)param;
    u.v = value;
    if (u.mux.kind != ADC_MUX_SINGLE || u.mux.src >= NPINS)
        return;
    avr_raise_irq(adc_irq + ADC_IRQ_ADC0 + u.mux.src, pin_voltage(u.mux.src, avr->cycle));
    if (u.mux.src == 0)
        trigger_stats(avr->cycle);
}

/* -- fixture power on D4 ------------------------------------------------------------------ */
static void power_pin_cb(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq;
    (void)param;
    link_publish(&lnk, avr->cycle);
    if (!link_broken && link_power(&lnk, value ? 1 : 0, avr->cycle))
        link_broken = 1;
}

static void no_sleep(avr_t *a, avr_cycle_count_t how_long)
{
    (void)a;
    (void)how_long; /* time is paced by the main loop, not by usleep inside the core */
}

static double wall_start;

static double wall_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void on_signal(int sig)
{
    (void)sig;
    stop_signal = 1;
}

static void usage(void)
{
    fprintf(stderr, "usage: avr-harness --elf FILE --pty-fd N --link-fd N --page FILE [--speed X] "
                    "[--crystal-hz F] [--lines] [--bridge-bytes N] [--max-seconds S]\n");
    exit(2);
}

int main(int argc, char **argv)
{
    static elf_firmware_t fw;
    const char *elf = NULL, *page = NULL;
    int link_fd = -1, lines = 0;
    double speed = 1.0, crystal = (double)F_AVR, max_seconds = 0.0;
    long bridge = 65536;
    static const struct option opts[] = {
        {"elf", required_argument, 0, 'e'},   {"pty-fd", required_argument, 0, 'p'},
        {"link-fd", required_argument, 0, 'l'}, {"page", required_argument, 0, 'g'},
        {"speed", required_argument, 0, 's'}, {"crystal-hz", required_argument, 0, 'c'},
        {"lines", no_argument, 0, 'L'},       {"bridge-bytes", required_argument, 0, 'b'},
        {"max-seconds", required_argument, 0, 'm'}, {0, 0, 0, 0}};
    int c;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'e': elf = optarg; break;
        case 'p': pty_fd = atoi(optarg); break;
        case 'l': link_fd = atoi(optarg); break;
        case 'g': page = optarg; break;
        case 's': speed = atof(optarg); break;
        case 'c': crystal = atof(optarg); break;
        case 'L': lines = 1; break;
        case 'b': bridge = atol(optarg); break;
        case 'm': max_seconds = atof(optarg); break;
        default: usage();
        }
    }
    if (!elf || !page || pty_fd < 0 || link_fd < 0 || speed < 0 || crystal <= 0 || bridge < 1)
        usage();
    signal(SIGTERM, on_signal);
    signal(SIGINT, on_signal);
    prctl(PR_SET_PDEATHSIG, SIGTERM); /* never outlive the Python side */
    if (getppid() == 1)
        return 1;
    signal(SIGPIPE, SIG_IGN);
    if (link_open(&lnk, link_fd, page)) {
        perror("avr-harness: clock page");
        return 1;
    }
    if (elf_read_firmware(elf, &fw)) {
        fprintf(stderr, "avr-harness: cannot read %s\n", elf);
        return 1;
    }
    avr = avr_make_mcu_by_name("atmega328p");
    if (!avr) {
        fprintf(stderr, "avr-harness: simavr has no atmega328p\n");
        return 1;
    }
    avr_init(avr);
    avr->log = 0;
    avr_load_firmware(avr, &fw);
    avr->frequency = F_AVR;
    avr->vcc = avr->avcc = avr->aref = 5000;
    avr->sleep = no_sleep;
    avr->run_cycle_limit = CHUNK_CYCLES; /* a sleeping core skips up to this far ahead */
    out_cap = (size_t)bridge;
    out_buf = malloc(out_cap);
    if (!out_buf)
        return 1;
    {
        uint32_t flags = 0;
        avr_ioctl(avr, AVR_IOCTL_UART_GET_FLAGS('0'), &flags);
        flags &= ~(uint32_t)(AVR_UART_FLAG_POLL_SLEEP | AVR_UART_FLAG_STDIO);
        avr_ioctl(avr, AVR_IOCTL_UART_SET_FLAGS('0'), &flags);
    }
    uart_in_irq = avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_INPUT);
    avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUTPUT), uart_out_cb, NULL);
    avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUT_XON), uart_xon_cb, NULL);
    avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUT_XOFF), uart_xoff_cb, NULL);
    adc_irq = avr_io_getirq(avr, AVR_IOCTL_ADC_GETIRQ, 0);
    avr_irq_register_notify(adc_irq + ADC_IRQ_OUT_TRIGGER, adc_trigger_cb, NULL);
    avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_IOPORT_GETIRQ('D'), 4), power_pin_cb, NULL);
    { /* the mode jumper on D5: an external level, stronger than the firmware's pull-up */
        avr_ioport_external_t jumper = {.name = 'D', .mask = 1 << 5, .value = lines ? 0 : 1 << 5};
        avr_ioctl(avr, AVR_IOCTL_IOPORT_SET_EXTERNAL('D'), &jumper);
    }

    wall_start = wall_s();
    link_set(&lnk, PAGE_STATE, 1);
    link_publish(&lnk, 0);
    {
        const double rate = speed * crystal; /* AVR cycles per wall second (0: unpaced) */
        double wall0 = wall_s();
        uint64_t cycle0 = 0;
        int rc = 0;
        while (!stop_signal && !link_stop_requested(&lnk) && !link_broken) {
            uint64_t now = avr->cycle, end = now + CHUNK_CYCLES;
            if (rate > 0) {
                double w = wall_s();
                double target = (double)cycle0 + (w - wall0) * rate;
                if ((double)now > target) { /* ahead of the pace: sleep until then or the host writes */
                    double ahead = ((double)now - target) / rate;
                    struct pollfd pf = {pty_fd, POLLIN, 0};
                    struct timespec ts;
                    if (ahead > 0.005)
                        ahead = 0.005;
                    if (ahead < 50e-6)
                        ahead = 50e-6; /* never spin: the Python side needs the cores */
                    ts.tv_sec = 0;
                    ts.tv_nsec = (long)(ahead * 1e9);
                    if (pump_pty())
                        break;
                    ppoll(&pf, 1, &ts, NULL);
                    continue;
                }
                if (target - (double)now > MAX_LAG_S * rate) { /* too slow: restart the pace here */
                    wall0 = w;
                    cycle0 = now;
                }
            }
            while (avr->cycle < end) {
                int state = avr_run(avr);
                run_calls++;
                if (state == cpu_Done || state == cpu_Crashed) {
                    fprintf(stderr, "avr-harness: the AVR stopped (state %d) at cycle %llu\n", state,
                            (unsigned long long)avr->cycle);
                    rc = 3;
                    goto out;
                }
            }
            link_publish(&lnk, avr->cycle);
            if (pump_pty()) {
                fprintf(stderr, "avr-harness: the pseudo-terminal failed: %s\n", strerror(errno));
                rc = 1;
                break;
            }
            link_set(&lnk, PAGE_DROPPED, out_dropped);
            link_set(&lnk, PAGE_SENT, out_sent);
            if (max_seconds > 0 && (double)avr->cycle >= max_seconds * crystal)
                break;
        }
    out:
        link_set(&lnk, PAGE_STATE, 2);
        fprintf(stderr, "avr-harness: %.3f s of AVR time in %.3f s, %llu steps, %llu voltage blocks "
                "(%.3f s waiting for them), %llu bytes dropped\n", (double)avr->cycle / (double)F_AVR,
                wall_s() - wall_start, (unsigned long long)run_calls, (unsigned long long)volt_requests,
                link_wait, (unsigned long long)out_dropped);
        return rc;
    }
}

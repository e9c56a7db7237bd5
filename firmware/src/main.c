/* benchgate reference firmware for the serial ADC: protocol version 1 (docs/serial-protocol.md)
 * on an ATmega328P at 16 MHz (Arduino Uno / Nano class boards).
 *
 * Pins: A0..A5 are channels 0..5 (0-5 V, AVcc reference); D4 (PD4) drives the fixture-power
 * relay (POWER ON/OFF); D5 (PD5) selects the data mode at every START and IDN? (open: framed,
 * tied to GND: lines). USART0 at BAUD, 8N1, no flow control.
 *
 * The main loop parses command lines and sends the blocks the sampler's interrupts fill:
 * a DATA frame per block (framed) or one line per code (lines), then END.
 */
#include <avr/interrupt.h>
#include <avr/io.h>
#include <avr/sleep.h>
#include <string.h>
#include <util/crc16.h>

#include "sampler.h"
#include "uart.h"

#ifndef FW_VERSION
#define FW_VERSION "1.0"
#endif
#ifndef FW_SERIAL
#define FW_SERIAL "0001"
#endif

#define PS_PER_CYCLE (1000000000000ULL / F_CPU)
_Static_assert(1000000000000ULL % F_CPU == 0, "the sample period must be a whole number of ps");

#define POWER_BIT PD4
#define MODE_BIT PD5
#define LINE_MAX 48

static timing_t timing;
static uint64_t rate_mhz = 50000000ULL; /* 50 kS/s until RATE */
static uint8_t streaming, lines_mode, cap_mask;
static uint16_t crc;

/* ------------------------------------------------------------------ output */
static void put_crc(uint8_t c)
{
    crc = _crc_xmodem_update(crc, c); /* CRC-16/CCITT-FALSE: xmodem's update from 0xFFFF */
    uart_put(c);
}

static void put_le(const void *v, uint8_t bytes) /* AVR is little-endian, as the frames are */
{
    const uint8_t *p = v;
    while (bytes--)
        put_crc(*p++);
}

static char *fmt_u32(char *end, uint32_t v)
{
    *--end = 0;
    do {
        *--end = (char)('0' + v % 10);
        v /= 10;
    } while (v);
    return end;
}

static void put_u32(uint32_t v)
{
    char buf[11];
    uart_puts(fmt_u32(buf + sizeof buf, v));
}

static void put_code_line(uint16_t v) /* "1023\n": subtractions only, no division */
{
    static const uint16_t powers[3] = {1000, 100, 10};
    uint8_t i, started = 0;
    for (i = 0; i < 3; i++) {
        uint8_t d = 0;
        while (v >= powers[i]) {
            v -= powers[i];
            d++;
        }
        if (d || started) {
            uart_put('0' + d);
            started = 1;
        }
    }
    uart_put('0' + (uint8_t)v);
    uart_put('\n');
}

static uint8_t popcount(uint8_t m)
{
    uint8_t n = 0;
    for (; m; m >>= 1)
        n += m & 1;
    return n;
}

static uint64_t period_ps; /* from the timer settings, never the ADC clock */

static void put_rate(void)
{
    uint64_t uhz = (uint64_t)F_CPU * 1000000ULL / timing_cycles(&timing);
    char buf[11];
    char *frac = fmt_u32(buf + sizeof buf, (uint32_t)(uhz % 1000000ULL) + 1000000UL);
    uart_puts("OK RATE ");
    put_u32((uint32_t)(uhz / 1000000ULL));
    uart_put('.');
    uart_puts(frac + 1); /* six digits after the leading 1 */
    uart_put('\n');
}

/* ------------------------------------------------------------------ streaming */
static uint8_t nchan;          /* channels in the capture */
static uint16_t per_frame;     /* sets per DATA frame: 128 codes */
static uint32_t max_wait;      /* ticks a waiting set may wait for its frame to fill (~50 ms) */

static void send_frame(uint8_t type, uint32_t seq, uint16_t sets)
{
    uint16_t i, n = sets * nchan, c;
    uart_put(0xA5);
    uart_put(0x5A);
    crc = 0xFFFF;
    put_crc(type);
    put_le(&seq, 4);
    put_le(&period_ps, 8);
    put_crc(cap_mask);
    put_le(&sets, 2);
    for (i = 0; i < n; i++) {
        uint16_t v = sampler_code(i);
        put_crc((uint8_t)v);
        put_crc((uint8_t)(v >> 8));
    }
    c = crc;
    uart_put((uint8_t)c);
    uart_put((uint8_t)(c >> 8));
}

/* Send what is waiting: whole frames (or lines) as they fill, a short one up to a loss, after
   ~50 ms of waiting, or at the end; then END with the number of sets taken. */
static uint8_t pump(void) /* 1 if it sent something */
{
    pending_t p;
    sampler_pending(&p);
    if (p.sets) {
        uint16_t n = p.sets < per_frame ? p.sets : per_frame;
        if (n == per_frame || p.done || p.cut || p.taken - p.seq >= max_wait) {
            if (lines_mode) {
                uint16_t i;
                for (i = 0; i < n; i++)
                    put_code_line(sampler_code(i));
            } else {
                send_frame(1, p.seq, n);
            }
            sampler_consume(n);
            return 1;
        }
        return 0;
    }
    if (p.done) {
        if (lines_mode) { /* lost sets included: the host sees them as a lost tail */
            uart_puts("END ");
            put_u32(p.taken);
            uart_put('\n');
        } else {
            send_frame(2, p.taken, 0);
        }
        streaming = 0;
        return 1;
    }
    return 0;
}

/* Nothing to do until an interrupt (a tick, a received byte): idle sleep. On the chip it saves
   power; in simavr the core then skips ahead to its next event instead of stepping through the
   polling loop, which makes the harness several times faster. */
static void idle(void)
{
    set_sleep_mode(SLEEP_MODE_IDLE);
    cli();
    if (!uart_pending()) {
        sleep_enable();
        sei(); /* the instruction after sei runs first: no wake-up is missed */
        sleep_cpu();
        sleep_disable();
    }
    sei();
}

/* ------------------------------------------------------------------ commands */
static uint8_t lines_jumper(void) { return !(PIND & _BV(MODE_BIT)); }

static int8_t parse_u32(const char *s, uint32_t *out)
{
    uint32_t v = 0;
    uint8_t base = 10, any = 0;
    if (s[0] == '0' && (s[1] == 'x' || s[1] == 'X')) {
        base = 16;
        s += 2;
    }
    for (; *s; s++) {
        uint8_t d;
        if (*s >= '0' && *s <= '9')
            d = *s - '0';
        else if (base == 16 && *s >= 'A' && *s <= 'F')
            d = *s - 'A' + 10;
        else
            return -1;
        if (v > (0xFFFFFFFFUL - d) / base)
            return -1;
        v = v * base + d;
        any = 1;
    }
    *out = v;
    return any ? 0 : -1;
}

/* "50000" or "50000.123456" -> millihertz; -1 if it is not a plain decimal number */
static int8_t parse_mhz(const char *s, uint64_t *out)
{
    uint64_t v = 0;
    uint8_t frac = 0, any = 0, in_frac = 0;
    for (; *s; s++) {
        if (*s == '.' && !in_frac) {
            in_frac = 1;
            continue;
        }
        if (*s < '0' || *s > '9' || v > 1000000000000ULL)
            return -1;
        if (in_frac) {
            if (frac < 3) {
                v = v * 10 + (uint8_t)(*s - '0');
                frac++;
            }
        } else {
            v = v * 10 + (uint8_t)(*s - '0');
        }
        any = 1;
    }
    for (; frac < 3; frac++)
        v *= 10;
    *out = v;
    return any ? 0 : -1;
}

static void reply_err(const char *text)
{
    uart_puts("ERR ");
    uart_puts(text);
    uart_put('\n');
}

static uint8_t enob(uint32_t adc_clock)
{
    /* Full 10 bits up to the datasheet's 200 kHz ADC clock; about one bit less per doubling
       beyond it: 9 to 500 kHz, 8 to 1 MHz, 7 to 2 MHz, 6 above (common practice for the
       ATmega ADC, no source). */
    if (adc_clock <= 200000UL)
        return 10;
    if (adc_clock <= 500000UL)
        return 9;
    if (adc_clock <= 1000000UL)
        return 8;
    return adc_clock <= 2000000UL ? 7 : 6;
}

static void identify(void)
{
    uint32_t adclk = timing_adc_clock(&timing);
    uart_puts("IDN benchgate,ref-adc-328p," FW_SERIAL "," FW_VERSION
              ";proto=1;bits=10;vref=5.0;channels=A0,A1,A2,A3,A4,A5;mode=");
    uart_puts(lines_jumper() ? "lines" : "framed");
    uart_puts(";adc_clock=");
    put_u32(adclk);
    uart_puts(";enob=");
    put_u32(enob(adclk));
    uart_puts(";baud=");
    put_u32(BAUD);
    uart_put('\n');
}

static void start(const char *a, const char *b)
{
    uint32_t n, mask;
    timing_t t;
    if (!a || !b || parse_u32(a, &n) || parse_u32(b, &mask)) {
        reply_err("START needs a sample count and a channel mask");
        return;
    }
    if (mask == 0 || mask >= (1UL << NCHAN)) {
        reply_err("channel mask must select some of 6 channels (1..0x3F)");
        return;
    }
    lines_mode = lines_jumper();
    if (lines_mode && popcount((uint8_t)mask) != 1) {
        reply_err("lines mode streams exactly one channel");
        return;
    }
    if (timing_for(rate_mhz, popcount((uint8_t)mask), &t)) {
        reply_err("rate too high for that many channels");
        return;
    }
    timing = t; /* same timer divider, ADC clock chosen for this channel count */
    period_ps = (uint64_t)timing_cycles(&timing) * PS_PER_CYCLE;
    nchan = popcount((uint8_t)mask);
    per_frame = 128 / nchan;
    max_wait = (uint32_t)(rate_mhz / 20000ULL) + 1;
    cap_mask = (uint8_t)mask;
    streaming = 1;
    sampler_start(&timing, n, cap_mask);
}

static void command(char *line)
{
    char *w[4] = {0, 0, 0, 0};
    uint8_t nw = 0;
    char *p;
    for (p = line; *p; p++)
        if (*p >= 'a' && *p <= 'z')
            *p -= 'a' - 'A';
    for (p = line; *p && nw < 4;) {
        while (*p == ' ' || *p == '\t')
            *p++ = 0;
        if (!*p)
            break;
        w[nw++] = p;
        while (*p && *p != ' ' && *p != '\t')
            p++;
    }
    if (nw == 0)
        return;
    if (streaming) {
        if (nw == 1 && w[0][0] == 'S' && w[0][1] == 'T' && w[0][2] == 'O' && w[0][3] == 'P' && !w[0][4]) {
            sampler_stop();
            while (streaming) /* the sets taken are sent, then END */
                (void)pump();
            uart_puts("OK STOP\n");
        } else {
            reply_err("streaming; only STOP is accepted");
        }
        return;
    }
#define IS(word, text) (strcmp((word), (text)) == 0)
    if (IS(w[0], "IDN?") && nw == 1) {
        identify();
    } else if (IS(w[0], "RATE?") && nw == 1) {
        put_rate();
    } else if (IS(w[0], "RATE") && nw == 2) {
        uint64_t want;
        timing_t t;
        if (parse_mhz(w[1], &want) || want < 1000ULL || want > MAX_RATE_HZ * 1000ULL) {
            reply_err("rate out of range 1..100000 Hz");
            return;
        }
        timing_for(want, 1, &t);
        rate_mhz = want;
        timing = t;
        put_rate();
    } else if (IS(w[0], "START") && nw == 3) {
        start(w[1], w[2]);
    } else if (IS(w[0], "STOP") && nw == 1) {
        uart_puts("OK STOP\n");
    } else if (IS(w[0], "POWER") && nw == 2 && (IS(w[1], "ON") || IS(w[1], "OFF"))) {
        if (w[1][1] == 'N')
            PORTD |= _BV(POWER_BIT);
        else
            PORTD &= ~_BV(POWER_BIT);
        uart_puts(w[1][1] == 'N' ? "OK POWER ON\n" : "OK POWER OFF\n");
    } else {
        reply_err("unknown command");
    }
}

int main(void)
{
    char line[LINE_MAX];
    uint8_t len = 0, overlong = 0;
    DDRD |= _BV(POWER_BIT);
    PORTD &= ~_BV(POWER_BIT);
    PORTD |= _BV(MODE_BIT); /* pull-up: open jumper reads framed */
    uart_init();
    sampler_init();
    timing_for(rate_mhz, 1, &timing);
    sei();
    for (;;) {
        int16_t c;
        while ((c = uart_get()) >= 0) {
            if (c == '\n' || c == '\r') {
                line[len] = 0;
                if (overlong)
                    reply_err("command too long");
                else if (len)
                    command(line);
                len = overlong = 0;
            } else if (len < LINE_MAX - 1) {
                line[len++] = (char)c;
            } else {
                overlong = 1;
            }
        }
        if (!streaming || !pump())
            idle();
    }
}

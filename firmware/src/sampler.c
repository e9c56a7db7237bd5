/* Timer-paced sampling into an interrupt-fed ring of codes.
 *
 * Timer1 runs in CTC mode (TOP = OCR1A). Its compare-A interrupt starts the conversion of the
 * set's first channel, a fixed number of cycles after the tick (a conversion started from the
 * compare interrupt runs the same on the chip and in simavr, whose Timer1 compare-B
 * auto-trigger converted only once). The sample period is the timer's, so the ADC clock
 * prescaler can never change the time base.
 *
 * One channel: the compare interrupt reads the previous result just before starting the next
 * conversion (one interrupt per sample). More channels: the ADC interrupt reads each code and
 * starts the set's next channel.
 *
 * Losses are never hidden: a tick whose set cannot be taken (the ring is full, or the previous
 * set is still converting) is still counted, and the next set taken carries a gap marker with
 * its index, so the frames' seq jumps over the lost sets.
 */
#include <avr/interrupt.h>
#include <avr/io.h>

#include "sampler.h"

#define INLINE static inline __attribute__((always_inline))
#define RING_MASK (RING_CODES - 1)

/* CPU cycles one conversion may cost beyond its 13 ADC clocks: the start waits for the next
   ADC clock edge (up to one ADC clock) and the interrupts take about 40 cycles. */
#define ISR_CYCLES 40

uint16_t ring[RING_CODES];          /* shared with tick.S */
volatile uint16_t wcount;     /* codes of complete sets written (ISR), wraps */
volatile uint16_t rcount;     /* codes consumed (main loop), wraps */
uint16_t *volatile wp;                 /* next code slot of the set in progress (ISR) */
volatile uint16_t ticks;      /* ticks since START, low 16 bits (ISR) */
static uint32_t taken32;             /* main loop: ticks since START, extended */
static uint16_t taken_lo;            /* main loop: the ticks value taken32 was extended from */
static uint32_t target;              /* main loop: sets wanted (0: until STOP) */
static volatile uint8_t inflight;    /* a set is being converted */
static volatile uint8_t lost;        /* ticks were lost since the last set taken */
static volatile uint8_t room;        /* the next tick may take a set */
volatile uint8_t fast;               /* tick.S may take the next tick alone (see there) */
static volatile uint8_t stopping;    /* no more sets are started */
static volatile uint8_t done;
static uint8_t nch, cpos;            /* channels per set, channel position in flight */
static uint8_t chan[NCHAN];          /* ADMUX value of each position in a set */
uint8_t adcsra_go;            /* ADEN | ADSC | prescaler (| ADIE with several channels) */
static volatile uint16_t gap_at[NGAPS];  /* wcount at which a set after a loss begins */
static volatile uint16_t gap_tick[NGAPS];/* and its tick (low 16 bits) */
static volatile uint8_t gap_w, gap_r;    /* gap ring: written by the ISR, read by the main loop */
static uint32_t next_seq;            /* main loop: index of the oldest waiting set */

static const uint16_t timer_div[] = {1, 8, 64, 256, 1024};

int8_t timing_for(uint64_t rate_mhz, uint8_t nchan, timing_t *t)
{
    uint64_t cycles;
    uint8_t i;
    if (rate_mhz == 0 || nchan == 0)
        return -1;
    cycles = ((uint64_t)F_CPU * 1000ULL + rate_mhz / 2) / rate_mhz;
    for (i = 0; i < 5; i++) {
        uint64_t top = (cycles + timer_div[i] / 2) / timer_div[i];
        if (top <= 65536ULL) {
            if (top < 2)
                top = 2;
            t->ocr = (uint16_t)(top - 1);
            t->tcs = i + 1;
            t->tdiv = timer_div[i];
            break;
        }
    }
    if (i == 5) {
        t->ocr = 65535;
        t->tcs = 5;
        t->tdiv = 1024;
    }
    cycles = timing_cycles(t);
    /* The slowest ADC clock whose conversions for all channels fit into one period:
       /128 at 16 MHz is 125 kHz, inside the datasheet's 50-200 kHz for full accuracy. */
    for (i = 7; i >= 2; i--) {
        uint32_t adiv = 1UL << i;
        if ((uint32_t)nchan * (14UL * adiv + ISR_CYCLES) + ISR_CYCLES <= cycles) {
            t->adps = i;
            return 0;
        }
    }
    t->adps = 2;
    return -1;
}

uint32_t timing_cycles(const timing_t *t)
{
    return (uint32_t)t->tdiv * ((uint32_t)t->ocr + 1);
}

uint32_t timing_adc_clock(const timing_t *t)
{
    return F_CPU >> t->adps;
}

void sampler_init(void)
{
    DIDR0 = 0x3F; /* A0..A5: digital input buffers off (less noise, no leakage) */
    ADMUX = _BV(REFS0);
    ADCSRA = 0;
    TCCR1A = 0;
    TCCR1B = 0;
    TIMSK1 = 0;
}

/* Whether the next tick may take a set: room for it in the ring (after a loss, for a whole
   frame: whole frames are dropped), and for a gap marker. */
INLINE void update_room(void)
{
    uint16_t used = wcount - rcount;
    uint16_t need = lost ? 128 + 2 * RING_CODES / 256 : 2 * nch;
    room = !stopping && used + need <= RING_CODES && ((gap_w + 1) & (NGAPS - 1)) != gap_r;
}

void sampler_start(const timing_t *t, uint32_t n, uint8_t mask)
{
    uint8_t i, k = 0;
    for (i = 0; i < NCHAN; i++)
        if (mask & (1 << i))
            chan[k++] = _BV(REFS0) | i;
    cli();
    TCCR1B = 0;
    TIMSK1 = 0;
    wcount = rcount = ticks = 0;
    wp = ring;
    taken32 = 0;
    taken_lo = 0;
    target = n;
    next_seq = 0;
    inflight = lost = stopping = done = fast = 0;
    gap_w = gap_r = 0;
    nch = k;
    cpos = 0;
    adcsra_go = _BV(ADEN) | _BV(ADSC) | t->adps | (k > 1 ? _BV(ADIE) : 0);
    update_room();
    sei();
    /* One conversion to wake the ADC (the first after enabling takes 25 ADC clocks), so every
       conversion of the capture takes the same 13. */
    ADMUX = chan[0];
    ADCSRA = _BV(ADEN) | _BV(ADSC) | _BV(ADIF) | t->adps;
    while (ADCSRA & _BV(ADSC))
        ;
    ADCSRA = _BV(ADEN) | _BV(ADIF) | t->adps; /* clear the flag before any interrupt is enabled */
    ADCSRA = adcsra_go & ~_BV(ADSC);
    TCNT1 = 0;
    OCR1A = t->ocr;
    TIFR1 = _BV(OCF1A);
    TIMSK1 = _BV(OCIE1A);
    TCCR1B = _BV(WGM12) | t->tcs; /* CTC, TOP = OCR1A: the timer starts now */
}

/* Interrupts are blocked only for single 16-bit reads or writes here, so the tick that starts
   a conversion is never held back by more than a few cycles. */
INLINE uint16_t atomic_read(volatile uint16_t *v)
{
    uint16_t x;
    cli();
    x = *v;
    sei();
    return x;
}

/* Extend the ISR's 16-bit tick count (called often enough: at least every 65536 ticks). */
static void extend(void)
{
    uint16_t t = atomic_read(&ticks);
    taken32 += (uint16_t)(t - taken_lo);
    taken_lo = t;
}

static uint32_t extend_tick(uint16_t t) /* a tick number seen not long ago, to 32 bits */
{
    return taken32 - (uint16_t)(taken_lo - t);
}

static void halt_sets(void) /* no set is started any more: the timer and its interrupt off */
{
    stopping = 1;
    room = 0;
    fast = 0;
    TCCR1B = 0;
    TIMSK1 = 0;
}

static void keep_converted(void) /* the one-channel set just converted goes to the ring */
{
    *wp = ADC;
    wp = wp + 1 == ring + RING_CODES ? ring : wp + 1;
    wcount++;
    inflight = 0;
}

void sampler_stop(void)
{
    cli();
    halt_sets();
    if (inflight && nch == 1) { /* the set in flight is completed, not dropped */
        while (ADCSRA & _BV(ADSC))
            ;
        keep_converted();
    }
    sei();
    while (inflight) /* several channels: the ADC interrupt completes the set */
        ;
    extend();
    if (!target || taken32 < target)
        target = taken32; /* END reports what was taken (lost sets included) */
    done = 1;
}

void sampler_pending(pending_t *p)
{
    uint16_t avail, r = rcount;
    uint8_t gr = gap_r;
    uint32_t limit;
    extend();
    if (target && taken32 >= target && !done) { /* the last set has been started */
        cli();
        halt_sets();
        sei();
        if (nch == 1 && inflight) {
            while (ADCSRA & _BV(ADSC))
                ;
            cli();
            if (inflight)
                keep_converted();
            sei();
        }
        while (inflight)
            ;
        done = 1;
    }
    /* gap entries are complete before gap_w moves past them, and only this side moves gap_r */
    if (gr != gap_w && atomic_read(&gap_at[gr]) == r) { /* sets were lost just before the oldest one */
        next_seq = extend_tick(atomic_read(&gap_tick[gr]));
        gap_r = gr = (gr + 1) & (NGAPS - 1);
    }
    avail = atomic_read(&wcount) - r;
    p->cut = 0;
    if (gr != gap_w && (uint16_t)(atomic_read(&gap_at[gr]) - r) <= avail) {
        avail = atomic_read(&gap_at[gr]) - r; /* up to the next loss */
        p->cut = 1;
    }
    p->seq = next_seq;
    p->sets = avail / nch;
    p->taken = target && taken32 > target ? target : taken32;
    p->done = done;
    limit = target ? target : 0xFFFFFFFFUL; /* ticks past the wanted count are not sent */
    if (p->seq >= limit)
        p->sets = 0;
    else if (p->sets > limit - p->seq)
        p->sets = (uint16_t)(limit - p->seq);
    if (done && p->sets == 0)
        p->cut = 0;
}

uint16_t sampler_code(uint16_t i) { return ring[(rcount + i) & RING_MASK]; }

void sampler_consume(uint16_t sets)
{
    uint16_t r = rcount + sets * nch;
    next_seq += sets;
    cli();
    rcount = r;
    sei();
}

/* The compare-A tick when tick.S's fast path does not apply: the first set, losses and the
   set after them, several channels, stopping. */
void sampler_slow_tick(void)
{
    uint8_t s = ADCSRA;
    uint16_t v = ADC; /* one channel: the previous result, read before the next start */
    uint8_t go = room && !(s & _BV(ADSC)) && !(nch > 1 && inflight);
    if (go)
        ADCSRA = adcsra_go;
    if (nch == 1 && inflight && !(s & _BV(ADSC))) {
        uint16_t *p = wp;
        *p++ = v;
        wp = p == ring + RING_CODES ? ring : p;
        wcount++;
    }
    ticks++;
    if (go) {
        if (lost) { /* the set taken now follows lost ones: mark where and which */
            uint8_t g = gap_w;
            gap_at[g] = wcount;
            gap_tick[g] = ticks - 1;
            gap_w = (g + 1) & (NGAPS - 1);
            lost = 0;
        }
        inflight = 1;
    } else if (!(nch == 1 && inflight && (s & _BV(ADSC)))) {
        inflight = inflight && nch > 1;
        lost = 1;
    } else {
        lost = 1;
    }
    if (nch == 1 && !go && !(s & _BV(ADSC)))
        inflight = 0;
    update_room();
    fast = nch == 1 && inflight && !lost && room;
}

ISR(ADC_vect) /* several channels: each code, then the set's next channel */
{
    uint16_t *p = wp;
    *p++ = ADC;
    wp = p == ring + RING_CODES ? ring : p;
    if (++cpos < nch) {
        ADMUX = chan[cpos];
        ADCSRA = adcsra_go;
        return;
    }
    cpos = 0;
    ADMUX = chan[0];
    wcount += nch;
    inflight = 0;
}

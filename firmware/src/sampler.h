/* Timer-paced sampling into an interrupt-fed ring of codes (see sampler.c). */
#ifndef SAMPLER_H
#define SAMPLER_H

#include <stdint.h>

#define NCHAN 6          /* A0..A5 (ADC0..ADC5 on port C) */
#define RING_CODES 512   /* 1 KiB of codes: half the 2 KiB RAM */
#define NGAPS 8          /* losses remembered until the main loop has sent up to them */
#define MAX_RATE_HZ 100000UL

/* Timer and ADC settings chosen together for a rate and a channel count. */
typedef struct {
    uint16_t ocr;      /* Timer1 TOP (OCR1A): divider - 1 */
    uint8_t tcs;       /* Timer1 clock select bits CS12..CS10 */
    uint16_t tdiv;     /* Timer1 prescaler: 1, 8, 64, 256 or 1024 */
    uint8_t adps;      /* ADC prescaler select bits ADPS2..ADPS0 */
} timing_t;

/* Fill *t for `rate_mhz` (millihertz) and `nchan` channels; 0 on success, -1 if the
   conversions of one set cannot fit into one period even at the fastest ADC clock. */
int8_t timing_for(uint64_t rate_mhz, uint8_t nchan, timing_t *t);
uint32_t timing_cycles(const timing_t *t);   /* CPU cycles per sample period */
uint32_t timing_adc_clock(const timing_t *t); /* ADC clock in Hz */

void sampler_init(void);
void sampler_start(const timing_t *t, uint32_t n, uint8_t mask);
void sampler_stop(void);      /* stop now; the set in progress is completed */

/* The main loop's side: sets waiting, in order. */
typedef struct {
    uint32_t seq;      /* index of the first waiting set since START */
    uint16_t sets;     /* consecutive sets from seq on (up to the next loss) */
    uint32_t taken;    /* sets taken or lost since START */
    uint8_t done;      /* no more sets will come */
    uint8_t cut;       /* sets were lost right after the waiting ones */
} pending_t;

void sampler_pending(pending_t *p);
uint16_t sampler_code(uint16_t i);   /* code i of the waiting ones (0 = oldest) */
void sampler_consume(uint16_t sets); /* the oldest `sets` sets have been sent */

#endif

; Timer1 compare-A interrupt (the sample tick), fast path in assembly.
;
; With one channel and nothing unusual (sampler.c sets `fast`), a tick reads the previous
; conversion's result, starts the next conversion a fixed 34 cycles after the tick, stores the
; code in the ring and counts it: about 100 cycles, where the compiled C took about 190 and
; left the main loop too little time to feed the UART at 50 kS/s and 2 Mbaud. Everything else
; goes to sampler_slow_tick() in C.
#include <avr/io.h>

#define RING_CODES 512

        .section .text.__vector_11,"ax",@progbits
        .global __vector_11
__vector_11:
        push    r24
        in      r24, _SFR_IO_ADDR(SREG)
        push    r24
        push    r25
        lds     r24, fast
        tst     r24
        brne    0f
        rjmp    slow
0:
        lds     r24, ADCSRA
        sbrc    r24, ADSC               ; the previous conversion is not done: the slow path
        rjmp    slow
        push    r30
        push    r31
        lds     r30, ADCL               ; the previous result, before the next start
        lds     r31, ADCH
        lds     r24, adcsra_go
        sts     ADCSRA, r24             ; start: 34 cycles after the tick on this path
        push    r26
        push    r27
        lds     r26, wp
        lds     r27, wp+1
        st      X+, r30
        st      X+, r31
        ldi     r24, hi8(ring + 2 * RING_CODES)
        cpi     r26, lo8(ring + 2 * RING_CODES)
        cpc     r27, r24
        brne    1f
        ldi     r26, lo8(ring)
        ldi     r27, hi8(ring)
1:      sts     wp, r26
        sts     wp+1, r27
        lds     r24, wcount             ; one more code of a complete set
        lds     r25, wcount+1
        adiw    r24, 1
        sts     wcount, r24
        sts     wcount+1, r25
        lds     r26, ticks
        lds     r27, ticks+1
        adiw    r26, 1
        sts     ticks, r26
        sts     ticks+1, r27
        lds     r26, rcount             ; used = wcount - rcount; the next tick stays on this
        lds     r27, rcount+1           ; path while it leaves room for two more codes
        sub     r24, r26
        sbc     r25, r27
        subi    r24, lo8(RING_CODES - 1)
        sbci    r25, hi8(RING_CODES - 1)
        brcs    2f
        clr     r24
        sts     fast, r24
2:      pop     r27
        pop     r26
        pop     r31
        pop     r30
        rjmp    out

slow:   push    r0
        push    r1
        clr     r1
        push    r18
        push    r19
        push    r20
        push    r21
        push    r22
        push    r23
        push    r26
        push    r27
        push    r30
        push    r31
        call    sampler_slow_tick
        pop     r31
        pop     r30
        pop     r27
        pop     r26
        pop     r23
        pop     r22
        pop     r21
        pop     r20
        pop     r19
        pop     r18
        pop     r1
        pop     r0
out:    pop     r25
        pop     r24
        out     _SFR_IO_ADDR(SREG), r24
        pop     r24
        reti

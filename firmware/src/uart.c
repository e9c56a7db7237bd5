/* USART0 at BAUD with U2X0 (16 MHz / 8 / (UBRR0 + 1): 2 Mbaud exact at UBRR0 = 0). */
#include <avr/interrupt.h>
#include <avr/io.h>

#include "uart.h"

#define RX_SIZE 64 /* a power of two */

static volatile uint8_t rx_buf[RX_SIZE];
static volatile uint8_t rx_head, rx_tail;
static volatile uint16_t rx_lost;

void uart_init(void)
{
    UCSR0A = _BV(U2X0); /* before UBRR0: simavr takes the double-speed bit when UBRR0 is written */
    UBRR0 = (uint16_t)((F_CPU + 4UL * BAUD) / (8UL * BAUD) - 1);
    UCSR0C = _BV(UCSZ01) | _BV(UCSZ00);
    UCSR0B = _BV(RXEN0) | _BV(TXEN0) | _BV(RXCIE0);
}

void uart_put(uint8_t c)
{
    while (!(UCSR0A & _BV(UDRE0)))
        ;
    UDR0 = c;
}

void uart_puts(const char *s)
{
    while (*s)
        uart_put((uint8_t)*s++);
}

int16_t uart_get(void)
{
    uint8_t c;
    if (rx_head == rx_tail)
        return -1;
    c = rx_buf[rx_tail];
    rx_tail = (rx_tail + 1) & (RX_SIZE - 1);
    return c;
}

uint8_t uart_pending(void) { return rx_head != rx_tail; }

uint16_t uart_overflows(void)
{
    uint16_t n;
    cli();
    n = rx_lost;
    sei();
    return n;
}

ISR(USART_RX_vect)
{
    uint8_t c = UDR0;
    uint8_t next = (rx_head + 1) & (RX_SIZE - 1);
    if (next == rx_tail) {
        rx_lost++;
        return;
    }
    rx_buf[rx_head] = c;
    rx_head = next;
}

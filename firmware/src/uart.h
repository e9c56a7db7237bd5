/* USART0: 8N1 at BAUD (double speed), received bytes through an interrupt-fed ring. */
#ifndef UART_H
#define UART_H

#include <stdint.h>

void uart_init(void);
void uart_put(uint8_t c);            /* wait for room, then send */
void uart_puts(const char *s);
int16_t uart_get(void);              /* next received byte, or -1 */
uint8_t uart_pending(void);          /* a received byte is waiting */
uint16_t uart_overflows(void);       /* received bytes lost to a full ring */

#endif

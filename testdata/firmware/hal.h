/*
 * hal.h - the hardware layer of the reference loop.
 *
 * loop.c calls only these five functions. A port to a real microcontroller fills them in
 * (a few lines each, from the part's reference manual); host/hal_host.c is the version the
 * tests use, with a simulated plant and clock.
 *
 * Nothing here may block for long: loop_poll() is called in a tight main loop and the
 * sample instants come from micros().
 */
#ifndef CAPLOOP_HAL_H
#define CAPLOOP_HAL_H

#include <stdint.h>

/*
 * adc_read: start a conversion of the capacitor node (or the sense point), wait for it
 * and return the code, 0 .. 2^adc_bits - 1. Called once per sample period, right after
 * the sample instant. A conversion takes microseconds, so waiting for it is fine.
 */
uint16_t adc_read(void);

/*
 * drive_set: set the charging pin for the coming sample period.
 *   u =  1  charge:    pin an output, driven high
 *   u =  0  hold:      pin an input (high impedance), the capacitor keeps its charge
 *   u = -1  discharge: pin an output, driven low
 * A two-state loop only uses 1 and -1, so a plain push-pull output will do for it.
 */
void drive_set(int8_t u);

/*
 * byte_write: send one byte of telemetry to the host (UART, USB serial). It may wait
 * while the transmit buffer is full; a ring buffer emptied by an interrupt keeps the loop
 * on time (see the README for the line rate a baud rate carries).
 */
void byte_write(uint8_t b);

/*
 * byte_read: one byte the host sent, 0 .. 255, or -1 at once when none is waiting.
 * Never blocks.
 */
int16_t byte_read(void);

/*
 * micros: a free-running microsecond clock. It may wrap at 2^32; the loop only uses
 * differences.
 */
uint32_t micros(void);

#endif

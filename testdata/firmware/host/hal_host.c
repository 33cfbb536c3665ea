/*
 * hal_host.c - the hardware layer of the reference loop on a host computer, for tests:
 * the firmware in the loop. The circuit is simulated by a plant program on the other end
 * of two pipes, the serial port is a pseudo-terminal, and the clock is simulated, so the
 * loop runs as fast as the plant answers.
 *
 * File descriptors (set up by the program that starts this one):
 *   3  plant -> firmware: one line per reading, the ADC code: "517\n"
 *   4  firmware -> plant: "d <u>\n" when the drive changes hands (every sample), and
 *                         "a <t_us>\n" to read the ADC at board time t_us; the plant moves
 *                         the circuit from the last reading to t_us under the last drive
 *                         and answers with the code
 *   5  the serial port: the master side of a pseudo-terminal
 * When the plant closes its pipe the run is over: the telemetry is flushed and the
 * program exits with status 0.
 *
 * The clock: every call of micros() returns the simulated time and then moves it on by
 * tick_us (a poll of the main loop takes one tick), so the samples fall exactly on the
 * grid of the sample period when the period is a multiple of the tick.
 *
 * Arguments are key=value: vref_mv adc_bits supply_mv r_ohm c_pf load_ohm (the board),
 * sp mode deadband period_us (the start-up settings; mode is two-state or three-state)
 * and tick_us.
 */
#define _POSIX_C_SOURCE 200809L

#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../hal.h"
#include "../loop.h"

enum { FD_PLANT_IN = 3, FD_PLANT_OUT = 4, FD_SERIAL = 5 };

static FILE *plant_in;
static FILE *plant_out;
static uint32_t clock_us;     /* simulated time of the next micros() call */
static uint32_t last_read_us; /* what the last micros() call returned */
static uint32_t tick_us = 50;

static unsigned char tx[4096];
static size_t tx_len;
static unsigned char rx[256];
static size_t rx_pos, rx_len;

static void tx_flush(void)
{
    size_t off = 0;
    while (off < tx_len) {
        ssize_t w = write(FD_SERIAL, tx + off, tx_len - off);
        if (w > 0) {
            off += (size_t)w;
        } else if (w < 0 && errno == EAGAIN) {
            /* No one is reading the port: wait up to a second, then drop the bytes, as a
             * USB serial device with no program on the other end does. */
            struct pollfd p = {FD_SERIAL, POLLOUT, 0};
            if (poll(&p, 1, 1000) <= 0) {
                break;
            }
        } else if (w < 0 && errno == EINTR) {
            continue;
        } else {
            break; /* no one on the port: the bytes are lost, as on a real cable */
        }
    }
    tx_len = 0;
}

static void finish(void)
{
    tx_flush();
    exit(0);
}

uint16_t adc_read(void)
{
    char line[32];
    unsigned long code;
    char *end;
    fprintf(plant_out, "a %lu\n", (unsigned long)last_read_us);
    if (fflush(plant_out) != 0 || fgets(line, sizeof line, plant_in) == NULL) {
        finish();
    }
    code = strtoul(line, &end, 10);
    if (end == line || code > 0xffffUL) {
        fprintf(stderr, "hal_host: bad answer from the plant\n");
        exit(2);
    }
    return (uint16_t)code;
}

void drive_set(int8_t u)
{
    fprintf(plant_out, "d %d\n", (int)u); /* sent with the next reading */
}

/* Telemetry leaves in chunks, as from a USB serial device: at the end of a line once
 * FLUSH_BYTES are waiting or FLUSH_US of board time have passed since the last chunk.
 * Writing every line on its own would make the run as slow as the reader's wake-ups. */
enum { FLUSH_BYTES = 512, FLUSH_US = 5000 };
static uint32_t flushed_us;

void byte_write(uint8_t b)
{
    tx[tx_len++] = b;
    if (tx_len == sizeof tx ||
        (b == '\n' && (tx_len >= FLUSH_BYTES || (uint32_t)(clock_us - flushed_us) >= FLUSH_US))) {
        tx_flush();
        flushed_us = clock_us;
    }
}

int16_t byte_read(void)
{
    if (rx_pos == rx_len) {
        struct pollfd p = {FD_SERIAL, POLLIN, 0};
        ssize_t n;
        if (poll(&p, 1, 0) <= 0 || (p.revents & POLLIN) == 0) {
            return -1;
        }
        n = read(FD_SERIAL, rx, sizeof rx);
        if (n <= 0) {
            return -1;
        }
        rx_pos = 0;
        rx_len = (size_t)n;
    }
    return rx[rx_pos++];
}

uint32_t micros(void)
{
    last_read_us = clock_us;
    clock_us += tick_us;
    return last_read_us;
}

static unsigned long number(const char *key, const char *v)
{
    char *end;
    unsigned long x;
    errno = 0;
    x = strtoul(v, &end, 10);
    if (errno != 0 || end == v || *end != '\0') {
        fprintf(stderr, "hal_host: %s wants a whole number\n", key);
        exit(2);
    }
    return x;
}

int main(int argc, char **argv)
{
    struct loop_board board = {5000, 10, 5000, 0, 0, 0};
    struct loop_settings set = {512, LOOP_THREE_STATE, 4, 1000};
    struct loop lp;
    int i, flags;
    for (i = 1; i < argc; i++) {
        const char *a = argv[i];
        const char *v = strchr(a, '=');
        size_t kn;
        if (v == NULL) {
            fprintf(stderr, "hal_host: arguments are key=value\n");
            return 2;
        }
        kn = (size_t)(v - a);
        v++;
#define KEY(k) (kn == sizeof(k) - 1 && strncmp(a, k, kn) == 0)
        if (KEY("vref_mv")) {
            board.vref_mv = (uint16_t)number("vref_mv", v);
        } else if (KEY("adc_bits")) {
            board.adc_bits = (uint8_t)number("adc_bits", v);
        } else if (KEY("supply_mv")) {
            board.supply_mv = (uint16_t)number("supply_mv", v);
        } else if (KEY("r_ohm")) {
            board.r_ohm = (uint32_t)number("r_ohm", v);
        } else if (KEY("c_pf")) {
            board.c_pf = (uint32_t)number("c_pf", v);
        } else if (KEY("load_ohm")) {
            board.load_ohm = (uint32_t)number("load_ohm", v);
        } else if (KEY("sp")) {
            set.sp = (uint16_t)number("sp", v);
        } else if (KEY("mode")) {
            set.mode = strcmp(v, "two-state") == 0 ? LOOP_TWO_STATE : LOOP_THREE_STATE;
        } else if (KEY("deadband")) {
            set.deadband = (uint16_t)number("deadband", v);
        } else if (KEY("period_us")) {
            set.period_us = (uint32_t)number("period_us", v);
        } else if (KEY("tick_us")) {
            tick_us = (uint32_t)number("tick_us", v);
        } else {
            fprintf(stderr, "hal_host: unknown argument %.*s\n", (int)kn, a);
            return 2;
        }
#undef KEY
    }
    if (tick_us == 0) {
        tick_us = 1;
    }
    plant_in = fdopen(FD_PLANT_IN, "r");
    plant_out = fdopen(FD_PLANT_OUT, "w");
    if (plant_in == NULL || plant_out == NULL) {
        fprintf(stderr, "hal_host: no plant on descriptors 3 and 4\n");
        return 2;
    }
    flags = fcntl(FD_SERIAL, F_GETFL);
    if (flags < 0 || fcntl(FD_SERIAL, F_SETFL, flags | O_NONBLOCK) < 0) {
        fprintf(stderr, "hal_host: no serial port on descriptor 5\n");
        return 2;
    }
    loop_init(&lp, &board, &set);
    for (;;) {
        loop_poll(&lp);
    }
}

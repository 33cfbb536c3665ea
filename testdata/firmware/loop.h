/*
 * loop.h - the reference firmware loop of caploop's line protocol.
 *
 * A digital pin charges a capacitor through a resistor; the ADC reads the node back once
 * per sample period; the loop charges, holds or discharges to follow a setpoint, and
 * reports every sample as a line of telemetry:
 *
 *     t=123456 n=17 sp=512 pv=498 u=1
 *
 * with meta lines at start-up and after every change. It takes these lines from the
 * host (LF or CRLF terminated, at most LOOP_LINE_MAX bytes):
 *
 *     set sp=600                 setpoint, counts            -> # setpoint 600 held
 *     set mode=two-state         or three-state              -> # mode=two-state
 *     set deadband=9             hold band half-width, counts -> # deadband=9
 *     set period_us=500          sample period, microseconds -> # period_us=500
 *     info                       the meta lines and the accepts line:
 *                                # accepts=sp,mode,deadband,period_us
 *
 * Several key=value pairs may share one set line. A bad line or value is answered with a
 * comment "# error: ..." and changes nothing; the host's text is never echoed.
 *
 * Portable C99: no dynamic memory, no floating point, no standard library beyond
 * <stdint.h>; the hardware is reached only through hal.h.
 *
 * Every sample is reported. A line is about 35 bytes, so a UART at 115200 baud carries
 * one about every 3 ms: choose a period of 4 ms or more there, or a faster link (a USB
 * serial port runs at its own speed whatever the baud rate says).
 */
#ifndef CAPLOOP_LOOP_H
#define CAPLOOP_LOOP_H

#include <stdint.h>

/* Longest host line taken, bytes without the terminator; longer lines are refused. */
#ifndef LOOP_LINE_MAX
#define LOOP_LINE_MAX 64
#endif

/* The range of sample periods set period_us takes, microseconds. */
#ifndef LOOP_PERIOD_MIN_US
#define LOOP_PERIOD_MIN_US 50u
#endif
#ifndef LOOP_PERIOD_MAX_US
#define LOOP_PERIOD_MAX_US 1000000u
#endif

/* Drive states, the numbers of u= in the protocol. */
#define LOOP_DISCHARGE (-1)
#define LOOP_HOLD 0
#define LOOP_CHARGE 1

/* Controller modes. */
enum loop_mode {
    LOOP_TWO_STATE = 2,   /* pv < sp: charge, else discharge */
    LOOP_THREE_STATE = 3  /* pv - sp > deadband: discharge; < -deadband: charge; else hold */
};

/*
 * The board: what the meta lines say about the circuit. Fixed by the hardware, so the
 * host cannot change it. A zero r, c or load is "not said" and left out of the meta line.
 */
struct loop_board {
    uint16_t vref_mv;   /* ADC reference, millivolts */
    uint8_t adc_bits;   /* ADC resolution, 4 .. 16 bits */
    uint16_t supply_mv; /* pin high level, millivolts */
    uint32_t r_ohm;     /* series resistor, ohms */
    uint32_t c_pf;      /* capacitor, picofarads */
    uint32_t load_ohm;  /* load from the node to ground, ohms (0: none said) */
};

/* The settings the host may change with set; these are the values at start-up. */
struct loop_settings {
    uint16_t sp;        /* setpoint, counts */
    uint8_t mode;       /* enum loop_mode */
    uint16_t deadband;  /* counts, three-state only */
    uint32_t period_us; /* sample period */
};

/* The running loop. Treat as opaque; one per output. */
struct loop {
    struct loop_board board;
    struct loop_settings set;
    uint32_t next_us;   /* instant of the next sample */
    uint32_t last_us;   /* instant of the last sample (a new period starts there) */
    uint32_t n;         /* sequence number of the next sample */
    uint16_t line_len;  /* bytes of the host line so far */
    uint8_t line_over;  /* the host line is too long: drop it */
    char line[LOOP_LINE_MAX + 1];
};

/*
 * loop_init checks the board and settings (a bad setting falls back to a safe one: the
 * setpoint clamped to full scale, the deadband to a quarter of it, the period into range),
 * sets the pin to hold, prints a start-up comment, the meta lines and the accepts line,
 * and schedules the first sample one period later.
 */
void loop_init(struct loop *lp, const struct loop_board *board, const struct loop_settings *set);

/*
 * loop_poll runs the sample when it is due (read, decide, drive, report) and then takes
 * the host's waiting bytes. Call it as often as possible from the main loop.
 */
void loop_poll(struct loop *lp);

/* loop_decide is the control rule alone: the drive for reading pv at setpoint sp. */
int8_t loop_decide(uint8_t mode, uint16_t deadband, uint16_t sp, uint16_t pv);

#endif

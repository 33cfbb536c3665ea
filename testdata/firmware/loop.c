/*
 * loop.c - the reference firmware loop of caploop's line protocol. See loop.h for what it
 * does and hal.h for the hardware it needs.
 */
#include "loop.h"
#include "hal.h"

/* Bits of a meta line, one per key. */
enum {
    M_VREF = 1u << 0,
    M_BITS = 1u << 1,
    M_PERIOD = 1u << 2,
    M_MODE = 1u << 3,
    M_DEADBAND = 1u << 4,
    M_SUPPLY = 1u << 5,
    M_R = 1u << 6,
    M_C = 1u << 7,
    M_LOAD = 1u << 8
};

/* The first meta line says how to read the data, the second what the circuit is. */
#define META_LOOP (M_VREF | M_BITS | M_PERIOD | M_MODE | M_DEADBAND)
#define META_PARTS (M_SUPPLY | M_R | M_C | M_LOAD)

/* ---- output ---------------------------------------------------------------------- */

static void put_str(const char *s)
{
    while (*s != '\0') {
        byte_write((uint8_t)*s);
        s++;
    }
}

static void put_u32(uint32_t v)
{
    char d[10];
    unsigned i = 0;
    do {
        d[i++] = (char)('0' + v % 10u);
        v /= 10u;
    } while (v != 0u);
    while (i > 0u) {
        byte_write((uint8_t)d[--i]);
    }
}

static void put_i8(int8_t v)
{
    if (v < 0) {
        byte_write('-');
        put_u32((uint32_t)(-(int16_t)v));
    } else {
        put_u32((uint32_t)v);
    }
}

/* Millivolts as volts with the fewest digits: 5000 -> 5, 3300 -> 3.3, 1234 -> 1.234. */
static void put_mv(uint16_t mv)
{
    uint32_t frac = mv % 1000u;
    put_u32(mv / 1000u);
    if (frac != 0u) {
        uint32_t div = 100u;
        byte_write('.');
        while (frac != 0u) {
            byte_write((uint8_t)('0' + frac / div));
            frac %= div;
            div /= 10u;
        }
    }
}

/* A whole number with the largest SI prefix that keeps it whole: 47000 -> 47k. The
 * prefixes are three apart: p[0] for v itself, p[1] for v / 1000, p[2] for v / 10^6. */
static void put_si(uint32_t v, const char *p)
{
    unsigned i = 0;
    while (i < 2u && v != 0u && v % 1000u == 0u && p[i + 1u] != '\0') {
        v /= 1000u;
        i++;
    }
    put_u32(v);
    if (p[i] != ' ') {
        byte_write((uint8_t)p[i]);
    }
}

static void put_key(const char *key)
{
    byte_write(' ');
    put_str(key);
    byte_write('=');
}

/* One meta line with the keys in mask. */
static void put_meta(const struct loop *lp, unsigned mask)
{
    const struct loop_board *b = &lp->board;
    byte_write('#');
    if (mask & M_VREF) {
        put_key("vref");
        put_mv(b->vref_mv);
    }
    if (mask & M_BITS) {
        put_key("adc_bits");
        put_u32(b->adc_bits);
    }
    if (mask & M_PERIOD) {
        put_key("period_us");
        put_u32(lp->set.period_us);
    }
    if (mask & M_MODE) {
        put_key("mode");
        put_str(lp->set.mode == LOOP_TWO_STATE ? "two-state" : "three-state");
    }
    if (mask & M_DEADBAND) {
        put_key("deadband");
        put_u32(lp->set.deadband);
    }
    if ((mask & M_SUPPLY) && b->supply_mv != 0u) {
        put_key("supply");
        put_mv(b->supply_mv);
    }
    if ((mask & M_R) && b->r_ohm != 0u) {
        put_key("r");
        put_si(b->r_ohm, " kM");
    }
    if ((mask & M_C) && b->c_pf != 0u) {
        put_key("c");
        put_si(b->c_pf, "pnu");
    }
    if ((mask & M_LOAD) && b->load_ohm != 0u) {
        put_key("load");
        put_si(b->load_ohm, " kM");
    }
    byte_write('\n');
}

/* The whole description: both meta lines and the set keys this loop takes. */
static void put_info(const struct loop *lp)
{
    put_meta(lp, META_LOOP);
    if (lp->board.supply_mv != 0u || lp->board.r_ohm != 0u || lp->board.c_pf != 0u ||
        lp->board.load_ohm != 0u) {
        put_meta(lp, META_PARTS);
    }
    put_str("# accepts=sp,mode,deadband,period_us\n");
}

static void put_error(const char *why)
{
    put_str("# error: ");
    put_str(why);
    byte_write('\n');
}

/* ---- settings -------------------------------------------------------------------- */

static uint16_t full_scale(const struct loop *lp)
{
    return (uint16_t)((1u << lp->board.adc_bits) - 1u);
}

static uint16_t max_deadband(const struct loop *lp)
{
    return (uint16_t)((1u << lp->board.adc_bits) / 4u);
}

void loop_init(struct loop *lp, const struct loop_board *board, const struct loop_settings *set)
{
    lp->board = *board;
    if (lp->board.adc_bits < 4u) {
        lp->board.adc_bits = 4u;
    } else if (lp->board.adc_bits > 16u) {
        lp->board.adc_bits = 16u;
    }
    lp->set = *set;
    if (lp->set.sp > full_scale(lp)) {
        lp->set.sp = full_scale(lp);
    }
    if (lp->set.mode != LOOP_TWO_STATE) {
        lp->set.mode = LOOP_THREE_STATE;
    }
    if (lp->set.deadband > max_deadband(lp)) {
        lp->set.deadband = max_deadband(lp);
    }
    if (lp->set.period_us < LOOP_PERIOD_MIN_US) {
        lp->set.period_us = LOOP_PERIOD_MIN_US;
    } else if (lp->set.period_us > LOOP_PERIOD_MAX_US) {
        lp->set.period_us = LOOP_PERIOD_MAX_US;
    }
    lp->n = 0u;
    lp->line_len = 0u;
    lp->line_over = 0u;
    drive_set(LOOP_HOLD);
    /* The newline first ends whatever the host read before the start (a boot message,
     * noise on the line), so the start-up comment reads whole. */
    put_str("\n# reference loop start\n");
    put_info(lp);
    lp->last_us = micros();
    lp->next_us = lp->last_us + lp->set.period_us; /* the first sample, one period on */
}

/* ---- control --------------------------------------------------------------------- */

int8_t loop_decide(uint8_t mode, uint16_t deadband, uint16_t sp, uint16_t pv)
{
    int32_t e = (int32_t)pv - (int32_t)sp;
    if (mode == LOOP_TWO_STATE) {
        return e < 0 ? LOOP_CHARGE : LOOP_DISCHARGE;
    }
    if (e > (int32_t)deadband) {
        return LOOP_DISCHARGE;
    }
    if (e < -(int32_t)deadband) {
        return LOOP_CHARGE;
    }
    return LOOP_HOLD;
}

/* One sample: read, decide, drive, report. */
static void sample(struct loop *lp, uint32_t t_us)
{
    uint16_t pv = adc_read();
    int8_t u = loop_decide(lp->set.mode, lp->set.deadband, lp->set.sp, pv);
    drive_set(u);
    put_str("t=");
    put_u32(t_us);
    put_str(" n=");
    put_u32(lp->n);
    put_str(" sp=");
    put_u32(lp->set.sp);
    put_str(" pv=");
    put_u32(pv);
    put_str(" u=");
    put_i8(u);
    byte_write('\n');
    lp->n++;
}

/* ---- host lines ------------------------------------------------------------------ */

static int is_space(char c) { return c == ' ' || c == '\t'; }

/* s[0..n) equals the literal word w. */
static int word_is(const char *s, uint16_t n, const char *w)
{
    uint16_t i = 0;
    while (i < n && w[i] != '\0' && s[i] == w[i]) {
        i++;
    }
    return i == n && w[i] == '\0';
}

/* A decimal number of at most 9 digits (no sign, no blanks); 0 when it is not one. */
static int parse_u32(const char *s, uint16_t n, uint32_t *out)
{
    uint32_t v = 0;
    uint16_t i;
    if (n == 0u || n > 9u) {
        return 0;
    }
    for (i = 0; i < n; i++) {
        if (s[i] < '0' || s[i] > '9') {
            return 0;
        }
        v = v * 10u + (uint32_t)(s[i] - '0');
    }
    *out = v;
    return 1;
}

/* One key=value of a set line; returns the meta bit it changed, or 0. */
static unsigned set_one(struct loop *lp, const char *kv, uint16_t n)
{
    uint16_t eq = 0;
    const char *v;
    uint16_t vn;
    uint32_t x;
    while (eq < n && kv[eq] != '=') {
        eq++;
    }
    if (eq == n || eq == 0u) {
        put_error("set wants key=value");
        return 0;
    }
    v = kv + eq + 1;
    vn = (uint16_t)(n - eq - 1u);
    if (word_is(kv, eq, "sp")) {
        if (!parse_u32(v, vn, &x) || x > full_scale(lp)) {
            put_error("sp wants counts from 0 to full scale");
            return 0;
        }
        lp->set.sp = (uint16_t)x;
        put_str("# setpoint ");
        put_u32(x);
        put_str(" held\n");
        return 0;
    }
    if (word_is(kv, eq, "mode")) {
        if (word_is(v, vn, "two-state")) {
            lp->set.mode = LOOP_TWO_STATE;
        } else if (word_is(v, vn, "three-state")) {
            lp->set.mode = LOOP_THREE_STATE;
        } else {
            put_error("mode wants two-state or three-state");
            return 0;
        }
        return M_MODE;
    }
    if (word_is(kv, eq, "deadband")) {
        if (!parse_u32(v, vn, &x) || x > max_deadband(lp)) {
            put_error("deadband wants counts from 0 to a quarter of full scale");
            return 0;
        }
        lp->set.deadband = (uint16_t)x;
        return M_DEADBAND;
    }
    if (word_is(kv, eq, "period_us")) {
        if (!parse_u32(v, vn, &x) || x < LOOP_PERIOD_MIN_US || x > LOOP_PERIOD_MAX_US) {
            put_error("period_us out of range");
            return 0;
        }
        lp->set.period_us = x;
        lp->next_us = lp->last_us + x; /* the new period starts at the last sample */
        return M_PERIOD;
    }
    put_error("unknown key, want sp, mode, deadband or period_us");
    return 0;
}

/* Runs the complete host line in lp->line. */
static void run_line(struct loop *lp)
{
    const char *s = lp->line;
    uint16_t n = lp->line_len;
    uint16_t i = 0, w, pairs = 0;
    unsigned changed = 0;
    while (i < n && is_space(s[i])) {
        i++;
    }
    w = i;
    while (i < n && !is_space(s[i])) {
        i++;
    }
    if (i == w) {
        return; /* a blank line */
    }
    if (word_is(s + w, (uint16_t)(i - w), "info") || word_is(s + w, (uint16_t)(i - w), "?")) {
        put_info(lp);
        return;
    }
    if (!word_is(s + w, (uint16_t)(i - w), "set")) {
        put_error("unknown command, want set or info");
        return;
    }
    for (;;) {
        while (i < n && is_space(s[i])) {
            i++;
        }
        if (i == n) {
            break;
        }
        w = i;
        while (i < n && !is_space(s[i])) {
            i++;
        }
        changed |= set_one(lp, s + w, (uint16_t)(i - w));
        pairs++;
    }
    if (pairs == 0u) {
        put_error("set wants key=value");
    }
    if (changed != 0u) {
        put_meta(lp, changed);
    }
}

/* Takes one byte from the host. */
static void take(struct loop *lp, uint8_t c)
{
    if (c == '\n') {
        if (lp->line_over) {
            put_error("line too long");
        } else {
            run_line(lp);
        }
        lp->line_len = 0u;
        lp->line_over = 0u;
        return;
    }
    if (c == '\r') {
        return;
    }
    if (lp->line_len >= LOOP_LINE_MAX) {
        lp->line_over = 1u;
        return;
    }
    lp->line[lp->line_len++] = (char)c;
}

/* ---- main loop ------------------------------------------------------------------- */

/* At most this many host bytes are taken per poll, so a flood cannot delay a sample. */
#define LOOP_BYTES_PER_POLL 32

void loop_poll(struct loop *lp)
{
    uint32_t now = micros();
    uint32_t late = now - lp->next_us;
    int i;
    if (late < 0x80000000u) {
        sample(lp, now);
        lp->last_us = now;
        if (late >= lp->set.period_us) {
            lp->next_us = now + lp->set.period_us; /* fell behind: skip, do not burst */
        } else {
            lp->next_us += lp->set.period_us;
        }
    }
    for (i = 0; i < LOOP_BYTES_PER_POLL; i++) {
        int16_t c = byte_read();
        if (c < 0) {
            break;
        }
        take(lp, (uint8_t)c);
    }
}

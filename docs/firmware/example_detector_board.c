/*
 * example_detector_board.c - example firmware for a detector board that streams ADC samples to
 * dbtrail in either of its wire modes (see ../protocol.md).
 *
 * Written for no particular microcontroller: fill in the four board functions at the top
 * (ADC read, serial write, a periodic tick, start-up) for yours. Everything else is plain
 * C99. One or two channels, ASCII lines or binary frames, chosen by the defines below.
 * Two channels suit a directional coupler with a detector on each arm: forward on
 * channel 1 and reflected on channel 2, as ../../profiles/demo-coupler.toml has them.
 *
 * Safety: the detector's input must never see more than its rated power. Put enough
 * attenuation in front of it, and respect the ratings of loads and attenuators.
 */

#include <stdint.h>
#include <stddef.h>

#define CHANNELS      1      /* 1 or 2 */
#define BINARY_MODE   0      /* 0: ASCII lines, 1: binary frames */
#define SAMPLE_HZ     1000u  /* samples per second */

/* ---- board functions: provide these for your hardware ---------------------------- */
void     board_init(uint32_t sample_hz);        /* clocks, ADC, serial, a SAMPLE_HZ tick */
uint16_t board_adc_read(uint8_t channel);       /* one conversion, 0 .. 2^bits - 1 */
void     board_serial_write(const uint8_t *bytes, size_t count);
int      board_tick_elapsed(void);              /* 1 once per sample period, then 0 */

/* ---- CRC-16/CCITT-FALSE: poly 0x1021, init 0xFFFF, check("123456789") = 0x29B1 ---- */
static uint16_t crc16_ccitt_false(const uint8_t *data, size_t count)
{
    uint16_t crc = 0xFFFF;
    while (count--) {
        crc ^= (uint16_t)(*data++) << 8;
        for (int bit = 0; bit < 8; bit++)
            crc = (crc & 0x8000) ? (uint16_t)((crc << 1) ^ 0x1021) : (uint16_t)(crc << 1);
    }
    return crc;
}

/* A binary frame: A5 5A | seq (LE) | n | counts (LE) | crc of seq..counts (LE). */
static void send_frame(uint16_t seq, const uint16_t *counts, uint8_t n)
{
    uint8_t frame[7 + 2 * 8];
    size_t at = 0;
    frame[at++] = 0xA5;
    frame[at++] = 0x5A;
    frame[at++] = (uint8_t)(seq & 0xFF);
    frame[at++] = (uint8_t)(seq >> 8);
    frame[at++] = n;
    for (uint8_t i = 0; i < n; i++) {
        frame[at++] = (uint8_t)(counts[i] & 0xFF);
        frame[at++] = (uint8_t)(counts[i] >> 8);
    }
    uint16_t crc = crc16_ccitt_false(&frame[2], at - 2);
    frame[at++] = (uint8_t)(crc & 0xFF);
    frame[at++] = (uint8_t)(crc >> 8);
    board_serial_write(frame, at);
}

/* An ASCII line: counts in decimal separated by commas, ended by LF. */
static void send_line(const uint16_t *counts, uint8_t n)
{
    char line[8 * 6 + 1];
    size_t at = 0;
    for (uint8_t i = 0; i < n; i++) {
        char digits[5];
        int len = 0;
        uint16_t value = counts[i];
        do {
            digits[len++] = (char)('0' + value % 10);
            value /= 10;
        } while (value);
        if (i)
            line[at++] = ',';
        while (len)
            line[at++] = digits[--len];
    }
    line[at++] = '\n';
    board_serial_write((const uint8_t *)line, at);
}

static void send_banner(void)
{
    /* A comment line: dbtrail ignores it, and it absorbs the line a reader skips when
       it joins the stream part-way. */
    static const char banner[] = "# detector board, example firmware\n";
    board_serial_write((const uint8_t *)banner, sizeof banner - 1);
}

int main(void)
{
    uint16_t counts[CHANNELS];
    uint16_t seq = 0;

    board_init(SAMPLE_HZ);
    if (!BINARY_MODE)
        send_banner();
    for (;;) {
        if (!board_tick_elapsed())
            continue;
        for (uint8_t ch = 0; ch < CHANNELS; ch++)
            counts[ch] = board_adc_read(ch);
        if (BINARY_MODE)
            send_frame(seq++, counts, CHANNELS);
        else
            send_line(counts, CHANNELS);
    }
}

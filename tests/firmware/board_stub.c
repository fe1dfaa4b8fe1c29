/* A stand-in board for docs/firmware/example_detector_board.c: a ramp on each channel written to
   standard output, stopping after a few samples. Used by tests/firmware_example.rs. */
#include <stdint.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>

static int ticks = 0;

void board_init(uint32_t sample_hz) { (void)sample_hz; }

uint16_t board_adc_read(uint8_t channel) { return (uint16_t)(1000 + 100 * channel + ticks); }

void board_serial_write(const uint8_t *bytes, size_t count) { fwrite(bytes, 1, count, stdout); }

int board_tick_elapsed(void)
{
    if (ticks == 6) {
        fflush(stdout);
        exit(0);
    }
    ticks++;
    return 1;
}

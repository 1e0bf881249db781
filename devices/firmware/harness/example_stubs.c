/* Host versions of the six functions the porting guide's main loop leaves to the firmware engineer
 * (devices/firmware/README.md, "A main loop for a generic microcontroller"), so the example itself can
 * run as a board on stdin/stdout in tests: readings are simulated (channel 2 touched from frame 20 to
 * 59), the UART is stdio, flash is the file `example_store.bin` in the working directory. Compile with
 * -DEXAMPLE_CHANNELS=N (the profile's channel count) and -DEXAMPLE_FRAMES=M (frames before it stops).
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#ifndef EXAMPLE_CHANNELS
#error "compile with -DEXAMPLE_CHANNELS=<the profile's channel count>"
#endif
#ifndef EXAMPLE_FRAMES
#define EXAMPLE_FRAMES 100
#endif

void measure_all(int32_t *readings);
int uart_read_byte(void);
void uart_write_byte(void *ctx, char c);
int frame_due(void);
int storage_write(const void *data, size_t bytes);
int storage_read(void *data, size_t bytes);

static long frames_done;

void measure_all(int32_t *readings)
{
    int c;
    for (c = 0; c < EXAMPLE_CHANNELS; c++) {
        int touched = c == 2 && frames_done >= 20 && frames_done < 60;
        readings[c] = 30000 - 100 * c + (int32_t)(frames_done % 3) + (touched ? 500 : 0);
    }
    frames_done++;
}

int uart_read_byte(void)
{
    static int ended;
    int c = ended ? EOF : getchar();
    if (c == EOF) {
        ended = 1;
        return -1;
    }
    return c;
}

void uart_write_byte(void *ctx, char c)
{
    (void)ctx;
    putchar((unsigned char)c);
}

int frame_due(void)
{
    if (frames_done >= EXAMPLE_FRAMES) {
        fflush(stdout);
        exit(0);
    }
    return 1;
}

int storage_write(const void *data, size_t bytes)
{
    FILE *f = fopen("example_store.bin", "wb");
    int ok = f != NULL && fwrite(data, 1, bytes, f) == bytes;
    if (f != NULL && fclose(f) != 0) {
        ok = 0;
    }
    return ok ? 0 : -1;
}

int storage_read(void *data, size_t bytes)
{
    FILE *f = fopen("example_store.bin", "rb");
    int ok = f != NULL && fread(data, 1, bytes, f) == bytes;
    if (f != NULL) {
        fclose(f);
    }
    return ok ? 0 : -1;
}

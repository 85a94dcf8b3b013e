/*
 * stapes from C: streams a clip stored in flash through the C API and
 * reports every frame's exact bits over semihosting, for the host to
 * compare with its own.
 *
 * Passes (one arithmetic per build, STAPES_EXAMPLE_ARITH_*):
 *   P preset-last   kws16k-mel40 compiled in, the model's int8 codes, and
 *                   the model's window of frames (a CRC-32 per window)
 *   P preset-log    kws16k-mel40 compiled in, the log stage
 *   P blob-mfcc     the kws16k-mfcc10 table blob, the model's codes
 *   P blob-pcen     the kws16k-pcen40 table blob, the model's codes
 * Each frame is a line "F <index> <hex of every value>"; each window handed
 * out "W <index of its last frame> <crc32>". Then the RAM figures and
 * "STAPES-END". Samples go in blocks of 128, as from a DMA half-buffer.
 */
#include <stdint.h>
#include <stddef.h>

#include "stapes.h"
#include "semihosting.h"

#if defined(STAPES_EXAMPLE_ARITH_F32)
#define ARITH "f32"
typedef stapes_f32_state state_t;
#define init_preset stapes_f32_init_preset
#define init_blob stapes_f32_init_blob
#define next_frame stapes_f32_next_frame
#define stream_info stapes_f32_info
#elif defined(STAPES_EXAMPLE_ARITH_FIXED16)
#define ARITH "fixed16"
typedef stapes_fixed16_state state_t;
#define init_preset stapes_fixed16_init_preset
#define init_blob stapes_fixed16_init_blob
#define next_frame stapes_fixed16_next_frame
#define stream_info stapes_fixed16_info
#elif defined(STAPES_EXAMPLE_ARITH_FIXED32)
#define ARITH "fixed32"
typedef stapes_fixed32_state state_t;
#define init_preset stapes_fixed32_init_preset
#define init_blob stapes_fixed32_init_blob
#define next_frame stapes_fixed32_next_frame
#define stream_info stapes_fixed32_info
#else
#error "define one of STAPES_EXAMPLE_ARITH_F32, _FIXED16, _FIXED32"
#endif

#define BLOCK 128
/* The kws16k presets' window: 49 frames of 40 int8 codes. */
#define WINDOW_FRAMES 49
#define WINDOW_VALUES 40

/* Linked in by clip.S: the raw 16-bit clip and the two table blobs. */
extern const int16_t stapes_example_clip[];
extern const uint8_t stapes_example_clip_end[];
extern const uint8_t stapes_example_blob_mfcc[];
extern const uint8_t stapes_example_blob_mfcc_end[];
extern const uint8_t stapes_example_blob_pcen[];
extern const uint8_t stapes_example_blob_pcen_end[];

/* The stack's limits, from the linker script, and the painted depth. */
extern uint32_t __stack_limit[];
extern uint32_t __stack_top[];
#define PAINT 0x5AA5F00Du

static state_t state;
static uint8_t window_storage[STAPES_WINDOW_STORAGE_BYTES(WINDOW_FRAMES, WINDOW_VALUES, 1)]
    __attribute__((aligned(4)));
static stapes_window window;

static void fail(const char *what, int32_t status) {
    sh_puts("STAPES-ERROR ");
    sh_puts(what);
    sh_puts(": ");
    sh_puts(stapes_status_message(status));
    sh_puts("\n");
    sh_exit(1);
}

static uint32_t crc32(const uint8_t *p, size_t n) {
    /* CRC-32 (IEEE 802.3, reflected 0xEDB88320): common practice. */
    uint32_t c = 0xFFFFFFFFu;
    for (size_t i = 0; i < n; i++) {
        c ^= p[i];
        for (int k = 0; k < 8; k++) c = (c >> 1) ^ (0xEDB88320u & (0u - (c & 1u)));
    }
    return ~c;
}

static unsigned value_digits(int32_t type) {
    switch (type) {
    case STAPES_VALUE_INT8:
    case STAPES_VALUE_UINT8: return 2;
    case STAPES_VALUE_Q8_8: return 4;
    default: return 8;
    }
}

/* "F <index> <hex>" for one frame. */
static void print_frame(const stapes_frame *f) {
    static char line[16 + 8 * 64 + 2];
    size_t at = 0;
    line[at++] = 'F';
    line[at++] = ' ';
    at += sh_format_u32(line + at, (uint32_t)f->index);
    line[at++] = ' ';
    unsigned digits = value_digits(f->value_type);
    for (uint32_t i = 0; i < f->count && i < 64; i++) {
        uint32_t bits;
        switch (digits) {
        case 2: bits = ((const uint8_t *)f->values)[i]; break;
        case 4: bits = ((const uint16_t *)f->values)[i]; break;
        default: bits = ((const uint32_t *)f->values)[i]; break;
        }
        at += sh_format_hex(line + at, bits, digits);
    }
    line[at++] = '\n';
    line[at] = 0;
    sh_puts(line);
}

static uint32_t stack_used(void) {
    uint32_t *p = __stack_limit;
    while (p < __stack_top && *p == PAINT) p++;
    return (uint32_t)((uintptr_t)__stack_top - (uintptr_t)p);
}

/* Streams the clip through `state`, printing frames (and windows). */
static void stream(const char *pass, int with_window) {
    stapes_stream_info info;
    int32_t s = stream_info(&state, &info);
    if (s != STAPES_OK) fail("info", s);
    sh_puts("P ");
    sh_puts(pass);
    sh_puts("\n");
    if (with_window) {
        s = stapes_window_init(&window, window_storage, sizeof window_storage,
                               info.model_window_frames, info.model_window_stride);
        if (s != STAPES_OK) fail("window", s);
    }
    const int16_t *samples = stapes_example_clip;
    size_t total = (size_t)((const int16_t *)(const void *)stapes_example_clip_end - samples);
    for (size_t start = 0; start < total; start += BLOCK) {
        size_t n = total - start < BLOCK ? total - start : BLOCK;
        const int16_t *p = samples + start;
        while (n > 0) {
            size_t used = 0;
            stapes_frame frame;
            s = next_frame(&state, p, n, &used, &frame);
            if (s < 0) fail("next_frame", s);
            p += used;
            n -= used;
            if (s != STAPES_FRAME_READY) continue;
            print_frame(&frame);
            if (with_window) {
                stapes_window_view view;
                s = stapes_window_push(&window, &frame, &view);
                if (s < 0) fail("window_push", s);
                if (s == STAPES_WINDOW_READY) {
                    char line[40] = "W ";
                    size_t at = 2;
                    at += sh_format_u32(line + at, (uint32_t)frame.index);
                    line[at++] = ' ';
                    at += sh_format_hex(line + at,
                                        crc32(view.values, (size_t)view.frames * view.values_per_frame), 8);
                    line[at++] = '\n';
                    line[at] = 0;
                    sh_puts(line);
                }
            }
        }
    }
}

int main(void) {
    sh_puts("STAPES-BEGIN arith=" ARITH " core=" STAPES_EXAMPLE_CORE "\n");
    int32_t s = init_preset(&state, STAPES_PRESET_KWS16K_MEL40, STAPES_STAGE_LAST);
    if (s != STAPES_OK) fail("init_preset", s);
    stream("preset-last", 1);
    s = init_preset(&state, STAPES_PRESET_KWS16K_MEL40, STAPES_STAGE_LOG);
    if (s != STAPES_OK) fail("init_preset log", s);
    stream("preset-log", 0);
    s = init_blob(&state, stapes_example_blob_mfcc,
                  (size_t)(stapes_example_blob_mfcc_end - stapes_example_blob_mfcc), STAPES_STAGE_LAST);
    if (s != STAPES_OK) fail("init_blob mfcc", s);
    stream("blob-mfcc", 0);
    s = init_blob(&state, stapes_example_blob_pcen,
                  (size_t)(stapes_example_blob_pcen_end - stapes_example_blob_pcen), STAPES_STAGE_LAST);
    if (s != STAPES_OK) fail("init_blob pcen", s);
    stream("blob-pcen", 0);

    /* A corrupt blob is refused with a status, not a crash. */
    static uint8_t corrupt[64] __attribute__((aligned(4)));
    for (size_t i = 0; i < sizeof corrupt; i++) corrupt[i] = stapes_example_blob_mfcc[i];
    corrupt[40] ^= 0x01;
    s = stapes_blob_check(corrupt, sizeof corrupt);
    sh_puts("STAPES-CORRUPT-BLOB ");
    sh_puts(stapes_status_message(s));
    sh_puts("\n");

    char line[80] = "STAPES-RAM state=";
    size_t at = 17;
    at += sh_format_u32(line + at, (uint32_t)sizeof state);
    const char *k = " window=";
    while (*k) line[at++] = *k++;
    at += sh_format_u32(line + at, (uint32_t)sizeof window_storage);
    k = " stack=";
    while (*k) line[at++] = *k++;
    at += sh_format_u32(line + at, stack_used());
    line[at++] = '\n';
    line[at] = 0;
    sh_puts(line);
    sh_puts("STAPES-END\n");
    sh_exit(0);
    return 0;
}

#include "semihosting.h"

static uint32_t sh_call(uint32_t op, const void *arg) {
    register uint32_t r0 __asm__("r0") = op;
    register const void *r1 __asm__("r1") = arg;
    __asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
    return r0;
}

void sh_puts(const char *s) { (void)sh_call(0x04 /* SYS_WRITE0 */, s); }

void sh_exit(int code) {
    /* SYS_EXIT with ADP_Stopped_ApplicationExit (0x20026) or
     * ADP_Stopped_RunTimeErrorUnknown (0x20023): QEMU exits 0 or 1. */
    (void)sh_call(0x18, (const void *)(uintptr_t)(code == 0 ? 0x20026u : 0x20023u));
    for (;;) {
    }
}

size_t sh_format_u32(char *out, uint32_t v) {
    char tmp[10];
    size_t n = 0;
    do {
        tmp[n++] = (char)('0' + v % 10u);
        v /= 10u;
    } while (v);
    for (size_t i = 0; i < n; i++) out[i] = tmp[n - 1 - i];
    return n;
}

size_t sh_format_hex(char *out, uint32_t v, unsigned digits) {
    static const char hex[] = "0123456789abcdef";
    for (unsigned i = 0; i < digits; i++) out[i] = hex[(v >> (4u * (digits - 1u - i))) & 0xFu];
    return digits;
}

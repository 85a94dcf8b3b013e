/* Reset handler and vector table for the C example (no C library):
 * copies .data, zeroes .bss, paints the stack for the high-water mark,
 * turns the FPU on for hard-float builds, and calls main. */
#include <stdint.h>

#include "semihosting.h"

extern uint32_t __data_load[], __data_start[], __data_end[];
extern uint32_t __bss_start[], __bss_end[];
extern uint32_t __stack_limit[], __stack_top[];
int main(void);

#define PAINT 0x5AA5F00Du

__attribute__((noreturn, naked)) void reset_handler(void);

__attribute__((noreturn, used)) static void start(void) {
#if defined(__ARM_FP)
    /* CPACR: full access to CP10 and CP11 before any FP instruction. */
    *(volatile uint32_t *)0xE000ED88u |= 0xFu << 20;
    __asm__ volatile("dsb\n\tisb" ::: "memory");
#endif
    for (uint32_t *s = __data_load, *d = __data_start; d < __data_end;) *d++ = *s++;
    for (uint32_t *d = __bss_start; d < __bss_end;) *d++ = 0;
    /* Paint the stack below this frame (keep 64 bytes of margin). */
    uint32_t *sp;
    __asm__ volatile("mov %0, sp" : "=r"(sp));
    for (uint32_t *p = __stack_limit; p < sp - 16; p++) *p = PAINT;
    (void)main();
    sh_exit(1);
}

void reset_handler(void) {
    __asm__ volatile("ldr r0, =__stack_top\n\tmov sp, r0\n\tb start");
}

static void fault_handler(void) {
    sh_puts("STAPES-FAULT\n");
    sh_exit(1);
}

__attribute__((section(".vector_table"), used)) static const void *const vectors[16] = {
    __stack_top,   reset_handler, fault_handler, fault_handler, fault_handler, fault_handler,
    fault_handler, 0,             0,             0,             0,             fault_handler,
    fault_handler, 0,             fault_handler, fault_handler,
};

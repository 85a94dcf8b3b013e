/* Semihosting output and exit (the debugger's console: QEMU prints
 * SYS_WRITE0 on its standard error), and small formatters. */
#ifndef STAPES_EXAMPLE_SEMIHOSTING_H
#define STAPES_EXAMPLE_SEMIHOSTING_H
#include <stddef.h>
#include <stdint.h>

void sh_puts(const char *s);
void sh_exit(int code) __attribute__((noreturn));
size_t sh_format_u32(char *out, uint32_t v);
size_t sh_format_hex(char *out, uint32_t v, unsigned digits);
#endif

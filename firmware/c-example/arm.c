/* The example station on a bare Cortex-M (M0 and M4F under QEMU): vector table, reset,
 * console and exit over semihosting. The blob and the vectors are linked in (data.c). */
#include <stdint.h>

#include "station.h"

extern const uint8_t model_blob[];
extern const uint32_t model_blob_len;
extern const int32_t test_vectors[];
extern const uint32_t test_width, test_count;

extern uint32_t _sidata, _sdata, _edata, _sbss, _ebss, _stack_top;

/* Semihosting call (ARM DUI 0471: operation in r0, argument block in r1, BKPT 0xAB on M-profile). */
static int semihost(int op, const void *arg) {
    register int r0 __asm__("r0") = op;
    register const void *r1 __asm__("r1") = arg;
    __asm__ volatile("bkpt 0xAB" : "+r"(r0) : "r"(r1) : "memory");
    return r0;
}

/* The host's standard output: SYS_OPEN of ":tt" for writing (mode 4), opened once. */
static int console = -1;

void board_write(const char *s) {
    if (console < 0) {
        const void *open_args[3] = {":tt", (const void *)4, (const void *)3};
        console = semihost(0x01 /* SYS_OPEN */, open_args);
    }
    uint32_t n = 0;
    while (s[n]) n++;
    const void *write_args[3] = {(const void *)(intptr_t)console, s, (const void *)(uintptr_t)n};
    semihost(0x05 /* SYS_WRITE */, write_args);
}

static void board_exit(int code) {
    /* SYS_EXIT with ADS_Stopped_ApplicationExit: QEMU exits with status 0; anything else
     * as a run-time error (status 1). */
    semihost(0x18, (const void *)(uintptr_t)(code == 0 ? 0x20026 : 0x20023));
    for (;;) {
    }
}

/* Stack high-water mark: free RAM is painted at reset, and the lowest overwritten word
 * after the run says how deep the stack went (set-up and every step included). */
#define PAINT 0xA5A5A5A5u

static void paint_stack(void) {
    uint32_t *p = &_ebss;
    uint32_t *sp;
    __asm__ volatile("mov %0, sp" : "=r"(sp));
    while (p < sp - 16) *p++ = PAINT;
}

static uint32_t stack_used(void) {
    uint32_t *p = &_ebss;
    while (p < &_stack_top && *p == PAINT) p++;
    return (uint32_t)((uintptr_t)&_stack_top - (uintptr_t)p);
}

static void put_u32(uint32_t v) {
    char buf[12], *q = buf + sizeof buf - 1;
    *q = 0;
    do {
        *--q = (char)('0' + v % 10u);
        v /= 10u;
    } while (v);
    board_write(q);
}

int main(void) {
    paint_stack();
    int rc = run_station(model_blob, model_blob_len, test_vectors, test_width, test_count);
    board_write("# stack bytes used: ");
    put_u32(stack_used());
    board_write("\n# static RAM bytes: ");
    put_u32((uint32_t)((uintptr_t)&_ebss - (uintptr_t)&_sdata));
    board_write("\n");
    return rc;
}

void reset_handler(void) {
    uint32_t *src = &_sidata, *dst = &_sdata;
    while (dst < &_edata) *dst++ = *src++;
    for (dst = &_sbss; dst < &_ebss;) *dst++ = 0;
#if defined(__ARM_FP)
    /* Cortex-M4F: allow the FPU (CPACR CP10/CP11 full access), should the compiler use it. */
    *(volatile uint32_t *)0xE000ED88 |= 0xFu << 20;
    __asm__ volatile("dsb\n isb");
#endif
    board_exit(main());
}

static void fault_handler(void) {
    board_write("# hard fault\n");
    board_exit(1);
}

__attribute__((section(".vectors"), used)) static const void *const vectors[16] = {
    &_stack_top, (const void *)reset_handler, (const void *)fault_handler, (const void *)fault_handler,
    (const void *)fault_handler, (const void *)fault_handler, (const void *)fault_handler,
};

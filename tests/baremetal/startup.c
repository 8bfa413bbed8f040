/*
 * Minimal bare-metal start-up for an emulated Cortex-M4 (qemu-system-arm -M
 * mps2-an386 -semihosting): a vector table, a reset handler that enables the
 * FPU, zeroes .bss and calls main(), and ARM semihosting for the console and the
 * exit status.  Semihosting calls are "bkpt 0xab" with the operation in r0 and
 * its argument in r1 (ARM, "Semihosting for AArch32 and AArch64", SYS_WRITE0 =
 * 0x04, SYS_EXIT = 0x18 with ADP_Stopped_ApplicationExit = 0x20026 for success).
 */
#include <stdint.h>

int main(void);
extern uint32_t __bss_start__, __bss_end__, __stack_top__;

static int semihost(int op, const void *arg)
{
    register int r0 __asm__("r0") = op;
    register const void *r1 __asm__("r1") = arg;
    __asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
    return r0;
}

void bm_puts(const char *text)
{
    semihost(0x04, text);
}

static void bm_exit(int ok)
{
    /* ADP_Stopped_ApplicationExit (exit status 0) or ADP_Stopped_InternalError (1) */
    semihost(0x18, (const void *)(uintptr_t)(ok ? 0x20026u : 0x20024u));
    for (;;) {
    }
}

void Reset_Handler(void)
{
    uint32_t *p;
#if defined(__ARM_FP)
    *(volatile uint32_t *)0xE000ED88u |= 0xFu << 20; /* CPACR: full access to CP10, CP11 */
    __asm__ volatile("dsb\n\tisb");
#endif
    for (p = &__bss_start__; p < &__bss_end__; p++) {
        *p = 0u;
    }
    bm_exit(main() == 0);
}

void Fault_Handler(void)
{
    bm_puts("fault\n");
    bm_exit(0);
}

__attribute__((section(".vectors"), used)) static const uintptr_t vectors[16] = {
    (uintptr_t)&__stack_top__, (uintptr_t)Reset_Handler, (uintptr_t)Fault_Handler, (uintptr_t)Fault_Handler,
    (uintptr_t)Fault_Handler, (uintptr_t)Fault_Handler, (uintptr_t)Fault_Handler, 0, 0, 0, 0,
    (uintptr_t)Fault_Handler, (uintptr_t)Fault_Handler, 0, (uintptr_t)Fault_Handler, (uintptr_t)Fault_Handler,
};

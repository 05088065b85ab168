//! The little the bench needs of the device: SysTick as an instruction counter, semihosting
//! output and exit, and a panic handler that the no-panic audit can recognise.
//!
//! Under `qemu-system-arm -M mps2-an386 -icount shift=0` every executed instruction advances
//! the virtual clock by 1 ns, and SysTick on its processor clock (25 MHz) counts down one
//! tick per 40 ns: one tick per 40 executed instructions. The bench calibrates this against
//! a loop of known length before it measures anything.

use core::arch::asm;
use core::ptr::{read_volatile, write_volatile};
use core::sync::atomic::{compiler_fence, Ordering};

const SYST_CSR: *mut u32 = 0xe000_e010 as *mut u32;
const SYST_RVR: *mut u32 = 0xe000_e014 as *mut u32;
const SYST_CVR: *mut u32 = 0xe000_e018 as *mut u32;
/// SysTick counts down from this 24-bit value; a measurement must stay below it.
const RELOAD: u32 = 0x00ff_ffff;

/// SysTick ticks spent in `f`: the counter is stopped, reloaded and restarted first, so it
/// never wraps within a measurement of under 2^24 ticks (671 M instructions).
#[inline(always)]
pub fn ticks(f: impl FnOnce()) -> u32 {
    // SAFETY: SysTick's registers exist on every ARMv7-M core; nothing else uses SysTick.
    let start = unsafe {
        write_volatile(SYST_CSR, 0);
        write_volatile(SYST_RVR, RELOAD);
        write_volatile(SYST_CVR, 0); // clears the counter; it reloads on the next tick
        write_volatile(SYST_CSR, 0b101); // enable, processor clock, no interrupt
        read_volatile(SYST_CVR)
    };
    compiler_fence(Ordering::SeqCst);
    f();
    compiler_fence(Ordering::SeqCst);
    // SAFETY: as above.
    let end = unsafe { read_volatile(SYST_CVR) };
    // `start` may still read 0 (before the first reload); count from RELOAD + 1 then.
    let start = if start == 0 { RELOAD + 1 } else { start };
    start.wrapping_sub(end) & RELOAD
}

/// A loop of exactly `2 * n` instructions (`subs`, `bne`), for the calibration.
#[inline(never)]
pub fn spin(n: u32) {
    if n == 0 {
        return;
    }
    // SAFETY: only the register handed in is written; no memory is touched.
    unsafe {
        asm!("1:", "subs {0}, #1", "bne 1b", inout(reg) n => _, options(nomem, nostack));
    }
}

/// Semihosting call `op` with parameter `arg` (a `bkpt 0xab` that QEMU serves).
#[inline(always)]
fn semihost(op: u32, arg: usize) -> u32 {
    let ret: u32;
    // SAFETY: the semihosting operations used here only read the memory `arg` points to.
    unsafe {
        asm!("bkpt 0xab", inout("r0") op => ret, in("r1") arg, options(nostack));
    }
    ret
}

/// Writes a NUL-terminated string to the host's standard output (SYS_WRITE0).
fn write0(bytes_with_nul: &[u8]) {
    if bytes_with_nul.last() == Some(&0) {
        semihost(0x04, bytes_with_nul.as_ptr() as usize);
    }
}

/// Ends the program: QEMU exits with status 0 when `ok`, 1 otherwise (SYS_EXIT with
/// ADP_Stopped_ApplicationExit, or ADP_Stopped_RunTimeErrorUnknown).
pub fn exit(ok: bool) -> ! {
    let reason = if ok { 0x2_0026 } else { 0x2_0023 };
    loop {
        semihost(0x18, reason);
    }
}

/// Prints `text` (any length) to the host.
pub fn print(text: &str) {
    let mut line = Line::new();
    for &b in text.as_bytes() {
        if line.len == line.buf.len() - 1 {
            line.flush();
        }
        line.byte(b);
    }
    line.flush();
}

/// One line of output, built without `core::fmt` (whose number formatting links panics).
pub struct Line {
    buf: [u8; 160],
    len: usize,
}

impl Line {
    pub fn new() -> Line {
        Line {
            buf: [0; 160],
            len: 0,
        }
    }

    fn byte(&mut self, b: u8) {
        // The last byte stays free for the NUL.
        if self.len + 1 < self.buf.len() {
            if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = b;
                self.len += 1;
            }
        }
    }

    pub fn str(&mut self, s: &str) -> &mut Line {
        for &b in s.as_bytes() {
            self.byte(b);
        }
        self
    }

    /// `n` in decimal, preceded by a space.
    pub fn num(&mut self, n: usize) -> &mut Line {
        let mut digits = [0u8; 20];
        let mut i = digits.len();
        let mut n = n;
        loop {
            i -= 1;
            if let Some(d) = digits.get_mut(i) {
                *d = b'0' + (n % 10) as u8;
            }
            n /= 10;
            if n == 0 || i == 0 {
                break;
            }
        }
        self.byte(b' ');
        for &d in digits.get(i..).unwrap_or(&[]) {
            self.byte(d);
        }
        self
    }

    fn flush(&mut self) {
        if let Some(nul) = self.buf.get_mut(self.len) {
            *nul = 0;
            write0(self.buf.get(..=self.len).unwrap_or(&[]));
        }
        self.len = 0;
    }

    /// Ends the line and prints it.
    pub fn send(&mut self) {
        self.byte(b'\n');
        self.flush();
    }
}

/// Every panic ends here. Nothing in an audited image may branch to it: the audit
/// (`scripts/device-bench.sh`) looks for this name in the disassembly.
#[inline(never)]
fn firmware_panic_trap() -> ! {
    print("PANIC: a panic path was taken on the device\n");
    exit(false)
}

#[panic_handler]
fn on_panic(_: &core::panic::PanicInfo) -> ! {
    firmware_panic_trap()
}

//! Semihosting: output, exit status, command line.

use cortex_m_semihosting::{debug, nr};

/// End the emulation with exit status 0 (`pass`) or 1.
pub fn exit(pass: bool) -> ! {
    debug::exit(if pass {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    // Only reached when no debugger or emulator is listening.
    loop {
        cortex_m::asm::wfi();
    }
}

/// The command line the emulator was started with (QEMU: the kernel file name, then the
/// `-append` text), copied into `buf`; `None` when the host offers none.
pub fn command_line(buf: &mut [u8]) -> Option<&str> {
    // SYS_GET_CMDLINE (0x15): a block of buffer address and length; the host writes a
    // NUL-terminated line and stores its length (without the NUL) in the second word.
    let mut block = [buf.as_mut_ptr() as usize, buf.len()];
    // SAFETY: the block and the buffer it points at are live and writable for the call;
    // the host writes at most the stated length.
    let status =
        unsafe { cortex_m_semihosting::syscall1(nr::GET_CMDLINE, block.as_mut_ptr() as usize) };
    if status != 0 {
        return None;
    }
    let len = block[1].min(buf.len());
    buf.get(..len).and_then(|b| core::str::from_utf8(b).ok())
}

/// The value of `key=value` in a whitespace-separated command line.
pub fn arg<'a>(line: &'a str, key: &str) -> Option<&'a str> {
    line.split_ascii_whitespace().find_map(|word| {
        word.strip_prefix(key)
            .and_then(|rest| rest.strip_prefix('='))
    })
}

/// A decimal integer with an optional sign.
pub fn parse_i32(text: &str) -> Option<i32> {
    let (neg, digits) = match text.as_bytes().first() {
        Some(b'-') => (true, text.get(1..)?),
        Some(b'+') => (false, text.get(1..)?),
        _ => (false, text),
    };
    if digits.is_empty() {
        return None;
    }
    let mut value: i32 = 0;
    for b in digits.bytes() {
        let d = b.checked_sub(b'0').filter(|d| *d < 10)?;
        value = value.checked_mul(10)?.checked_add(i32::from(d))?;
    }
    Some(if neg { -value } else { value })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn command_line_words() {
        let line = "chain.elf node=3 nodes=5 ppm=-45 delay=+12";
        assert_eq!(arg(line, "node"), Some("3"));
        assert_eq!(arg(line, "nodes"), Some("5"));
        assert_eq!(arg(line, "ppm").and_then(parse_i32), Some(-45));
        assert_eq!(arg(line, "delay").and_then(parse_i32), Some(12));
        assert_eq!(arg(line, "tol_us"), None);
    }

    #[test]
    fn integers_are_checked() {
        assert_eq!(parse_i32("2147483647"), Some(i32::MAX));
        assert_eq!(parse_i32("2147483648"), None);
        assert_eq!(parse_i32("-"), None);
        assert_eq!(parse_i32("12a"), None);
        assert_eq!(parse_i32(""), None);
    }
}
